"""Class-mix view: has a new batch's class mix moved away from a reference?

The view renders the :class:`~logitscope.analysis.ClassMixCheck` that
:meth:`LogitFrame.class_mix_check <logitscope.LogitFrame.class_mix_check>`
returns for the batch and the reference, exactly as returned (``view.check``):
against a reference *frame* the two-sample test of homogeneity of the counted
classes, against known *proportions* the multinomial goodness-of-fit test,
with a Monte Carlo p-value where an expected count is small and, for an
unlabelled batch and a labelled reference frame, the batch's class priors
re-estimated by EM (Saerens, Latinne and Decaestecker 2002) at the shared
temperature.

Like every linked view it follows the shared state: clicking a class's bars
selects the batch's rows counted for that class (the gallery then shows
them), Ctrl-clicking them (or the "clear" button) clears that selection, and
a selection made in another view is drawn as the class shares of the selected rows.
"""

from __future__ import annotations

import html
from typing import Any, Literal

import bqplot as bq
import ipywidgets as widgets
import numpy as np

from .. import analysis as an
from ..errors import ParameterError
from ..frame import LogitFrame
from ..parameters import check as check_parameter
from ..text import shorten, unique_keys
from .base import LinkedView
from .state import SharedState
from .style import REFERENCE, SELECTED, css, figure_layout

__all__ = ["ClassMixView"]

_BATCH, _ESTIMATE = "#3b6ea8", "#d9822b"
_TICK_CHARS = 18


