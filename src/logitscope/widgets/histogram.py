"""Confidence histogram: correct and wrong samples apart, interval brushing selects samples.

Bin counts are computed in Python over all rows; the browser receives the
counts only. An interval brush sends back its two ends, and the selected
rows are those whose score lies in the closed interval.
"""

from __future__ import annotations

from typing import Any

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets
from bqplot.interacts import BrushIntervalSelector
from bqplot.traits import array_serialization
from traittypes import Array  # the array trait bqplot declares its own with

from ..errors import ParameterError
from ..frame import LogitFrame
from ..ticks import nice_ticks
from .base import LinkedView
from .state import SharedState
from .style import RIGHT, SCORE_NAMES, UNLABELLED, WRONG, css, figure_layout, score_menu, score_options

__all__ = ["ConfidenceHistogram", "QuietIntervalBrush"]


class QuietIntervalBrush(BrushIntervalSelector):
    """bqplot's interval brush without echo messages: the kernel does not send each mouse move back."""

    brushing = traitlets.Bool().tag(sync=True, echo_update=False)
    selected = Array(None, allow_none=True).tag(sync=True, echo_update=False, **array_serialization)


_FADED = 0.3


class ConfidenceHistogram(LinkedView, widgets.VBox):
    """Histogram of a per-sample score with correct and wrong samples apart.

    Parameters
    ----------
    frame : LogitFrame
        The data.
    state : SharedState, optional
        Shared state; a new one is made when None.
    score : str, default "confidence"
        The score binned (any of :data:`logitscope.widgets.scatter.SCATTER_SCORES`).
    bins : int, default 30
        Number of equal-width bins between the smallest and largest value.
    layout_mode : {"stacked", "side by side"}
        How the correct and wrong counts are drawn.
    name : str, optional
        Readable name shown where the view's selection is described.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.9]]), labels=[0, 1, 1])
    >>> view = ConfidenceHistogram(frame, bins=4)
    >>> view.select_interval(0.0, 0.6).tolist()  # the one sample with confidence <= 0.6
    [2]
    >>> [int(c) for c in view.counts()[0]], [int(c) for c in view.counts()[1]]
    ([0, 0, 1, 1], [1, 0, 0, 0])
    """

    kind = "histogram"
    score = traitlets.Unicode("confidence", help="the score binned")
    layout_mode = traitlets.Enum(["stacked", "side by side"], default_value="stacked")

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        score: str = "confidence",
        bins: int = 30,
        layout_mode: str = "stacked",
        name: str | None = None,
        **kwargs: Any,
    ) -> None:
        self.link(frame, state, name)
        self.scores_offered = score_menu(frame.has_labels, frame.source)
        if score not in self.scores_offered:
            raise ParameterError(f"score={score!r} is not offered; choose from {self.scores_offered}")
        if int(bins) < 1:
            raise ParameterError(f"bins must be at least 1, got {bins}")
        self.n_bins = int(bins)
        self._interval: tuple[float, float] | None = None
        self.edges = np.zeros(0)
        self._codes = np.zeros(0, dtype=np.int64)

        self._sx = bq.LinearScale()
        self._sy = bq.LinearScale(min=0.0)
        labelled = frame.has_labels
        series = ["correct", "wrong"] if labelled else ["all samples"]
        colors = [RIGHT, WRONG] if labelled else [RIGHT]
        if labelled and not frame.fully_labelled:  # a partly labelled batch: the unlabelled rows apart
            series, colors = [*series, "no label"], [*colors, UNLABELLED]
        self._bars = bq.Bars(
            x=np.zeros(1),
            y=np.zeros((len(series), 1)),
            scales={"x": self._sx, "y": self._sy},
            colors=colors,
            labels=series,
            padding=0.05,
            type="stacked",
            stroke="white",
        )
        self._sel_bars = bq.Bars(
            x=np.zeros(1),
            y=np.zeros((len(series), 1)),
            scales={"x": self._sx, "y": self._sy},
            colors=[RIGHT, WRONG] if labelled else [RIGHT],
            labels=[f"{s}, selected" for s in series],
            padding=0.05,
            type="stacked",
            opacities=[1.0] * len(series),
            visible=False,
        )
        self._ax = bq.Axis(scale=self._sx, label=score, grid_lines="none", tick_format="~g", label_offset="34px")
        self._ay = bq.Axis(
            scale=self._sy, side="left", label="samples", grid_lines="none", tick_format="~s", label_offset="42px"
        )
        self._brush = QuietIntervalBrush(scale=self._sx, marks=[], color="#7f9cc0")
        self._brush.observe(self._on_brush, ["brushing", "selected"])
        self.figure = bq.Figure(
            display_toolbar=False,
            marks=[self._bars, self._sel_bars],
            axes=[self._ax, self._ay],
            interaction=self._brush,
            fig_margin={"top": 10, "bottom": 48, "left": 58, "right": 12},
            layout=figure_layout("100%", "330px", "260px"),
        )
        self._menu = widgets.Dropdown(
            options=score_options(self.scores_offered), value=score, description="score", layout={"width": "210px"}
        )
        self._mode_buttons = widgets.ToggleButtons(
            options=["stacked", "side by side"], value=layout_mode, style={"button_width": "106px"}
        )
        key = "".join(
            f"<span class='ls-swatch' style='background:{c}'></span>{s}" for c, s in zip(colors, series, strict=True)
        )
        self._key = widgets.HTML(f"{css('views')}<span class='ls-key'>{key} (selected: full colour)</span>")
        widgets.VBox.__init__(
            self,
            children=[
                widgets.HBox([self._menu, self._mode_buttons], layout={"flex_flow": "row wrap"}),
                self._key,
                self.figure,
            ],
            **kwargs,
        )
        self.add_class("logitscope-histogram")
        self.score, self.layout_mode = score, layout_mode
        widgets.link((self._menu, "value"), (self, "score"))
        widgets.link((self._mode_buttons, "value"), (self, "layout_mode"))
        self.observe(self._on_score, "score")
        self.observe(self._on_layout_mode, "layout_mode")
        self._on_layout_mode()
        self._redraw()

    # ------------------------------------------------------------------ numbers

    def values(self) -> np.ndarray:
        """The binned score of every row at the shared temperature."""
        value = getattr(self.frame.sample_scores(self.state.temperature), self.score, None)
        if value is None:
            raise ParameterError(f"score {self.score!r} is not available for this frame")
        return np.asarray(value, dtype=np.float64)

    def _groups(self) -> list[np.ndarray]:
        """Boolean masks of the drawn series: correct and wrong, or all samples."""
        if not self.frame.has_labels:
            return [np.ones(self.frame.n_samples, dtype=bool)]
        correct = self.frame.sample_scores(self.state.temperature).correct
        assert correct is not None  # the frame has labels
        if self.frame.fully_labelled:
            return [correct, ~correct]
        known = self.frame.labelled
        return [correct & known, ~correct & known, ~known]

    def counts(self, rows: np.ndarray | None = None) -> np.ndarray:
        """Counts per series and bin (shape ``(series, bins)``), of all rows or of ``rows``.

        Bins are closed on the left and open on the right, the last bin closed
        on both sides (as :func:`numpy.histogram`).
        """
        codes = self._codes if rows is None else self._codes[rows]
        codes = codes[codes >= 0]  # rows without a value of this score (unlabelled rows' label scores)
        n_series = len(self._groups())
        return np.bincount(codes, minlength=n_series * self.n_bins).reshape(n_series, self.n_bins)

    def _redraw(self) -> None:
        v = self.values()
        finite = v[np.isfinite(v)]
        lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
        if hi <= lo:
            lo, hi = lo - 0.5, hi + 0.5
        self.edges = np.histogram_bin_edges(finite, bins=self.n_bins, range=(lo, hi))
        # bin of every row, once per score and temperature; a selection then costs one bincount
        bins = np.clip(np.searchsorted(self.edges, v, side="right") - 1, 0, self.n_bins - 1)
        series = np.zeros(v.shape[0], dtype=np.int64)
        for i, mask in enumerate(self._groups()):
            series[mask] = i
        self._codes = np.where(np.isfinite(v), series * self.n_bins + bins, -1)
        centres = (self.edges[:-1] + self.edges[1:]) / 2
        width = self.edges[1] - self.edges[0]
        with self.figure.hold_sync():
            self._sx.min, self._sx.max = lo - width / 2, hi + width / 2
            self._ax.tick_values = np.asarray(nice_ticks(lo, hi, n=6))
            counts = self.counts()
            with self._bars.hold_sync():
                self._bars.x = centres
                self._bars.y = counts
            # the count axis is fixed by the tallest bar: a selection's bars (never taller) leave it alone,
            # where a domain taken from the data would be worked out again, and both marks redrawn, each time
            self._fix_count_axis()
            self._ax.label = SCORE_NAMES.get(self.score, self.score)
            with self._sel_bars.hold_sync():
                self._sel_bars.x = centres
                self._sel_bars.y = np.zeros((len(self._groups()), self.n_bins))
        self._on_rows()

    # ------------------------------------------------------------------ selection in

    def _on_rows(self, change: Any = None) -> None:
        rows = self.state.rows
        if not self.owns_selection and self._interval is not None:
            self._interval = None
            self._brush.selected = None  # bqplot redraws the brush from it (its reset does nothing)
        n_series = len(self._groups())
        if rows.size == 0:
            self._sel_bars.visible = False
            self._bars.opacities = [1.0] * n_series
            return
        with self._sel_bars.hold_sync():
            self._sel_bars.y = self.counts(rows)
            self._sel_bars.visible = True
        self._bars.opacities = [_FADED] * n_series

    def _on_temperature(self, change: Any) -> None:
        self._interval = None
        self._brush.selected = None  # bqplot redraws the brush from it (its reset does nothing)
        self._redraw()

    def _on_score(self, change: Any) -> None:
        self._interval = None
        self._brush.selected = None  # bqplot redraws the brush from it (its reset does nothing)
        self._redraw()

    def _fix_count_axis(self) -> None:
        """The count axis from 0 to the tallest bar drawn (a stack, or one bar side by side)."""
        counts = np.asarray(self._bars.y)
        tallest = counts.sum(axis=0).max() if self.layout_mode == "stacked" else counts.max()
        self._sy.max = float(max(tallest, 1))

    def _on_layout_mode(self, change: Any = None) -> None:
        kind = "stacked" if self.layout_mode == "stacked" else "grouped"
        with self.figure.hold_sync():
            self._bars.type = kind
            self._sel_bars.type = kind
            self._fix_count_axis()

    # ------------------------------------------------------------------ selection out

    def select_interval(self, low: float, high: float) -> np.ndarray:
        """Select every row whose score lies in ``[low, high]``; return the rows."""
        lo, hi = sorted((float(low), float(high)))
        v = self.values()
        self._interval = (lo, hi)
        return self.select(np.flatnonzero((v >= lo) & (v <= hi)))

    def _on_brush(self, change: Any) -> None:
        b = self._brush
        if b.brushing:
            return
        sel = b.selected
        if sel is None or len(sel) < 2:
            if self._interval is not None and self.owns_selection:
                self._interval = None
                self.clear_selection()
            return
        interval = tuple(sorted((float(sel[0]), float(sel[1]))))
        if interval == self._interval:
            return
        self.select_interval(*interval)

    # ------------------------------------------------------------------ hooks of the linked view

    def held_widgets(self) -> list[Any]:
        return [self._sel_bars, self._bars, self._brush]

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        self._on_rows()

    def on_temperature(self, temperature: float) -> None:
        self._on_temperature(None)

    def on_frame(self) -> None:
        self._interval = None
        self._brush.selected = None
        self._redraw()
