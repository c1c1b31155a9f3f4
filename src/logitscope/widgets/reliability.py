"""Reliability diagram: each confidence bin's accuracy against its mean confidence, with its calibration numbers.

The view renders a :class:`~logitscope.findings.CalibrationSummary` of its
rows at the shared temperature and the shared binning (``state.binning``),
so its ECE is the ECE every other view and the report show for the same
choices. Each bin is a dot at (mean confidence, accuracy) whose area grows
with the bin's share of the samples, joined to the diagonal by a line
coloured by the direction of the gap (over- or under-confident); a strip
below counts the samples of each bin over the bin's exact range. Clicking a
dot or a count bar selects the bin's samples; the selection of another view
is drawn as its share of each bin in the strip.
"""

from __future__ import annotations

import html
from typing import Any

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets

from ..errors import ParameterError
from ..findings import Binning, CalibrationSummary, calibration_summary
from ..frame import LogitFrame
from ..rows import rows_or_all
from .base import LinkedView
from .state import SharedState
from .style import MARK, MUTED, OVER, REFERENCE, SELECTED, UNDER, css, figure_layout

__all__ = ["ReliabilityDiagram", "count_labels", "numbers_table"]

_STRATEGY_BUTTONS = {"equal width": "uniform", "equal mass": "quantile"}
_COUNT_FILL = "#9fb3c8"
_PAD = 0.06  # share of a bin's width left blank on each side of its count bar


def numbers_table(summary: CalibrationSummary, caption: str = "") -> str:
    """A calibration summary's numbers as a small HTML table (the caption is escaped).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0]]), labels=[0, 0])
    >>> "ECE" in numbers_table(calibration_summary(frame), "fit <part>")
    True
    """
    rows = [
        ("ECE", f"{summary.ece:.4f}"),
        ("MCE", f"{summary.mce:.4f}"),
        ("NLL", f"{summary.nll:.4f}"),
        ("Brier", f"{summary.brier:.4f}"),
        ("accuracy", f"{summary.accuracy:.4f}"),
        ("samples", f"{summary.n:,}"),
        ("T", f"{summary.temperature:.4g}"),
    ]
    cap = f"<caption>{html.escape(caption)}</caption>" if caption else ""
    body = "".join(f"<tr><th>{k}</th><td data-key='{k}'>{v}</td></tr>" for k, v in rows)
    return f"<table class='ls-numbers'>{cap}{body}</table>"


#: Width in pixels of the count strip's plot area (330 px figure less its 52 + 14 px margins).
_STRIP_PX = 264.0


def count_labels(lower: np.ndarray, upper: np.ndarray, counts: np.ndarray, width_px: float = _STRIP_PX) -> list[str]:
    """The count written over each bar of the strip, or "" where it would run into its left neighbour's.

    Bars are placed left to right on a 0..1 axis of ``width_px`` pixels; a label
    of ``d`` characters takes about ``5.6 d + 4`` pixels at the strip's 9 px font.
    A label is kept when it starts right of where the last kept one ends, so no
    two labels overlap however narrow the bins (equal-mass bins crowd near 1).

    Examples
    --------
    >>> count_labels(np.array([0.0, 0.5]), np.array([0.5, 1.0]), np.array([3, 40]))
    ['3', '40']
    >>> count_labels(np.array([0.90, 0.91]), np.array([0.91, 0.92]), np.array([1234, 5678]))
    ['1,234', '']
    """
    out: list[str] = []
    right = -np.inf
    for lo, hi, c in zip(lower.tolist(), upper.tolist(), counts.tolist(), strict=True):
        text = f"{int(c):,}"
        half = (5.6 * len(text) + 4) / 2
        centre = (lo + hi) / 2 * width_px
        if centre - half >= right:
            out.append(text)
            right = centre + half
        else:
            out.append("")
    return out


