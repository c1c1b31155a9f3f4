"""Temperature sweep: NLL, ECE and Brier score against T on a log grid, with the fitted T marked.

The curves come from :func:`logitscope.analysis.temperature_sweep` (computed
once per set of rows; they do not depend on the shared temperature). The
current temperature is a draggable marker on the NLL curve and a log slider;
both write ``state.temperature``, so the reliability diagram and every
linked view follow. With ``compare_rows`` (the held-out part of a split) the
same curves of those rows are drawn dashed: a temperature fitted on one part
should also lower the other part's NLL.
"""

from __future__ import annotations

import html
import math
import warnings
from typing import Any

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets

from .. import analysis as an
from ..errors import ParameterError
from ..frame import LogitFrame
from ..report.svg import nice_ticks
from .scatter import view_state
from .state import SharedState, rows_or_all

__all__ = ["TemperatureSweepView"]

_METRICS = (("nll", "NLL", "#3b6ea8"), ("ece", "ECE", "#d9822b"), ("brier", "Brier", "#2f855a"))
_FITTED = "#c23b3b"
_CURRENT = "#1f2933"
#: Largest selection whose own NLL curve is drawn (one pass over its rows per grid point).
MAX_SELECTION_SWEEP = 100_000


class TemperatureSweepView(widgets.VBox):
    """NLL, ECE and Brier against temperature, with a draggable marker bound to ``state.temperature``.

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
        The grid; default 41 log-spaced temperatures from 0.25 to 4, widened to hold the fitted T.
    n_bins : int
        Bins of the ECE.
    name : str, default "temperature sweep"
        Name of the view (it writes the temperature, never the selection).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> z = np.array([[4.0, 0.0], [4.0, 0.0], [0.0, 4.0], [4.0, 0.0]])
    >>> view = TemperatureSweepView(LogitFrame(z, labels=[0, 0, 1, 1]))
    >>> round(view.fitted.temperature, 3)  # p = 0.75 on every sample is optimal: T = 4 / log 3
    3.641
    >>> view.set_temperature(2.0)
    >>> view.state.temperature
    2.0
    """

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
        n_bins: int = 15,
        name: str = "temperature sweep",
        **kwargs: Any,
    ) -> None:
        self.frame = frame
        self.state = view_state(frame, state)
        self.name = name
        self.n_bins = int(n_bins)
        self._grid_given = None if temperatures is None else np.asarray(temperatures, dtype=np.float64)
        if self._grid_given is not None and (
            self._grid_given.ndim != 1 or self._grid_given.size < 2 or np.any(~(self._grid_given > 0))
        ):
            raise ParameterError("temperatures must be a 1-D array of at least 2 positive numbers")
        self.rows = self._rows(rows)
        self.compare_rows = None if compare_rows is None else self._rows(compare_rows)
        self.sweep: an.TemperatureSweep | None = None
        self.compare_sweep: an.TemperatureSweep | None = None
        self.selection_sweep: an.TemperatureSweep | None = None
        self.fitted: an.TemperatureFit | None = None
        self._syncing = False

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
                x=[1.0, 2.0],
                y=[0.0, 0.0],
                scales=sc,
                colors=[color],
                stroke_width=1.5,
                line_style="dashed",
                visible=False,
                labels=[f"{label}, held out"],
            )
            rules = bq.Lines(
                x=np.ones((2, 2)),
                y=np.zeros((2, 2)),
                scales=sc,
                colors=[_FITTED, _CURRENT],
                stroke_width=1.4,
                line_style="dashed",
            )
            marks = [rules, comp, curve]
            self.curves[key], self.compare_curves[key], self._rules[key] = curve, comp, rules
            if key == "nll":
                self.selection_curve = bq.Lines(
                    x=[1.0, 2.0],
                    y=[0.0, 0.0],
                    scales=sc,
                    colors=["#6b46c1"],
                    stroke_width=1.5,
                    line_style="dash_dotted",
                    visible=False,
                    labels=["NLL, selection"],
                )
                self.marker = bq.Scatter(
                    x=[1.0],
                    y=[0.0],
                    scales=sc,
                    colors=[_CURRENT],
                    default_size=90,
                    enable_move=True,
                    restrict_x=True,
                    update_on_move=False,
                    stroke="white",
                    stroke_width=1.5,
                    tooltip=bq.Tooltip(fields=["x"], labels=["T"], formats=[".3f"]),
                )
                self.marker.on_drag_end(self._on_drag_end)
                self.marker.observe(self._on_marker_x, "x")
                marks = [rules, comp, self.selection_curve, curve, self.marker]
            self.figures[key] = bq.Figure(
                marks=marks,
                axes=[
                    bq.Axis(scale=self._sx, label="temperature T", tick_format=".2~f", grid_lines="none"),
                    bq.Axis(
                        scale=self._scales[key],
                        side="left",
                        label=label,
                        tick_format=".3~f",
                        grid_lines="dashed",
                    ),
                ],
                title=f"{label} against temperature" + (" (drag the dot)" if key == "nll" else ""),
                title_style={"font-size": "12.5px"},
                fig_margin={"top": 30, "bottom": 44, "left": 52, "right": 12},
                padding_x=0.0,
                padding_y=0.0,
                display_toolbar=False,
                layout=widgets.Layout(width="300px", height="240px"),
            )
        self.slider = widgets.FloatLogSlider(
            value=self.state.temperature,
            base=10,
            min=-1.0,
            max=1.0,
            step=0.005,
            description="T",
            continuous_update=False,
            readout_format=".3f",
            style={"description_width": "20px"},
            layout={"width": "340px"},
        )
        self.fit_button = widgets.Button(
            description="use fitted T",
            tooltip="set T to the value that minimises the NLL of these rows",
            layout={"width": "110px"},
        )
        self.one_button = widgets.Button(description="T = 1", layout={"width": "64px"})
        self.readout = widgets.HTML()
        self.note = widgets.HTML()
        super().__init__(
            children=[
                widgets.HBox(list(self.figures.values()), layout={"flex_flow": "row wrap"}),
                widgets.HBox([self.slider, self.fit_button, self.one_button], layout={"align_items": "center"}),
                self.readout,
                self.note,
            ],
            **kwargs,
        )
        self.add_class("logitscope-sweep")
        self.slider.observe(self._on_slider, "value")
        self.fit_button.on_click(lambda _: self.use_fitted())
        self.one_button.on_click(lambda _: self.set_temperature(1.0))
        self.state.observe(self._on_temperature, "temperature")
        self.state.observe(self._on_rows, "rows")
        self.observe(self._on_live, "live")
        self._selection_stale = False
        self._compute()

    # ------------------------------------------------------------------ rows and numbers

    def _rows(self, rows: Any) -> np.ndarray:
        return rows_or_all(rows, self.frame.n_samples, "a temperature sweep")

    def set_rows(self, rows: Any, compare_rows: Any = None) -> None:
        """Sweep other rows (None: all), optionally with comparison rows drawn dashed."""
        self.rows = self._rows(rows)
        self.compare_rows = None if compare_rows is None else self._rows(compare_rows)
        self._compute()

    def _sweep(self, rows: np.ndarray, grid: np.ndarray) -> an.TemperatureSweep:
        assert self.frame.labels is not None
        z = self.frame.logits if rows.size == self.frame.n_samples else np.asarray(self.frame.logits[rows])
        y = self.frame.labels if rows.size == self.frame.n_samples else self.frame.labels[rows]
        with an.assume_valid():
            return an.temperature_sweep(z, y, grid, self.n_bins)

    def grid(self) -> np.ndarray:
        """The temperatures swept: the given grid, or 0.25..4 widened to hold the fitted and current T."""
        if self._grid_given is not None:
            return np.sort(self._grid_given)
        marks = [self.state.temperature] + ([self.fitted.temperature] if self.fitted else [])
        t_lo, t_hi = an.temperature.T_MIN, an.temperature.T_MAX  # the accepted range of a temperature
        lo = max(t_lo, min(0.25, *(m / 2 for m in marks)))
        hi = min(t_hi, max(4.0, *(m * 2 for m in marks)))
        return np.geomspace(lo, hi, 41)

    def _compute(self) -> None:
        if not self.frame.has_labels:
            self.note.value = "<i>The temperature sweep needs labels; this frame has none.</i>"
            self.fit_button.disabled = True
            return
        assert self.frame.labels is not None
        part = self.frame if self.rows.size == self.frame.n_samples else self.frame.subset(self.rows)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # a fit at its bound is flagged in the note
            self.fitted = part.fit_temperature()
        self.fitted_temperature = self.fitted.temperature
        grid = self.grid()
        self.sweep = self._sweep(self.rows, grid)
        self.compare_sweep = None if self.compare_rows is None else self._sweep(self.compare_rows, grid)
        lo, hi = float(grid.min()), float(grid.max())
        self.slider.min, self.slider.max = math.log10(lo), math.log10(hi)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for key, _, _ in _METRICS:
                values = getattr(self.sweep, key)
                both = values if self.compare_sweep is None else np.r_[values, getattr(self.compare_sweep, key)]
                span = float(np.max(both) - np.min(both)) or 1e-3
                with self.figures[key].hold_sync():
                    y0 = max(0.0, float(np.min(both)) - 0.06 * span)
                    y1 = float(np.max(both)) + 0.06 * span
                    self._scales[key].min, self._scales[key].max = y0, y1
                    self.figures[key].axes[1].tick_values = np.asarray(nice_ticks(y0, y1, n=5))
                    self.curves[key].x, self.curves[key].y = grid, values
                    comp = self.compare_curves[key]
                    if self.compare_sweep is not None:
                        comp.x, comp.y = grid, getattr(self.compare_sweep, key)
                    comp.visible = self.compare_sweep is not None
        bound = " It is at its bound: the NLL keeps falling towards it." if self.fitted.at_bound else ""
        part_name = "all rows" if self.rows.size == self.frame.n_samples else f"{self.rows.size:,} rows (fit part)"
        dashed = "" if self.compare_rows is None else f"; dashed: the {self.compare_rows.size:,} held-out rows"
        self.note.value = (
            f"<span style='color:#5f6b7a'>Fitted on {html.escape(part_name)}: T = {self.fitted.temperature:.4f} "
            f"(red rule); black rule and dot: the current T{dashed}; dash-dotted: NLL of the selected samples."
            f"{bound}</span>"
        )
        ticks = nice_ticks(lo, hi, log=True)
        for fig in self.figures.values():
            fig.axes[0].tick_values = np.asarray(ticks)
        self._on_rows()
        self._show_temperature()

    def values_at(self, temperature: float, rows: np.ndarray | None = None) -> dict[str, float]:
        """NLL, ECE and Brier of ``rows`` (default the view's rows) at ``temperature``, from the cached scores."""
        r = self.rows if rows is None else rows
        s = self.frame.sample_scores(temperature)
        assert s.correct is not None and s.true_log_probability is not None and s.brier is not None
        return {
            "nll": float(-np.mean(s.true_log_probability[r])),
            "ece": an.reliability_bins(s.confidence[r], s.correct[r], self.n_bins).ece,
            "brier": float(np.mean(s.brier[r])),
        }

    # ------------------------------------------------------------------ temperature in and out

    def set_temperature(self, temperature: float) -> None:
        """Write the shared temperature (as dragging the marker or moving the slider does)."""
        t = float(temperature)
        if not math.isfinite(t) or t <= 0:
            raise ParameterError(f"temperature must be positive and finite, got {temperature!r}")
        self.state.temperature = t

    def use_fitted(self) -> float:
        """Set the shared temperature to the fitted one; return it."""
        if self.fitted is None:
            raise ParameterError("fitting a temperature needs labels; this frame has none")
        self.set_temperature(self.fitted.temperature)
        return self.fitted.temperature

    def _show_temperature(self) -> None:
        if self.sweep is None:
            return
        t = self.state.temperature
        now = self.values_at(t)
        fit_t = self.fitted.temperature if self.fitted else t
        self._syncing = True
        try:
            with self.marker.hold_sync():
                self.marker.x, self.marker.y = [t], [now["nll"]]
            self.slider.value = min(max(t, 10**self.slider.min), 10**self.slider.max)
        finally:
            self._syncing = False
        for key, _, _ in _METRICS:
            sc = self._scales[key]
            y0, y1 = sc.min, sc.max
            with self._rules[key].hold_sync():
                self._rules[key].x = np.array([[fit_t, fit_t], [t, t]])
                self._rules[key].y = np.array([[y0, y1], [y0, y1]])
        parts = [f"<b>T = {t:.4g}</b>"] + [f"{label} {now[key]:.4f}" for key, label, _ in _METRICS]
        if self.compare_rows is not None:
            held = self.values_at(t, self.compare_rows)
            parts.append("held out: " + ", ".join(f"{label} {held[key]:.4f}" for key, label, _ in _METRICS))
        self.readout.value = " &nbsp;·&nbsp; ".join(parts)

    def _on_temperature(self, change: Any) -> None:
        t = self.state.temperature
        if self._grid_given is None and self.sweep is not None:
            g = self.sweep.temperature
            if not g.min() <= t <= g.max():  # widen the grid to keep the current T in view
                self._compute()
                return
        self._show_temperature()

    def _on_slider(self, change: Any) -> None:
        if self._syncing:
            return
        self.set_temperature(float(change["new"]))

    def _on_drag_end(self, mark: Any, content: dict) -> None:
        point = (content or {}).get("point") or {}
        x = point.get("x")
        if x is not None:
            self.set_temperature(float(x))

    def _on_marker_x(self, change: Any) -> None:
        if self._syncing:
            return
        new = change["new"]
        if new is not None and len(new) and float(new[0]) > 0 and float(new[0]) != self.state.temperature:
            self.set_temperature(float(new[0]))

    # ------------------------------------------------------------------ selection in

    def _on_live(self, change: Any) -> None:
        if change["new"] and self._selection_stale:
            self._on_rows()

    def _on_rows(self, change: Any = None) -> None:
        if not self.live:
            self._selection_stale = True  # drawn when the view is in sight again
            return
        self._selection_stale = False
        rows = self.state.rows
        if self.sweep is None or rows.size == 0 or rows.size > MAX_SELECTION_SWEEP or self.frame.labels is None:
            self.selection_sweep = None
            self.selection_curve.visible = False
            return
        self.selection_sweep = self._sweep(rows, self.sweep.temperature)
        with self.selection_curve.hold_sync():
            self.selection_curve.x = self.sweep.temperature
            self.selection_curve.y = self.selection_sweep.nll
            self.selection_curve.visible = True
        sc = self._scales["nll"]
        sc.max = max(float(sc.max), float(np.max(self.selection_sweep.nll)))
