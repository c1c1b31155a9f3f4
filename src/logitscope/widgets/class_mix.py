"""Class-mix view: has a new batch's class mix moved away from a reference?

The view compares a batch's class counts with reference proportions by the
multinomial goodness-of-fit tests of :mod:`logitscope.analysis.class_mix`
(Pearson or G statistic) and, for an unlabelled batch, shows the priors
re-estimated by the EM method of Saerens, Latinne and Decaestecker (2002).
Clicking a class's bar selects the batch's samples of that class (predicted,
or labelled when the batch has labels and ``counts="labels"``).
"""

from __future__ import annotations

import html
from typing import Any, Literal

import bqplot as bq
import ipywidgets as widgets
import numpy as np

from .. import analysis as an
from ..errors import ClassNameError, ParameterError
from ..frame import LogitFrame
from .base import LinkedView
from .state import SharedState

__all__ = ["ClassMixView"]

_REFERENCE, _BATCH, _ESTIMATE = "#8a94a1", "#3b6ea8", "#d9822b"


class ClassMixView(LinkedView, widgets.VBox):
    """Reference class proportions beside a batch's, with a multinomial test of the difference.

    Parameters
    ----------
    batch : LogitFrame
        The new data; the view's selections are rows of this frame.
    reference : LogitFrame or array_like
        A labelled reference frame (its label counts are the reference mix)
        or reference proportions / counts, one per class.
    state : SharedState, optional
        Shared state over ``batch``; a new one is made when None.
    counts : {"predicted", "labels"}
        Which classes of the batch are counted (labels need a labelled batch).
    statistic : {"pearson", "g"}
        Test statistic (:func:`logitscope.analysis.class_mix_test`).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> ref = LogitFrame(np.eye(3)[[0, 1, 2, 2]] * 4, labels=[0, 1, 2, 2])
    >>> new = LogitFrame(np.eye(3)[[0, 0, 0, 2]] * 4)
    >>> view = ClassMixView(new, ref)
    >>> view.test.observed.tolist(), round(view.test.statistic, 3)
    ([3.0, 0.0, 1.0], 5.5)
    >>> view.select_class(0).tolist()
    [0, 1, 2]
    """

    kind = "class mix"

    def __init__(
        self,
        batch: LogitFrame,
        reference: LogitFrame | Any,
        state: SharedState | None = None,
        *,
        counts: Literal["predicted", "labels"] = "predicted",
        statistic: an.class_mix.Statistic = "pearson",
        name: str | None = None,
        **kwargs: Any,
    ) -> None:
        self.link(batch, state, name)
        k = batch.n_classes
        if isinstance(reference, LogitFrame):
            if reference.classes != batch.classes:
                raise ClassNameError("the reference and the batch must have the same classes in the same order")
            if reference.labels is None:
                raise ParameterError("a reference frame needs labels (its label counts are the reference mix)")
            ref_counts = an.class_counts(reference.labels, k).astype(np.float64)
        else:
            ref_counts = np.asarray(reference, dtype=np.float64)
            if ref_counts.shape != (k,):
                raise ParameterError(f"reference proportions must have {k} entries, got shape {ref_counts.shape}")
        if counts not in ("predicted", "labels"):
            raise ParameterError(f"counts must be 'predicted' or 'labels', got {counts!r}")
        if counts == "labels" and batch.labels is None:
            raise ParameterError("counts='labels' needs a labelled batch")
        self.counts = counts
        self.reference_mix = ref_counts / ref_counts.sum()
        self._classes_of_rows = np.empty(0, dtype=np.int64)
        self._statistic = statistic
        self.test: an.ClassMixTest
        self.estimate: an.PriorEstimate | None = None

        self._sx = bq.OrdinalScale()
        self._sy = bq.LinearScale(min=0.0)
        self.bars = bq.Bars(
            x=list(batch.classes), y=np.zeros((2, k)), scales={"x": self._sx, "y": self._sy},
            type="grouped", colors=[_REFERENCE, _BATCH], labels=["reference", "batch"],
            interactions={"click": "select"},
        )  # fmt: skip
        self.estimate_line = bq.Lines(
            x=list(batch.classes), y=np.zeros(k), scales={"x": self._sx, "y": self._sy},
            colors=[_ESTIMATE], marker="circle", stroke_width=0, marker_size=36,
            labels=["EM estimate"], visible=False,
        )  # fmt: skip
        ax_x = bq.Axis(scale=self._sx, label="class", tick_rotate=-35 if k > 8 else 0)
        ax_y = bq.Axis(scale=self._sy, side="left", label="share of samples", tick_format=".0%")
        self.figure = bq.Figure(
            marks=[self.bars, self.estimate_line], axes=[ax_x, ax_y],
            fig_margin={"top": 20, "bottom": 70, "left": 60, "right": 10},
            layout=widgets.Layout(width="100%", height="320px"),
        )  # fmt: skip
        self.readout = widgets.HTML()
        key = " ".join(
            f"<span style='display:inline-block;width:10px;height:10px;background:{c};margin:0 4px 0 12px'></span>{t}"
            for c, t in ((_REFERENCE, "reference"), (_BATCH, "batch"), (_ESTIMATE, "EM estimate (unlabelled batch)"))
        )
        title = widgets.HTML(f"<b>Class mix</b><span style='font-size:12px'>{key}</span>")
        widgets.VBox.__init__(self, children=[title, self.figure, self.readout], **kwargs)
        self.add_class("logitscope-class-mix")
        self.bars.observe(self._on_bar_click, "selected")
        self._recompute()

    # ------------------------------------------------------------------ numbers

    def _recompute(self, change: Any = None) -> None:
        k = self.frame.n_classes
        if self.counts == "labels":
            assert self.frame.labels is not None
            self._classes_of_rows = np.asarray(self.frame.labels)
        else:
            self._classes_of_rows = self.frame.sample_scores(self.state.temperature).predicted
        observed = an.class_counts(self._classes_of_rows, k)
        self.test = an.class_mix_test(observed, self.reference_mix, statistic=self._statistic)
        self.estimate = None
        if self.counts == "predicted" and self.frame.labels is None:
            with an.assume_valid():
                self.estimate = an.estimate_priors(
                    self.frame.logits, self.reference_mix, temperature=self.state.temperature
                )
        batch_mix = observed / observed.sum()
        with self.bars.hold_sync():
            self.bars.y = np.vstack([self.reference_mix, batch_mix])
        with self.estimate_line.hold_sync():
            if self.estimate is not None:
                self.estimate_line.y = self.estimate.priors
            self.estimate_line.visible = self.estimate is not None
        self.readout.value = self._readout_html()

    def _readout_html(self) -> str:
        t = self.test
        moved = np.argsort(-np.abs(t.residual))[:3]
        names = ", ".join(
            f"{html.escape(self.frame.classes[i])} ({'+' if t.residual[i] > 0 else ''}{t.residual[i]:.1f})"
            for i in moved
            if t.expected[i] > 0
        )
        what = "predicted classes" if self.counts == "predicted" else "labels"
        stat = "Pearson chi-square" if self._statistic == "pearson" else "G statistic"
        est = ""
        if self.estimate is not None:
            est = (
                f"<br>Class priors re-estimated from the probabilities (Saerens et al. 2002, EM, "
                f"{self.estimate.iterations} steps) are shown as dots."
            )
        return (
            f"<div style='font-size:13px'>Counts of the batch's {what} ({int(t.observed.sum()):,} samples) against "
            f"the reference mix: {stat} {t.statistic:.2f} on {t.dof} degrees of freedom, "
            f"p = {t.p_value:.3g}. Classes that moved most (Pearson residuals): {names}.{est}</div>"
        )

    # ------------------------------------------------------------------ selection

    def select_class(self, k: int) -> np.ndarray:
        """Select the batch rows counted for class ``k``; returns them."""
        if not 0 <= int(k) < self.frame.n_classes:
            raise ParameterError(f"class index must lie in [0, {self.frame.n_classes}), got {k}")
        rows = np.flatnonzero(self._classes_of_rows == int(k))
        return self.select(rows)

    def _on_bar_click(self, change: Any) -> None:
        picked = change["new"]
        if picked is None or len(picked) == 0:
            return
        self.select_class(int(picked[0]))
        self.bars.selected = None

    def on_temperature(self, temperature: float) -> None:
        self._recompute()
