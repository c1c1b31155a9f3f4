"""Temperature sweep: NLL, ECE and Brier score against T on a log grid, with the fitted T marked.

The view renders :class:`~logitscope.findings.SweepFinding` s (the curves,
computed once per set of rows and binning; they do not depend on the shared
temperature) and, for the readout at the current temperature, the
:class:`~logitscope.findings.CalibrationSummary` the reliability diagram
shows for the same rows, so the two never disagree. The current temperature
is a draggable dot on the NLL curve and a log slider; both write
``state.temperature``. With ``compare_rows`` (the held-out part of a split)
the curves of those rows are drawn dashed: a temperature fitted on one part
should also lower the other part's NLL.
"""

from __future__ import annotations

import html
from typing import Any

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets

from ..errors import ParameterError
from ..findings import CalibrationSummary, SweepFinding, calibration_summary, sweep_finding, sweep_grid
from ..frame import LogitFrame
from ..parameters import RANGES
from ..parameters import check as check_parameter
from ..rows import rows_or_all
from ..ticks import nice_ticks
from .base import LinkedView
from .state import SharedState
from .style import MARK, SELECTED, css, figure_layout

__all__ = ["MAX_SELECTION_SWEEP", "TemperatureSweepView"]

_METRICS = (("nll", "NLL", "#0072b2"), ("ece", "ECE", "#c26a00"), ("brier", "Brier", "#0f8a6d"))
_FITTED = "#b8421a"
#: Largest selection whose own NLL curve is drawn (one pass over its rows per grid point).
MAX_SELECTION_SWEEP = 100_000


