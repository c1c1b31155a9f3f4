"""Reliability diagram: accuracy per confidence bin against the diagonal, with ECE, MCE, NLL and Brier.

Bins come from :func:`logitscope.analysis.reliability_bins` at the shared
temperature (equal-width or equal-mass). Each bin is drawn as a rectangle
(exact bin edges, so equal-mass bins keep their widths), the gap between the
bin's accuracy and its mean confidence is shaded, and a strip below shows how
many samples each bin holds. Clicking a bin selects its samples
(``ReliabilityBins.bin_of``); the selection of another view is shown as the
share of each bin it covers.
"""

from __future__ import annotations

import html
from typing import Any, cast

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets

from .. import analysis as an
from ..analysis.calibration import Strategy
from ..errors import ParameterError
from ..frame import LogitFrame
from .scatter import COLOR_RIGHT, COLOR_WRONG, view_state
from .state import SharedState, rows_or_all

__all__ = ["ReliabilityDiagram", "calibration_numbers", "numbers_table"]

_STRATEGIES = {"equal width": "uniform", "equal mass": "quantile"}
_SELECTED_FILL = "#1f3f66"
_PAD = 0.06  # share of a bin's width left blank on each side


def calibration_numbers(frame: LogitFrame, rows: np.ndarray, temperature: float, bins: an.ReliabilityBins) -> dict:
    """ECE, MCE (from ``bins``), NLL, Brier and accuracy of ``rows`` at ``temperature`` (cached scores).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0]]), labels=[0, 0])
    >>> s = frame.sample_scores(1.0)
    >>> b = an.reliability_bins(s.confidence, s.correct)
    >>> calibration_numbers(frame, np.arange(2), 1.0, b)["accuracy"]
    0.5
    """
    s = frame.sample_scores(temperature)
    assert s.true_log_probability is not None and s.brier is not None and s.correct is not None
    return {
        "n": int(rows.size),
        "temperature": float(temperature),
        "accuracy": float(np.mean(s.correct[rows])),
        "ece": bins.ece,
        "mce": bins.mce,
        "nll": float(-np.mean(s.true_log_probability[rows])),
        "brier": float(np.mean(s.brier[rows])),
    }


def numbers_table(numbers: dict, caption: str = "") -> str:
    """The calibration numbers as a small HTML table (the caption is escaped).

    Examples
    --------
    >>> "ECE" in numbers_table({"n": 3, "temperature": 1.0, "accuracy": 0.5, "ece": 0.1, "mce": 0.2,
    ...                         "nll": 0.7, "brier": 0.4}, "fit <part>")
    True
    """
    rows = [
        ("ECE", f"{numbers['ece']:.4f}"),
        ("MCE", f"{numbers['mce']:.4f}"),
        ("NLL", f"{numbers['nll']:.4f}"),
        ("Brier", f"{numbers['brier']:.4f}"),
        ("accuracy", f"{numbers['accuracy']:.4f}"),
        ("samples", f"{numbers['n']:,}"),
        ("T", f"{numbers['temperature']:.4g}"),
    ]
    cap = f"<caption>{html.escape(caption)}</caption>" if caption else ""
    body = "".join(
        f"<tr><th>{html.escape(k)}</th><td data-key='{html.escape(k)}'>{html.escape(v)}</td></tr>" for k, v in rows
    )
    return f"<table class='logitscope-numbers'>{cap}{body}</table>"


_TABLE_CSS = (
    "<style>.logitscope-numbers{border-collapse:collapse;font-size:12.5px;margin:34px 0 0 4px;"
    "background:#f4f6f9;border-radius:4px}"
    ".logitscope-numbers caption{text-align:left;font-weight:600;padding:0 0 4px;color:#333;white-space:nowrap;"
    "line-height:1.3}"
    ".logitscope-numbers th{text-align:left;font-weight:normal;color:#5f6b7a;padding:3px 12px 3px 10px;"
    "line-height:1.3}"
    ".logitscope-numbers td{text-align:right;font-variant-numeric:tabular-nums;padding:3px 10px 3px 0;"
    "line-height:1.3}</style>"
)