def _rects(lo: np.ndarray, hi: np.ndarray, y0: np.ndarray, y1: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Closed rectangle outlines as (n, 5) x and y arrays for a filled ``bq.Lines``."""
    x = np.stack([lo, lo, hi, hi, lo], axis=1)
    y = np.stack([y0, y1, y1, y0, y0], axis=1)
    return x, y


def filled_shapes(scales: dict[str, Any], color: str, opacity: float, stroke: float, **extra: Any) -> bq.Lines:
    """Closed, filled bqplot shapes (one per element), empty until the first draw."""
    empty = np.zeros((1, 5))
    return bq.Lines(
        x=empty, y=empty, scales=scales, fill="inside", close_path=True, colors=[color],
        fill_colors=[color], fill_opacities=[opacity], stroke_width=stroke, **extra,
    )  # fmt: skip


def _set_shapes(mark: bq.Lines, x: np.ndarray, y: np.ndarray, color: str | list[str], opacity: float) -> None:
    n = x.shape[0]
    colors = color if isinstance(color, list) else [color] * n
    with mark.hold_sync():
        mark.x, mark.y = x, y
        mark.colors = colors
        mark.fill_colors = colors
        mark.fill_opacities = [opacity] * n


class ReliabilityDiagram(LinkedView, widgets.VBox):
    """Reliability diagram of a frame (or of some of its rows) at the shared temperature and binning.

    Parameters
    ----------
    frame : LogitFrame
        The data (needs labels; without them the view says so).
    state : SharedState, optional
        Shared state; a new one is made when None.
    rows : array_like, optional
        Only these rows (for example the held-out part of a split); default all rows.
    n_bins, strategy : optional
        Set the shared binning (``state.binning``) to these; default: leave it.
    title : str
        Shown above the plot.
    name : str, default "reliability diagram"
        Readable name shown where the view's selection is described.
    show_controls : bool
        Show the bin controls (a second diagram on the same state may leave them out: it follows the same bins).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.log([[0.9, 0.1], [0.9, 0.1], [0.6, 0.4], [0.6, 0.4]]), labels=[0, 0, 0, 1])
    >>> view = ReliabilityDiagram(frame, n_bins=10)
    >>> round(view.finding.ece, 6)
    0.1
    >>> view.select_bin(5).tolist()  # the two samples with confidence 0.6
    [2, 3]
    >>> view.note.value
    '2 samples with confidence 0.50–0.60 selected'
    """

    kind = "reliability diagram"
    selected_bin = traitlets.Int(None, allow_none=True, help="the bin whose samples this view selected, if any")

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        rows: Any = None,
        n_bins: int | None = None,
        strategy: str | None = None,
        title: str = "",
        name: str | None = None,
        show_controls: bool = True,
        **kwargs: Any,
    ) -> None:
        self.finding: CalibrationSummary | None = None
        self._drawn_bins = np.zeros(0, dtype=np.int64)  # bin number of each drawn dot
        sx, sy, sc = bq.LinearScale(min=0.0, max=1.0), bq.LinearScale(min=0.0, max=1.0), bq.LinearScale(min=0.0)
        self._sc = sc
        scales = {"x": sx, "y": sy}
        self._diagonal = bq.Lines(x=[0.0, 1.0], y=[0.0, 1.0], scales=scales, colors=[REFERENCE], stroke_width=1.4)
        self.gaps = bq.Lines(x=np.zeros((1, 2)), y=np.zeros((1, 2)), scales=scales, colors=[OVER], stroke_width=2.4)
        self._size = bq.LinearScale(min=0.0, max=1.0)
        self.dots = bq.Scatter(
            x=[0.5], y=[0.5], scales={**scales, "size": self._size}, size=[0.0], default_size=220,
            colors=[MARK], stroke="white", stroke_width=1.2,
            tooltip=bq.Tooltip(fields=["x", "y"], labels=["mean confidence", "accuracy"], formats=[".3f", ".3f"]),
        )  # fmt: skip
        self.dots.on_element_click(self._on_click)
        self.figure = bq.Figure(
            marks=[self._diagonal, self.gaps, self.dots],
            axes=[
                bq.Axis(scale=sx, grid_lines="none", num_ticks=6, tick_format=".1f"),
                bq.Axis(scale=sy, side="left", label="accuracy", grid_lines="dashed", tick_format=".1f"),
            ],
            fig_margin={"top": 30, "bottom": 22, "left": 52, "right": 14},
            padding_x=0.0,
            padding_y=0.0,
            display_toolbar=False,
            layout=figure_layout("330px", "310px"),
            title=title,
            title_style={"font-size": "13px"},
        )
        cscales = {"x": sx, "y": sc}
        self.count_bars = filled_shapes(cscales, _COUNT_FILL, opacity=1.0, stroke=0.5)
        self.selected_bars = filled_shapes(cscales, SELECTED, opacity=1.0, stroke=0.5, visible=False)
        self._count_labels = bq.Label(
            x=[0.5], y=[0.0], text=[""], scales=cscales, default_size=9, align="middle", colors=[MUTED], y_offset=-3
        )
        self.count_bars.on_element_click(self._on_count_click)
        self.count_figure = bq.Figure(
            marks=[self.count_bars, self.selected_bars, self._count_labels],
            axes=[
                bq.Axis(scale=sx, label="confidence (maximum probability)", num_ticks=6, tick_format=".1f"),
                bq.Axis(scale=sc, side="left", label="samples", visible=False),
            ],
            fig_margin={"top": 6, "bottom": 38, "left": 52, "right": 14},
            padding_x=0.0,
            padding_y=0.0,
            display_toolbar=False,
            layout=figure_layout("330px", "100px"),
        )
        lo, hi = Binning.N_BINS_RANGE
        self._strategy_buttons = widgets.ToggleButtons(
            options=list(_STRATEGY_BUTTONS),
            style={"button_width": "104px"},
            tooltips=["bins of equal width", "bins holding equal numbers of samples"],
        )
        self._bins_slider = widgets.IntSlider(
            min=lo, max=hi, description="bins", continuous_update=False,
            layout={"width": "260px"}, style={"description_width": "34px"},
        )  # fmt: skip
        self.numbers_html = widgets.HTML()
        self.note = widgets.HTML()
        self.key = widgets.HTML(
            css("views") + "<span class='ls-key'>"
            f"<span class='ls-swatch' style='background:{OVER}'></span>over-confident"
            f"<span class='ls-swatch' style='background:{UNDER}'></span>under-confident"
            "<span style='margin-left:10px'>dot area: share of samples</span></span>"
        )
        controls = widgets.HBox([self._strategy_buttons, self._bins_slider], layout={"flex_flow": "row wrap"})
        if not show_controls:
            controls.layout.visibility = "hidden"
        widgets.VBox.__init__(
            self,
            children=[controls, widgets.HBox([widgets.VBox([self.figure, self.count_figure]), self.numbers_html]),
                      self.key, self.note],
            **kwargs,
        )  # fmt: skip
        self.add_class("logitscope-reliability")
        self.link(frame, state, name)
        self.rows = self._check_rows(rows)
        if n_bins is not None or strategy is not None:
            old = self.state.binning
            self.state.binning = Binning(
                old.n_bins if n_bins is None else n_bins,
                old.strategy if strategy is None else strategy,  # type: ignore[arg-type]
            )
        self._show_binning_controls()
        self._strategy_buttons.observe(self._on_controls, "value")
        self._bins_slider.observe(self._on_controls, "value")
        self.state.observe(self._on_binning, "binning")
        self.observe(lambda c: self._paint_dots(), "selected_bin")
        self._redraw()

    # ------------------------------------------------------------------ rows and bins

    def _check_rows(self, rows: Any) -> np.ndarray:
        return rows_or_all(rows, self.frame.n_samples, "a reliability diagram")

    def set_rows(self, rows: Any, title: str | None = None) -> None:
        """Show other rows of the frame (None: all rows)."""
        self.rows = self._check_rows(rows)
        if title is not None:
            self.figure.title = title
        self.selected_bin = None
        self._redraw()

    @property
    def binning(self) -> Binning:
        """The shared binning the view draws with."""
        return self.state.binning

    def _show_binning_controls(self) -> None:
        b = self.state.binning
        with self.quietly():
            self._bins_slider.value = b.n_bins
            self._strategy_buttons.value = "equal width" if b.strategy == "uniform" else "equal mass"

    def _on_controls(self, change: Any) -> None:
        if self.is_quiet:
            return
        strategy = _STRATEGY_BUTTONS[self._strategy_buttons.value]
        self.state.binning = Binning(int(self._bins_slider.value), strategy)  # type: ignore[arg-type]

    def _on_binning(self, change: Any) -> None:
        self._show_binning_controls()
        if self.selected_bin is not None and self.owns_selection:
            self.clear_selection()
        self.selected_bin = None
        self._redraw()

    # ------------------------------------------------------------------ drawing

    def compute(self) -> CalibrationSummary:
        """The calibration summary of the view's rows at the shared temperature and binning."""
        if not self.frame.has_labels:
            raise ParameterError("a reliability diagram needs labels; this frame has none")
        rows = None if self.rows.size == self.frame.n_samples else self.rows
        return calibration_summary(self.frame, self.state.temperature, rows, self.state.binning)

    def _redraw(self) -> None:
        if not self.frame.has_labels:
            self.finding = None
            self.numbers_html.value = ""
            self.note.value = "<i>The reliability diagram needs labels; this frame has none.</i>"
            return
        f = self.finding = self.compute()
        bins = f.bins
        used = np.flatnonzero(bins.count > 0)
        self._drawn_bins = used
        acc, conf = bins.accuracy[used], bins.confidence[used]
        counts = bins.count[used].astype(float)
        lo, hi = bins.lower[used], bins.upper[used]
        pad = (hi - lo) * _PAD
        cx, cy = _rects(lo + pad, hi - pad, np.zeros(used.size), counts)
        with self.figure.hold_sync(), self.count_figure.hold_sync():
            with self.gaps.hold_sync():
                self.gaps.x = np.stack([conf, conf], axis=1)
                self.gaps.y = np.stack([conf, acc], axis=1)
                self.gaps.colors = [OVER if a < c else UNDER for a, c in zip(acc, conf, strict=True)]
            with self.dots.hold_sync():
                self.dots.x, self.dots.y = conf, acc
                self.dots.size = np.sqrt(counts / counts.sum())  # area grows with the share
            self._paint_dots()
            self._sc.max = float(counts.max()) * 1.35
            _set_shapes(self.count_bars, cx, cy, _COUNT_FILL, 1.0)
            with self._count_labels.hold_sync():
                self._count_labels.x = (lo + hi) / 2
                self._count_labels.y = counts
                self._count_labels.text = count_labels(lo, hi, counts)
        self.numbers_html.value = css("views") + numbers_table(f, f.binning.describe())
        self.on_selection(self.state.rows, self.owns_selection)

    def _paint_dots(self) -> None:
        fills = [SELECTED if b == self.selected_bin else MARK for b in self._drawn_bins]
        self.dots.colors = fills or [MARK]

    # ------------------------------------------------------------------ selection out

    def rows_of_bin(self, b: int) -> np.ndarray:
        """Frame rows whose confidence falls in bin ``b`` at the shared temperature."""
        if self.finding is None:
            raise ParameterError("the reliability diagram needs labels; this frame has none")
        n = self.finding.bins.count.size
        if not 0 <= int(b) < n:
            raise ParameterError(f"bin must lie in [0, {n}), got {b}")
        return self.finding.rows_of_bin(int(b))

    def select_bin(self, b: int | None) -> np.ndarray:
        """Select the samples of bin ``b`` (None: clear this view's selection); return the selected rows."""
        if b is None:
            self.selected_bin = None
            self.clear_selection()
            return self.state.rows
        rows = self.rows_of_bin(b)
        self.selected_bin = int(b)
        return self.select(rows)

    def _toggle(self, i: Any) -> None:
        if i is None or not 0 <= int(i) < self._drawn_bins.size:
            return
        b = int(self._drawn_bins[int(i)])
        self.select_bin(None if b == self.selected_bin and self.owns_selection else b)

    def _on_click(self, mark: Any, content: dict) -> None:
        self._toggle((content.get("data") or {}).get("index"))

    def _on_count_click(self, mark: Any, content: dict) -> None:
        self._toggle((content.get("data") or {}).get("index"))

    # ------------------------------------------------------------------ selection in

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        f = self.finding
        if f is None:
            return
        if not mine and self.selected_bin is not None:
            self.selected_bin = None
        if rows.size == 0 or mine:
            self.selected_bars.visible = False
            if rows.size == 0:
                self.note.value = ""
            elif self.selected_bin is not None:
                self.note.value = f"{rows.size:,} samples with confidence {f.bin_label(self.selected_bin)} selected"
            return
        # the share of each bin that the other view selected, drawn in the count strip
        covered = np.arange(self.frame.n_samples) if f.rows is None else f.rows  # the labelled rows drawn
        mine_mask = np.isin(covered, rows, assume_unique=True)
        per_bin = np.bincount(f.bins.bin_of[mine_mask], minlength=f.bins.count.size)[self._drawn_bins]
        lo, hi = f.bins.lower[self._drawn_bins], f.bins.upper[self._drawn_bins]
        pad = (hi - lo) * _PAD
        x, y = _rects(lo + pad, hi - pad, np.zeros(per_bin.size), per_bin.astype(float))
        _set_shapes(self.selected_bars, x, y, SELECTED, 1.0)
        self.selected_bars.visible = True
        where = self.selected_by()
        self.note.value = f"{int(mine_mask.sum()):,} of these samples selected{where} (purple in the count strip)"

    def on_temperature(self, temperature: float) -> None:
        self._redraw()

    def on_frame(self) -> None:
        self.rows = self._check_rows(None)
        self.selected_bin = None
        self._redraw()