class TemperatureSweepView(LinkedView, widgets.VBox):
    """NLL, ECE and Brier against temperature, with a draggable dot bound to ``state.temperature``.

    Parameters
    ----------
    frame : LogitFrame
        The data (needs labels; without them the view says so).
    state : SharedState, optional
        Shared state; a new one is made when None.
    rows : array_like, optional
        Rows the curves and the fit use (the fit part of a split); default all rows.
    compare_rows : array_like, optional
        Rows drawn as dashed curves for comparison (the held-out part).
    temperatures : array_like, optional
        The grid; default :func:`logitscope.findings.sweep_grid` of the current and fitted T.
    name : str, optional
        Readable name (the view writes the temperature, never the selection).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> z = np.array([[4.0, 0.0], [4.0, 0.0], [0.0, 4.0], [4.0, 0.0]])
    >>> view = TemperatureSweepView(LogitFrame(z, labels=[0, 0, 1, 1]))
    >>> round(view.fitted.temperature, 3)  # p = 0.75 on every sample is optimal: T = 4 / log 3
    3.641
    >>> view.set_temperature(2.0)
    >>> view.state.temperature, view.now.temperature
    (2.0, 2.0)
    """

    kind = "temperature sweep"
    fitted_temperature = traitlets.Float(None, allow_none=True, help="T minimising the NLL of the view's rows")
    live = traitlets.Bool(
        True,
        help="follow other views' selections now; when False (the view is out of sight, e.g. on a hidden tab) "
        "the selection's curve, one pass over its rows per grid point, is drawn when the view becomes live again",
    )

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        rows: Any = None,
        compare_rows: Any = None,
        temperatures: Any = None,
        name: str | None = None,
        **kwargs: Any,
    ) -> None:
        self._grid_given = None if temperatures is None else np.asarray(temperatures, dtype=np.float64)
        if self._grid_given is not None and (
            self._grid_given.ndim != 1 or self._grid_given.size < 2 or np.any(~(self._grid_given > 0))
        ):
            raise ParameterError("temperatures must be a 1-D array of at least 2 positive numbers")
        self.finding: SweepFinding | None = None
        self.compare_finding: SweepFinding | None = None
        self.selection_finding: SweepFinding | None = None
        self.now: CalibrationSummary | None = None
        self.now_held: CalibrationSummary | None = None

        self._sx = bq.LogScale()
        self._scales = {key: bq.LinearScale() for key, _, _ in _METRICS}
        self.figures: dict[str, bq.Figure] = {}
        self.curves: dict[str, bq.Lines] = {}
        self.compare_curves: dict[str, bq.Lines] = {}
        self._rules: dict[str, bq.Lines] = {}
        for key, label, color in _METRICS:
            sc = {"x": self._sx, "y": self._scales[key]}
            curve = bq.Lines(x=[1.0, 2.0], y=[0.0, 0.0], scales=sc, colors=[color], stroke_width=2, labels=[label])
            comp = bq.Lines(
                x=[1.0, 2.0], y=[0.0, 0.0], scales=sc, colors=[color], stroke_width=1.5, line_style="dashed",
                visible=False, labels=[f"{label}, held out"],
            )  # fmt: skip
            rules = bq.Lines(
                x=np.ones((2, 2)), y=np.zeros((2, 2)), scales=sc, colors=[_FITTED, MARK], stroke_width=1.4,
                line_style="dashed",
            )  # fmt: skip
            marks: list[bq.Mark] = [rules, comp, curve]
            self.curves[key], self.compare_curves[key], self._rules[key] = curve, comp, rules
            if key == "nll":
                self.selection_curve = bq.Lines(
                    x=[1.0, 2.0], y=[0.0, 0.0], scales=sc, colors=[SELECTED], stroke_width=1.5,
                    line_style="dash_dotted", visible=False, labels=["NLL, selection"],
                )  # fmt: skip
                self.marker = bq.Scatter(
                    x=[1.0], y=[0.0], scales=sc, colors=[MARK], default_size=90, enable_move=True, restrict_x=True,
                    update_on_move=False, stroke="white", stroke_width=1.5,
                )  # fmt: skip
                # the dot's temperature as a label beside it, set from Python after every move (a tooltip
                # would keep the value of the first draw)
                self.marker_label = bq.Label(
                    x=[1.0], y=[0.0], text=["T 1.000"], scales=sc, default_size=11, colors=[MARK], x_offset=8,
                    y_offset=-8, font_weight="bold",
                )  # fmt: skip
                self.marker.on_drag_end(self._on_drag_end)
                self.marker.observe(self._on_marker_x, "x")
                marks = [rules, comp, self.selection_curve, curve, self.marker, self.marker_label]
            self.figures[key] = bq.Figure(
                marks=marks,
                axes=[
                    bq.Axis(
                        scale=self._sx, label="temperature T", tick_format=".2~f", grid_lines="none",
                        label_offset="32px",
                    ),
                    bq.Axis(
                        scale=self._scales[key], side="left", label=label, tick_format=".3~f", grid_lines="dashed",
                        label_offset="42px",
                    ),
                ],
                title=f"{label} against T" + (" (drag the dot)" if key == "nll" else ""),
                title_style={"font-size": "12.5px"},
                fig_margin={"top": 30, "bottom": 48, "left": 58, "right": 12},
                padding_x=0.0,
                padding_y=0.0,
                display_toolbar=False,
                layout=figure_layout("256px", "240px"),
            )  # fmt: skip
        # the slider spans the accepted temperature range: any value the API takes can be set and shown
        t_lo, t_hi, t_step = RANGES["temperature"].control_bounds()
        self.slider = widgets.FloatLogSlider(
            value=1.0, base=10, min=t_lo, max=t_hi, step=t_step, description="T", continuous_update=False,
            readout_format=".4g", style={"description_width": "20px"}, layout={"width": "340px"},
        )  # fmt: skip
        self.fit_button = widgets.Button(
            description="use fitted T",
            tooltip="set T to the value that minimises the NLL of these rows",
            layout={"width": "110px"},
        )
        self.one_button = widgets.Button(description="T = 1", layout={"width": "64px"})
        self.readout = widgets.HTML()
        self.note = widgets.HTML()
        widgets.VBox.__init__(
            self,
            children=[
                widgets.HBox(list(self.figures.values()), layout={"flex_flow": "row wrap"}),
                widgets.HBox([self.slider, self.fit_button, self.one_button], layout={"align_items": "center"}),
                self.readout,
                self.note,
            ],
            **kwargs,
        )
        self.add_class("logitscope-sweep")
        self.link(frame, state, name)
        self.rows = self._rows(rows)
        self.compare_rows = None if compare_rows is None else self._rows(compare_rows)
        self.slider.observe(self._on_slider, "value")
        self.fit_button.on_click(lambda _: self.use_fitted())
        self.one_button.on_click(lambda _: self.set_temperature(1.0))
        self.state.observe(lambda c: self._compute(), "binning")
        self.observe(self._on_live, "live")
        self._selection_stale = False
        self._curves_stale = False
        self._compute()

    # ------------------------------------------------------------------ rows and numbers

    @property
    def fitted(self) -> Any:
        """The temperature fit of the view's rows (None without labels)."""
        return None if self.finding is None else self.finding.fitted

    def _rows(self, rows: Any) -> np.ndarray:
        return rows_or_all(rows, self.frame.n_samples, "a temperature sweep")

    def _part(self, rows: np.ndarray) -> np.ndarray | None:
        return None if rows.size == self.frame.n_samples else rows

    def set_rows(self, rows: Any, compare_rows: Any = None) -> None:
        """Sweep other rows (None: all), optionally with comparison rows drawn dashed."""
        self.rows = self._rows(rows)
        self.compare_rows = None if compare_rows is None else self._rows(compare_rows)
        self._compute()

    def grid(self) -> np.ndarray:
        """The temperatures swept: the given grid, or :func:`sweep_grid` of the current and the fitted T."""
        if self._grid_given is not None:
            return np.sort(self._grid_given)
        marks = [self.frame.temperature, self.state.temperature]
        return sweep_grid(marks + ([self.fitted.temperature] if self.fitted else []))

    def _set_range(self, key: str, values: list[np.ndarray]) -> None:
        """Fit the y scale of ``key`` to the curves drawn and set round ticks for that range."""
        both = np.concatenate(values)
        span = float(np.max(both) - np.min(both)) or 1e-3
        y0 = max(0.0, float(np.min(both)) - 0.06 * span)
        y1 = float(np.max(both)) + 0.06 * span
        with self.figures[key].hold_sync():
            self._scales[key].min, self._scales[key].max = y0, y1
            self.figures[key].axes[1].tick_values = np.asarray(nice_ticks(y0, y1, n=4))

    def _compute(self) -> None:
        if not self.frame.has_labels:
            self.note.value = "<i>The temperature sweep needs labels; this frame has none.</i>"
            self.fit_button.disabled = True
            return
        b = self.state.binning
        marks = [self.frame.temperature, self.state.temperature]  # the marks the report's sweep has too
        first = sweep_finding(self.frame, self._part(self.rows), b, grid=self._grid_given, marks=marks)
        self.finding = first
        self.fitted_temperature = first.fitted.temperature if first.fitted else None
        grid = first.temperature
        self.compare_finding = (
            None
            if self.compare_rows is None
            else sweep_finding(self.frame, self._part(self.compare_rows), b, grid=grid, fit=False)
        )
        lo, hi = float(grid.min()), float(grid.max())
        for key, _, _ in _METRICS:
            values = [getattr(first, key)] + (
                [] if self.compare_finding is None else [getattr(self.compare_finding, key)]
            )
            self._set_range(key, values)
            with self.curves[key].hold_sync():
                self.curves[key].x, self.curves[key].y = grid, values[0]
            comp = self.compare_curves[key]
            if self.compare_finding is not None:
                with comp.hold_sync():
                    comp.x, comp.y = grid, values[1]
            comp.visible = self.compare_finding is not None
        fit = first.fitted
        assert fit is not None
        bound = " It is at its bound: the NLL keeps falling towards it." if fit.at_bound else ""
        part_name = "all rows" if self.rows.size == self.frame.n_samples else f"{self.rows.size:,} rows (fit part)"
        dashed = "" if self.compare_rows is None else f"; dashed: the {self.compare_rows.size:,} held-out rows"
        self.note.value = (
            f"{css('views')}<span class='ls-note'>Fitted on {html.escape(part_name)}: T = {fit.temperature:.4f} "
            f"(red rule); grey rule and dot: the current T{dashed}; dash-dotted: NLL of the selected samples. "
            f"ECE with {html.escape(b.describe())}.{bound}</span>"
        )
        ticks = nice_ticks(lo, hi, log=True)
        for fig in self.figures.values():
            fig.axes[0].tick_values = np.asarray(ticks)
        self.on_selection(self.state.rows, self.owns_selection)
        self._show_temperature()

    # ------------------------------------------------------------------ temperature in and out

    def set_temperature(self, temperature: float) -> None:
        """Write the shared temperature (as dragging the dot or moving the slider does)."""
        self.state.temperature = float(check_parameter(temperature, "temperature"))

    def use_fitted(self) -> float:
        """Set the shared temperature to the fitted one; return it."""
        if self.fitted is None:
            raise ParameterError("fitting a temperature needs labels; this frame has none")
        self.set_temperature(self.fitted.temperature)
        return float(self.fitted.temperature)

    def _show_temperature(self) -> None:
        if self.finding is None:
            return
        t = self.state.temperature
        b = self.state.binning
        now = self.now = calibration_summary(self.frame, t, self._part(self.rows), b)
        self.now_held = (
            None if self.compare_rows is None else calibration_summary(self.frame, t, self._part(self.compare_rows), b)
        )
        fit_t = self.fitted.temperature if self.fitted else t
        with self.quietly():
            with self.marker.hold_sync():
                self.marker.x, self.marker.y = [t], [now.nll]
            with self.marker_label.hold_sync():
                self.marker_label.x, self.marker_label.y, self.marker_label.text = [t], [now.nll], [f"T {t:.3f}"]
            self.slider.value = t
        for key, _, _ in _METRICS:
            sc = self._scales[key]
            y0, y1 = sc.min, sc.max
            with self._rules[key].hold_sync():
                self._rules[key].x = np.array([[fit_t, fit_t], [t, t]])
                self._rules[key].y = np.array([[y0, y1], [y0, y1]])
        parts = [f"<b>T = {t:.4g}</b>"] + [f"{label} {getattr(now, key):.4f}" for key, label, _ in _METRICS]
        if self.now_held is not None:
            held = self.now_held
            parts.append("held out: " + ", ".join(f"{label} {getattr(held, key):.4f}" for key, label, _ in _METRICS))
        self.readout.value = " &nbsp;·&nbsp; ".join(parts)

    def on_temperature(self, temperature: float) -> None:
        if self._grid_given is None and self.finding is not None:
            g = self.finding.temperature
            if not g.min() <= temperature <= g.max():  # widen the grid to keep the current T in view
                self._compute()
                return
        self._show_temperature()

    def _on_slider(self, change: Any) -> None:
        if not self.is_quiet:
            self.set_temperature(float(change["new"]))

    def _on_drag_end(self, mark: Any, content: dict) -> None:
        point = (content or {}).get("point") or {}
        x = point.get("x")
        if x is not None:
            self.set_temperature(float(x))

    def _on_marker_x(self, change: Any) -> None:
        if self.is_quiet:
            return
        new = change["new"]
        if new is not None and len(new) and float(new[0]) > 0 and float(new[0]) != self.state.temperature:
            self.set_temperature(float(new[0]))

    # ------------------------------------------------------------------ selection in

    def _on_live(self, change: Any) -> None:
        if change["new"] and self._curves_stale:
            self._curves_stale = False
            self._compute()
        elif change["new"] and self._selection_stale:
            self.on_selection(self.state.rows, self.owns_selection)

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        if not self.live:
            self._selection_stale = True  # drawn when the view is in sight again
            return
        self._selection_stale = False
        if self.finding is None or rows.size == 0 or rows.size > MAX_SELECTION_SWEEP or not self.frame.has_labels:
            self.selection_finding = None
            self.selection_curve.visible = False
            if self.finding is not None:
                self._set_range("nll", self._nll_curves())
            return
        grid = self.finding.temperature
        self.selection_finding = sweep_finding(self.frame, self._part(rows), self.state.binning, grid=grid, fit=False)
        with self.selection_curve.hold_sync():
            self.selection_curve.x, self.selection_curve.y = grid, self.selection_finding.nll
            self.selection_curve.visible = True
        self._set_range("nll", self._nll_curves())
        self._show_temperature()

    def _nll_curves(self) -> list[np.ndarray]:
        out = [] if self.finding is None else [self.finding.nll]
        for extra in (self.compare_finding, self.selection_finding):
            if extra is not None:
                out.append(extra.nll)
        return out

    def on_frame(self) -> None:
        self.rows = self._rows(None)
        self.compare_rows = None
        if self.live:
            self._compute()
        else:  # out of sight: one pass per grid temperature is spent when the view is in sight again
            self._curves_stale = True