def _rects(lo: np.ndarray, hi: np.ndarray, y0: np.ndarray, y1: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Closed rectangle outlines as (n, 5) x and y arrays for a filled ``bq.Lines``."""
    x = np.stack([lo, lo, hi, hi, lo], axis=1)
    y = np.stack([y0, y1, y1, y0, y0], axis=1)
    return x, y


class ReliabilityDiagram(widgets.VBox):
    """Reliability diagram of a frame (or of some of its rows) at the shared temperature.

    Parameters
    ----------
    frame : LogitFrame
        The data (needs labels; without them the view says so).
    state : SharedState, optional
        Shared state; a new one is made when None.
    rows : array_like, optional
        Only these rows (for example the held-out part of a split); default all rows.
    n_bins : int, default 15
        Number of bins.
    strategy : {"uniform", "quantile"}
        Equal-width or equal-mass bins.
    title : str
        Shown above the plot (escaped).
    name : str, default "reliability"
        Origin written to the shared state.
    show_controls : bool
        Show the bin controls (a second diagram linked to a first one may leave them out).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.log([[0.9, 0.1], [0.9, 0.1], [0.6, 0.4], [0.6, 0.4]]), labels=[0, 0, 0, 1])
    >>> view = ReliabilityDiagram(frame, n_bins=10)
    >>> round(view.bins.ece, 6)
    0.1
    >>> view.select_bin(5).tolist()  # the two samples with confidence 0.6
    [2, 3]
    """

    n_bins = traitlets.Int(15, help="number of bins")
    strategy = traitlets.Enum(["uniform", "quantile"], default_value="uniform", help="equal-width or equal-mass bins")
    selected_bin = traitlets.Int(None, allow_none=True, help="the bin whose samples this view selected, if any")

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        rows: Any = None,
        n_bins: int = 15,
        strategy: str = "uniform",
        title: str = "",
        name: str = "reliability",
        show_controls: bool = True,
        **kwargs: Any,
    ) -> None:
        self.frame = frame
        self.state = view_state(frame, state)
        self.name = name
        if isinstance(n_bins, bool) or not isinstance(n_bins, int | np.integer) or not 1 <= n_bins <= 100:
            raise ParameterError(f"n_bins must be an integer from 1 to 100, got {n_bins!r}")
        if strategy not in ("uniform", "quantile"):
            raise ParameterError(f"strategy must be 'uniform' or 'quantile', got {strategy!r}")
        self.rows = self._check_rows(rows)
        self.bins: an.ReliabilityBins | None = None
        self.numbers: dict | None = None
        self._drawn_bins = np.zeros(0, dtype=np.int64)  # bin number of each drawn rectangle

        self._sx = bq.LinearScale(min=0.0, max=1.0)
        self._sy = bq.LinearScale(min=0.0, max=1.0)
        self._sc = bq.LinearScale(min=0.0)
        sc = {"x": self._sx, "y": self._sy}
        self._diagonal = bq.Lines(
            x=[0.0, 1.0], y=[0.0, 1.0], scales=sc, colors=["#8a94a1"], line_style="dashed", stroke_width=1.2
        )
        empty = np.zeros((1, 5))
        self.bars = _filled_shapes(sc, COLOR_RIGHT, opacity=0.8, stroke=1.0, label="accuracy")
        self.gaps = _filled_shapes(sc, COLOR_WRONG, opacity=0.22, stroke=0.8, label="gap")
        self._conf_ticks = bq.Lines(x=empty[:, :2], y=empty[:, :2], scales=sc, colors=["#1f2933"], stroke_width=1.5)
        self.bars.on_element_click(self._on_click)
        self.gaps.on_element_click(self._on_click)
        self.figure = bq.Figure(
            marks=[self._diagonal, self.bars, self.gaps, self._conf_ticks],
            axes=[
                bq.Axis(scale=self._sx, grid_lines="none", num_ticks=6, tick_format=".1f"),
                bq.Axis(scale=self._sy, side="left", label="accuracy", grid_lines="dashed", tick_format=".1f"),
            ],
            fig_margin={"top": 30, "bottom": 22, "left": 48, "right": 12},
            padding_x=0.0,
            padding_y=0.0,
            display_toolbar=False,
            layout=widgets.Layout(width="330px", height="310px"),
            title=title,
            title_style={"font-size": "13px"},
        )
        self.count_bars = _filled_shapes({"x": self._sx, "y": self._sc}, "#8fa7c4", opacity=1.0, stroke=0.5)
        self.selected_bars = _filled_shapes(
            {"x": self._sx, "y": self._sc}, _SELECTED_FILL, opacity=1.0, stroke=0.5, visible=False
        )
        self._count_labels = bq.Label(
            x=[0.5],
            y=[0.0],
            text=[""],
            scales={"x": self._sx, "y": self._sc},
            default_size=9,
            align="middle",
            colors=["#5f6b7a"],
            y_offset=-3,
        )
        self.count_bars.on_element_click(self._on_click)
        self.count_figure = bq.Figure(
            marks=[self.count_bars, self.selected_bars, self._count_labels],
            axes=[
                bq.Axis(scale=self._sx, label="confidence (maximum probability)", num_ticks=6, tick_format=".1f"),
                bq.Axis(scale=self._sc, side="left", label="samples", visible=False),
            ],
            fig_margin={"top": 6, "bottom": 38, "left": 48, "right": 12},
            padding_x=0.0,
            padding_y=0.0,
            display_toolbar=False,
            layout=widgets.Layout(width="330px", height="100px"),
        )
        self._strategy_buttons = widgets.ToggleButtons(
            options=list(_STRATEGIES),
            value="equal width" if strategy == "uniform" else "equal mass",
            style={"button_width": "104px"},
            tooltips=["bins of equal width", "bins holding equal numbers of samples"],
        )
        self._bins_slider = widgets.IntSlider(
            value=int(n_bins),
            min=3,
            max=40,
            description="bins",
            continuous_update=False,
            layout={"width": "220px"},
            style={"description_width": "34px"},
        )
        self.numbers_html = widgets.HTML()
        self.note = widgets.HTML()
        plots = widgets.VBox([self.figure, self.count_figure])
        controls = widgets.HBox([self._strategy_buttons, self._bins_slider], layout={"flex_flow": "row wrap"})
        if not show_controls:
            controls.layout.visibility = "hidden"
        super().__init__(
            children=[
                controls,
                widgets.HBox([plots, self.numbers_html]),
                self.note,
            ],
            **kwargs,
        )
        self.add_class("logitscope-reliability")
        self.n_bins, self.strategy = int(n_bins), strategy
        self._strategy_buttons.observe(
            lambda c: setattr(self, "strategy", _STRATEGIES[c["new"]]), "value"
        )  # the traits follow the controls
        widgets.link((self._bins_slider, "value"), (self, "n_bins"))
        self.observe(self._on_option, ["n_bins", "strategy"])
        self.observe(self._on_selected_bin, "selected_bin")
        self.state.observe(self._on_temperature, "temperature")
        self.state.observe(self._on_rows, "rows")
        self._redraw()

    # ------------------------------------------------------------------ rows

    def _check_rows(self, rows: Any) -> np.ndarray:
        return rows_or_all(rows, self.frame.n_samples, "a reliability diagram")

    def set_rows(self, rows: Any, title: str | None = None) -> None:
        """Show other rows of the frame (None: all rows)."""
        self.rows = self._check_rows(rows)
        if title is not None:
            self.figure.title = title
        self.selected_bin = None
        self._redraw()

    # ------------------------------------------------------------------ numbers

    def compute(self) -> an.ReliabilityBins:
        """Reliability bins of the view's rows at the shared temperature."""
        s = self.frame.sample_scores(self.state.temperature)
        if s.correct is None:
            raise ParameterError("a reliability diagram needs labels; this frame has none")
        strategy = cast(Strategy, self.strategy)  # a traitlets.Enum of the two strategies
        return an.reliability_bins(s.confidence[self.rows], s.correct[self.rows], self.n_bins, strategy)

    def _redraw(self) -> None:
        if not self.frame.has_labels:
            self.bins = None
            self.numbers_html.value = ""
            self.note.value = "<i>The reliability diagram needs labels; this frame has none.</i>"
            return
        bins = self.bins = self.compute()
        self.numbers = calibration_numbers(self.frame, self.rows, self.state.temperature, bins)
        used = np.flatnonzero(bins.count > 0)
        self._drawn_bins = used
        lo, hi = bins.lower[used], bins.upper[used]
        pad = (hi - lo) * _PAD
        lo, hi = lo + pad, hi - pad
        acc, conf = bins.accuracy[used], bins.confidence[used]
        bx, by = _rects(lo, hi, np.zeros(used.size), acc)
        gx, gy = _rects(lo, hi, np.minimum(acc, conf), np.maximum(acc, conf))
        counts = bins.count[used].astype(float)
        cx, cy = _rects(lo, hi, np.zeros(used.size), counts)
        with self.figure.hold_sync(), self.count_figure.hold_sync():
            with self.bars.hold_sync():
                self.bars.x, self.bars.y = bx, by
            self._fill_colors()
            with self.gaps.hold_sync():
                self.gaps.x, self.gaps.y = gx, gy
                self.gaps.colors = [COLOR_WRONG] * used.size
                self.gaps.fill_colors = [COLOR_WRONG] * used.size
                self.gaps.fill_opacities = [0.22] * used.size
            with self._conf_ticks.hold_sync():
                self._conf_ticks.x = np.stack([lo, hi], axis=1)
                self._conf_ticks.y = np.stack([conf, conf], axis=1)
                self._conf_ticks.colors = ["#1f2933"] * used.size
            self._sc.max = float(counts.max()) * 1.35
            with self.count_bars.hold_sync():
                self.count_bars.x, self.count_bars.y = cx, cy
                self.count_bars.colors = ["#8fa7c4"] * used.size
                self.count_bars.fill_colors = ["#8fa7c4"] * used.size
                self.count_bars.fill_opacities = [1.0] * used.size
            with self._count_labels.hold_sync():
                self._count_labels.x = (lo + hi) / 2
                self._count_labels.y = counts
                self._count_labels.text = [f"{int(c):,}" for c in counts]
        kind = "equal-width" if self.strategy == "uniform" else "equal-mass"
        self.numbers_html.value = _TABLE_CSS + numbers_table(self.numbers, f"{self.n_bins} {kind} bins")
        self._on_rows()

    def _fill_colors(self) -> None:
        n = self._drawn_bins.size
        fills = [COLOR_RIGHT] * n
        if self.selected_bin is not None:
            fills = [_SELECTED_FILL if b == self.selected_bin else COLOR_RIGHT for b in self._drawn_bins]
        with self.bars.hold_sync():
            self.bars.colors = fills
            self.bars.fill_colors = fills
            self.bars.fill_opacities = [0.8] * n

    # ------------------------------------------------------------------ selection out

    def rows_of_bin(self, b: int) -> np.ndarray:
        """Frame rows whose confidence falls in bin ``b`` at the shared temperature."""
        if self.bins is None:
            raise ParameterError("the reliability diagram needs labels; this frame has none")
        if not 0 <= int(b) < self.bins.count.size:
            raise ParameterError(f"bin must lie in [0, {self.bins.count.size}), got {b}")
        return self.rows[self.bins.bin_of == int(b)]

    def select_bin(self, b: int | None) -> np.ndarray:
        """Select the samples of bin ``b`` (None: clear this view's selection); return the selected rows."""
        if b is None:
            self.selected_bin = None
            if self.state.origin == self.name:
                self.state.clear(origin=self.name)
            return self.state.rows
        rows = self.rows_of_bin(b)
        self.selected_bin = int(b)
        self.state.select(rows, origin=self.name)
        return self.state.rows

    def _on_click(self, mark: Any, content: dict) -> None:
        i = (content.get("data") or {}).get("index")
        if i is None or not 0 <= int(i) < self._drawn_bins.size:
            return
        b = int(self._drawn_bins[int(i)])
        self.select_bin(None if b == self.selected_bin and self.state.origin == self.name else b)

    def _on_selected_bin(self, change: Any) -> None:
        self._fill_colors()

    # ------------------------------------------------------------------ selection in

    def _on_rows(self, change: Any = None) -> None:
        if self.bins is None:
            return
        rows = self.state.rows
        if self.state.origin != self.name and self.selected_bin is not None:
            self.selected_bin = None
        if rows.size == 0 or self.state.origin == self.name:
            self.selected_bars.visible = False
            self.note.value = "" if rows.size == 0 else f"{rows.size:,} samples of bin {self.selected_bin} selected"
            return
        # share of each bin's samples that the other view selected, drawn in the count strip
        mine = np.isin(self.rows, rows, assume_unique=True)
        per_bin = np.bincount(self.bins.bin_of[mine], minlength=self.bins.count.size)[self._drawn_bins]
        lo, hi = self.bins.lower[self._drawn_bins], self.bins.upper[self._drawn_bins]
        pad = (hi - lo) * _PAD
        x, y = _rects(lo + pad, hi - pad, np.zeros(per_bin.size), per_bin.astype(float))
        with self.selected_bars.hold_sync():
            self.selected_bars.x, self.selected_bars.y = x, y
            self.selected_bars.colors = [_SELECTED_FILL] * per_bin.size
            self.selected_bars.fill_colors = [_SELECTED_FILL] * per_bin.size
            self.selected_bars.fill_opacities = [1.0] * per_bin.size
            self.selected_bars.visible = True
        where = f" by {html.escape(self.state.origin)}" if self.state.origin else ""
        self.note.value = f"{int(mine.sum()):,} of these samples selected{where} (dark in the count strip)"

    def _on_temperature(self, change: Any) -> None:
        self._redraw()

    def _on_option(self, change: Any) -> None:
        self._bins_slider.value = self.n_bins
        self._strategy_buttons.value = "equal width" if self.strategy == "uniform" else "equal mass"
        if self.selected_bin is not None and self.state.origin == self.name:
            self.selected_bin = None
        self._redraw()


def _filled_shapes(
    scales: dict[str, Any], color: str, opacity: float, stroke: float, label: str | None = None, **extra: Any
) -> bq.Lines:
    """Closed, filled bqplot shapes (one per bin), empty until the first draw."""
    empty = np.zeros((1, 5))
    if label is not None:
        extra["labels"] = [label]
    return bq.Lines(
        x=empty, y=empty, scales=scales, fill="inside", close_path=True, colors=[color],
        fill_colors=[color], fill_opacities=[opacity], stroke_width=stroke, **extra,
    )  # fmt: skip