class ClassMixView(LinkedView, widgets.VBox):
    """Reference class shares beside a batch's, with the check of the difference; click a class to select it.

    Parameters
    ----------
    batch : LogitFrame
        The new data; the view's selections are rows of this frame.
    reference : LogitFrame or array_like
        A frame with the same classes (its counted classes are a second sample:
        test of homogeneity) or class proportions known in advance, summing to 1
        (goodness of fit).
    state : SharedState, optional
        Shared state over ``batch``; a new one is made when None.
    counts : {"predicted", "labels"}
        What is counted in each row (labels need labelled frames).
    alpha : float
        Significance level (in the range of ``alpha``, :mod:`logitscope.parameters`).
    statistic : {"pearson", "g"}
        Pearson's chi-square or the likelihood-ratio G statistic.
    n_draws, seed : int
        Monte Carlo draws and their seed, used where an expected count is below 5.
    name : str, optional
        Readable name shown where the view's selection is described.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> ref = LogitFrame(np.eye(3)[[0, 1, 2, 2] * 10] * 4, labels=[0, 1, 2, 2] * 10)
    >>> new = LogitFrame(np.eye(3)[[0, 0, 0, 2] * 10] * 4)
    >>> view = ClassMixView(new, ref)
    >>> view.check.test, view.check.observed.tolist(), view.check.shifted
    ('homogeneity', [30.0, 0.0, 10.0], True)
    >>> view.select_class(2).tolist()  # the rows predicted as class 2
    [3, 7, 11, 15, 19, 23, 27, 31, 35, 39]
    >>> view.selected_class, view.state.origin_name
    (2, 'class mix')
    """

    kind = "class mix"

    def __init__(
        self,
        batch: LogitFrame,
        reference: LogitFrame | Any,
        state: SharedState | None = None,
        *,
        counts: Literal["predicted", "labels"] = "predicted",
        alpha: float = 0.05,
        statistic: Literal["pearson", "g"] = "pearson",
        n_draws: int = 10_000,
        seed: int = 0,
        name: str | None = None,
        **kwargs: Any,
    ) -> None:
        self.link(batch, state, name)
        if counts not in ("predicted", "labels"):
            raise ParameterError(f"counts must be 'predicted' or 'labels', got {counts!r}")
        self.reference = reference
        self.counts = counts
        self.options: dict[str, Any] = {
            "alpha": float(check_parameter(alpha, "alpha")),
            "counts": counts,
            "statistic": statistic,
            "n_draws": int(check_parameter(n_draws, "n_draws")),
            "seed": int(seed),
        }
        self.check: an.ClassMixCheck = self._run_check()
        self.selected_class: int | None = None
        k = batch.n_classes
        names = list(batch.classes)
        self._keys = unique_keys(names)
        self._sx = bq.OrdinalScale()
        self._sy = bq.LinearScale(min=0.0)
        scales = {"x": self._sx, "y": self._sy}
        self.bars = bq.Bars(
            x=np.asarray(self._keys, dtype=object), y=np.zeros((2, k)), scales=scales, type="grouped",
            colors=[REFERENCE, _BATCH], labels=["reference", "batch"], interactions={"click": "select"},
            selected_style={"stroke": SELECTED, "stroke-width": "2.5px"}, unselected_style={"opacity": "0.45"},
            tooltip=bq.Tooltip(fields=["x", "y"], labels=["class", "share"], formats=["", ".1%"]),
        )  # fmt: skip
        self.estimate_dots = bq.Scatter(
            x=np.asarray(self._keys, dtype=object), y=np.zeros(k), scales=scales, colors=[_ESTIMATE],
            default_size=48, stroke="white", visible=False,
            tooltip=bq.Tooltip(fields=["x", "y"], labels=["class", "EM estimate"], formats=["", ".1%"]),
        )  # fmt: skip
        self.selection_dots = bq.Scatter(
            x=np.asarray(self._keys, dtype=object), y=np.zeros(k), scales=scales, colors=[SELECTED], marker="diamond",
            default_size=56, stroke="white", visible=False,
            tooltip=bq.Tooltip(fields=["x", "y"], labels=["class", "share of the selection"], formats=["", ".1%"]),
        )  # fmt: skip
        longest = max(len(shorten(n, _TICK_CHARS, where="middle")) for n in names)
        rotate = k > 6 or longest * 7 > 480 / k
        bottom = int(min(40 + 5.2 * longest, 140)) if rotate else 44
        self._ax_x = bq.Axis(
            scale=self._sx, label="class", tick_rotate=-40 if rotate else 0,
            tick_labels={k: shorten(n, _TICK_CHARS, where="middle") for k, n in zip(self._keys, names, strict=True)},
            tick_style={"text-anchor": "end"} if rotate else {}, label_offset=f"{bottom - 10}px",
        )  # fmt: skip
        ax_y = bq.Axis(scale=self._sy, side="left", label="share of samples", tick_format=".0%", grid_lines="dashed")
        self.figure = bq.Figure(
            marks=[self.bars, self.estimate_dots, self.selection_dots], axes=[self._ax_x, ax_y],
            fig_margin={"top": 14, "bottom": bottom, "left": 60, "right": 10}, display_toolbar=False,
            layout=figure_layout("100%", "340px", "320px"),
        )  # fmt: skip
        self.readout = widgets.HTML()
        self.note = widgets.HTML()
        self.clear_button = widgets.Button(
            description="clear", tooltip="clear the class selection", disabled=True, layout={"width": "auto"}
        )
        self.clear_button.on_click(lambda _: self.select_class(None))
        swatch = "<span class='ls-swatch' style='background:{}'></span>{}"
        key = "".join(
            swatch.format(c, t)
            for c, t in (
                (REFERENCE, "reference"),
                (_BATCH, "batch"),
                (_ESTIMATE, "EM estimate of the batch's mix"),
                (SELECTED, "selected rows"),
            )
        )
        title = widgets.HTML(
            css("views") + f"<div class='ls-subhead'>Class mix</div><span class='ls-key'>{key}"
            " · click a class's bars to select its rows</span>"
        )
        note_row = widgets.HBox([self.note, self.clear_button], layout={"align_items": "center"})
        widgets.VBox.__init__(self, children=[title, self.figure, note_row, self.readout], **kwargs)
        self.add_class("logitscope-class-mix")
        self.bars.observe(self._on_bar_click, "selected")
        self._draw()

    # ------------------------------------------------------------------ numbers

    def _run_check(self) -> an.ClassMixCheck:
        """``batch.class_mix_check(reference, ...)`` with the view's options at the shared temperature."""
        return self.frame.class_mix_check(self.reference, temperature=self.state.temperature, **self.options)

    def classes_of_rows(self) -> np.ndarray:
        """The class each batch row is counted for (its predicted class, or its label with ``counts="labels"``)."""
        if self.counts == "labels":
            assert self.frame.labels is not None  # the check refused an unlabelled batch already
            return np.asarray(self.frame.labels)
        return np.asarray(self.frame.sample_scores().predicted)

    def _draw(self) -> None:
        c = self.check
        with self.figure.hold_sync():
            with self.bars.hold_sync():
                self.bars.y = np.vstack([c.reference_share, c.batch_share])
            with self.estimate_dots.hold_sync():
                if c.priors is not None:
                    self.estimate_dots.y = np.asarray(c.priors)
                self.estimate_dots.visible = c.priors is not None
        self.readout.value = css("views") + self._readout_html()
        self._show_selection()

    def _readout_html(self) -> str:
        c = self.check
        names = self.frame.classes
        moved = [int(i) for i in np.argsort(-np.abs(c.residuals), kind="stable")[:3] if c.expected[i] > 0]

        def name(i: int) -> str:
            full = names[i]
            return f"<span title='{html.escape(full)}'>{html.escape(shorten(full, 40, where='middle'))}</span>"

        listed = ", ".join(f"{name(i)} ({c.residuals[i]:+.1f})" for i in moved)
        verdict = (
            f"<b>The mix has moved</b> (p = {c.p_value:.3g} &lt; {c.alpha:g})."
            if c.shifted
            else f"No shift detected at level {c.alpha:g} (p = {c.p_value:.3g})."
        )
        rows = [
            ("test", html.escape(c.method)),
            ("statistic", f"{c.statistic:.3f} on {c.dof} degrees of freedom"),
            ("p-value", f"{c.p_value:.4g} ({html.escape(c.p_value_method)})"),
            ("moved most (residuals)", listed or "none"),
        ]
        if c.priors is not None:
            steps = "" if c.prior_iterations is None else f", {c.prior_iterations} EM steps"
            rows.append(("EM estimate", f"shown as dots (Saerens et al. 2002{steps})"))
        body = "".join(f"<tr><th>{k}</th><td class='ls-text'>{v}</td></tr>" for k, v in rows)
        notes = "".join(f"<li>{html.escape(n)}</li>" for n in c.notes)
        notes_html = f"<ul class='ls-note'>{notes}</ul>" if notes else ""
        return f"<p class='ls-note'>{verdict}</p><table class='ls-readout ls-wide'>{body}</table>{notes_html}"

    # ------------------------------------------------------------------ selection out

    def select_class(self, k: int | None) -> np.ndarray:
        """Select the batch rows counted for class ``k`` (None: clear this view's selection); return them."""
        if k is None:
            self.selected_class = None
            self.clear_selection()
            return self.state.rows
        if not 0 <= int(k) < self.frame.n_classes:
            raise ParameterError(f"class index must lie in [0, {self.frame.n_classes}), got {k}")
        self.selected_class = int(k)
        rows = self.select(np.flatnonzero(self.classes_of_rows() == int(k)))
        self._show_selection()
        return rows

    def _on_bar_click(self, change: Any) -> None:
        if self.is_quiet:
            return
        picked = change["new"]
        if picked is None or len(picked) == 0:
            if self.selected_class is not None and self.owns_selection:
                self.select_class(None)
            return
        self.select_class(int(picked[-1]))

    # ------------------------------------------------------------------ selection in

    def _show_selection(self) -> None:
        rows = self.state.rows
        mine = self.owns_selection and self.selected_class is not None
        self.clear_button.disabled = not mine
        with self.quietly():
            self.bars.selected = [self.selected_class] if mine else None
        if rows.size == 0 or mine:
            self.selection_dots.visible = False
            what = "" if not mine else self._selected_note(rows)
            self.note.value = what
            return
        counted = np.bincount(self.classes_of_rows()[rows], minlength=self.frame.n_classes)
        with self.selection_dots.hold_sync():
            self.selection_dots.y = counted / counted.sum()
            self.selection_dots.visible = True
        self.note.value = (
            css("views") + f"<span class='ls-note'>{rows.size:,} rows selected{self.selected_by()}: "
            "their class shares are the diamonds</span>"
        )

    def _selected_note(self, rows: np.ndarray) -> str:
        full = self.frame.classes[self.selected_class] if self.selected_class is not None else ""
        what = "predicted as" if self.counts == "predicted" else "labelled"
        return (
            css("views") + f"<span class='ls-note'>{rows.size:,} batch rows {what} "
            f"<span title='{html.escape(full)}'>{html.escape(shorten(full, 40, where='middle'))}</span> selected "
            "(Ctrl-click the bars or press clear to clear)</span>"
        )

    # ------------------------------------------------------------------ hooks of the linked view

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        if not mine:
            self.selected_class = None
        self._show_selection()

    def on_temperature(self, temperature: float) -> None:
        # the counted classes do not move with T; the EM estimate of the priors does
        self.check = self._run_check()
        self._draw()

    def on_frame(self) -> None:
        self.selected_class = None
        self.check = self._run_check()
        self._draw()
