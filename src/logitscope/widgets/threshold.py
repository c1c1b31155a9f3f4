"""Threshold picker: accuracy-coverage (or risk-coverage) curve, a review threshold and its readouts.

Predictions with confidence at or above the threshold are accepted; the
rest go to a person. The threshold is set by hand (a slider synced with a
vertical rule on the curve), by a target accuracy
(:func:`logitscope.analysis.threshold_for_accuracy`) or by the costs of an
error and of a review (:func:`logitscope.analysis.threshold_for_cost`), and is
written to ``state.threshold``. Readouts: coverage, accuracy of the accepted
predictions with a binomial interval (Wilson or Clopper-Pearson), number
sent for review, and a table by predicted class; optionally one threshold
per predicted class (:func:`logitscope.analysis.per_class_thresholds`).

Brushing an interval of coverage on the curve selects the samples whose
confidence lies in the brushed range (the samples just above and below the
threshold when the brush covers the rule).
"""

from __future__ import annotations

import html
import math
from typing import Any, TypedDict, cast

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets
from bqplot.interacts import BrushIntervalSelector

from .. import analysis as an
from ..analysis.selective import IntervalMethod
from ..errors import ParameterError
from ..frame import LogitFrame
from .scatter import view_state
from .state import SharedState, rows_or_all

__all__ = ["ThresholdPicker"]

MODES = ("by hand", "target accuracy", "costs")
#: Most points drawn for the curve (the numbers use every row).
MAX_CURVE_POINTS = 2000
MAX_SELECTED_POINTS = 2000
_CURVE = "#3b6ea8"
_RULE = "#c23b3b"
_TARGET = "#2f855a"
_SELECTED = "#6b46c1"

_CSS = (
    "<style>.logitscope-readout{border-collapse:collapse;font-size:12.5px}"
    ".logitscope-readout th{text-align:left;font-weight:normal;color:#5f6b7a;padding:3px 14px 3px 0;line-height:1.3}"
    ".logitscope-readout td{text-align:right;font-variant-numeric:tabular-nums;padding:3px 0;line-height:1.3}"
    ".logitscope-classes{border-collapse:collapse;font-size:12px;margin-top:4px}"
    ".logitscope-classes th{background:#f4f6f9;font-weight:600;padding:3px 8px;text-align:right}"
    ".logitscope-classes th:first-child,.logitscope-classes td:first-child{text-align:left}"
    ".logitscope-classes th,.logitscope-classes td{line-height:1.3}"
    ".logitscope-classes td{padding:2px 8px;border-bottom:1px solid #e3e7ec;text-align:right;"
    "font-variant-numeric:tabular-nums}"
    ".logitscope-caution{border-left:4px solid #d9822b;background:#fff7ec;padding:8px 12px;font-size:12.5px;"
    "max-width:380px;line-height:1.4;margin-top:10px}</style>"
)


class _IntervalOptions(TypedDict):
    """Keyword arguments naming the binomial interval (``interval`` is a traitlets.Enum of the methods)."""

    level: float
    method: IntervalMethod


def _pct(v: float) -> str:
    return "n/a" if not math.isfinite(v) else f"{100 * v:.2f}%"


def _num(v: float | None, digits: int = 4) -> str:
    return "n/a" if v is None or not math.isfinite(v) else f"{v:.{digits}f}"


class ThresholdPicker(widgets.VBox):
    """Choose the confidence threshold below which predictions go to review.

    Parameters
    ----------
    frame : LogitFrame
        The data (needs labels; without them the view says so).
    state : SharedState, optional
        Shared state; a new one is made when None.
    rows : array_like, optional
        Rows the curve and the rules use (the fit part of a split); default all rows.
    mode : {"by hand", "target accuracy", "costs"}
        How the threshold is chosen.
    target_accuracy : float
        Target of the "target accuracy" rule.
    error_cost, review_cost : float
        Costs of the "costs" rule: an accepted error, a sample sent for review.
    interval : {"wilson", "clopper-pearson"}
        Binomial confidence interval of the accuracy readouts.
    level : float
        Confidence level of the interval.
    name : str, default "threshold"
        Origin written to the shared state.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> conf = np.array([0.95, 0.9, 0.8, 0.7, 0.6])
    >>> frame = LogitFrame(np.log(np.c_[conf, 1 - conf]), labels=[0, 0, 0, 1, 0])
    >>> picker = ThresholdPicker(frame, mode="target accuracy", target_accuracy=0.75)
    >>> round(picker.threshold, 6), picker.choice.n_review, round(picker.state.threshold, 6)
    (0.6, 0, 0.6)
    >>> picker.select_confidence_range(0.65, 0.85).tolist()  # the samples around a threshold of 0.75
    [2, 3]
    """

    mode = traitlets.Enum(list(MODES), default_value="by hand", help="how the threshold is chosen")
    threshold = traitlets.Float(0.5, help="the confidence threshold: accept confidence >= threshold")
    target_accuracy = traitlets.Float(0.95, help="target of the 'target accuracy' rule")
    use_lower_bound = traitlets.Bool(False, help="require the interval's lower bound to reach the target")
    error_cost = traitlets.Float(10.0, help="cost of an accepted error")
    review_cost = traitlets.Float(1.0, help="cost of sending a sample for review")
    interval = traitlets.Enum(["wilson", "clopper-pearson"], default_value="wilson")
    level = traitlets.Float(0.95, help="confidence level of the binomial interval")
    per_class = traitlets.Bool(False, help="one threshold per predicted class (target accuracy rule)")
    y_kind = traitlets.Enum(["accuracy", "risk"], default_value="accuracy", help="curve drawn against coverage")

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        rows: Any = None,
        mode: str = "by hand",
        target_accuracy: float = 0.95,
        error_cost: float = 10.0,
        review_cost: float = 1.0,
        interval: str = "wilson",
        level: float = 0.95,
        name: str = "threshold",
        **kwargs: Any,
    ) -> None:
        self.frame = frame
        self.state = view_state(frame, state)
        self.name = name
        if mode not in MODES:
            raise ParameterError(f"mode must be one of {MODES}, got {mode!r}")
        self.rows = self._rows(rows)
        self.curve: an.RiskCoverage | None = None
        self.choice: an.ThresholdChoice | None = None
        self.class_choices: list[an.ThresholdChoice | None] = []
        self.class_thresholds: np.ndarray | None = None
        self.combined: dict | None = None
        self.brushed: tuple[float, float] | None = None
        self._busy = False

        self._sx = bq.LinearScale(min=0.0, max=1.0)
        self._sy = bq.LinearScale(min=0.8, max=1.0)
        sc = {"x": self._sx, "y": self._sy}
        self.line = bq.Lines(x=[0.0, 1.0], y=[1.0, 1.0], scales=sc, colors=[_CURVE], stroke_width=2)
        self.rule = bq.Lines(
            x=[0.5, 0.5], y=[0.0, 1.0], scales=sc, colors=[_RULE], stroke_width=1.5, line_style="dashed"
        )
        self.target_rule = bq.Lines(
            x=[0.0, 1.0],
            y=[0.95, 0.95],
            scales=sc,
            colors=[_TARGET],
            stroke_width=1.3,
            line_style="dotted",
            visible=False,
        )
        self.point = bq.Scatter(x=[0.5], y=[1.0], scales=sc, colors=[_RULE], default_size=70, stroke="white")
        self.selected_points = bq.Scatter(
            x=[0.0], y=[0.0], scales=sc, colors=[_SELECTED], default_size=10, visible=False, opacities=[0.8]
        )
        self._ax = bq.Axis(scale=self._sx, label="coverage (share accepted without review)", tick_format=".1f")
        self._ay = bq.Axis(
            scale=self._sy, side="left", label="accuracy of accepted", tick_format=".3~f", grid_lines="dashed"
        )
        self.brush = BrushIntervalSelector(scale=self._sx, marks=[], color="#6b46c1")
        self.brush.observe(self._on_brush, ["brushing", "selected"])
        self.figure = bq.Figure(
            marks=[self.target_rule, self.line, self.selected_points, self.rule, self.point],
            axes=[self._ax, self._ay],
            interaction=self.brush,
            title="Accuracy of accepted predictions (brush to select samples)",
            title_style={"font-size": "12.5px"},
            fig_margin={"top": 30, "bottom": 42, "left": 60, "right": 14},
            display_toolbar=False,
            layout=widgets.Layout(width="460px", height="320px"),
        )
        k = max(frame.n_classes, 2)
        self.slider = widgets.FloatSlider(
            value=0.5,
            min=round(1.0 / k, 4),
            max=1.0,
            step=0.0005,
            description="threshold",
            readout_format=".4f",
            continuous_update=False,
            style={"description_width": "64px"},
            layout={"width": "420px"},
        )
        self._mode_buttons = widgets.ToggleButtons(
            options=list(MODES),
            value=mode,
            style={"button_width": "124px"},
            tooltips=["move the slider", "lowest threshold reaching a target accuracy", "least expected cost"],
        )
        self._target = widgets.BoundedFloatText(
            value=target_accuracy,
            min=0.5,
            max=1.0,
            step=0.005,
            description="target accuracy",
            style={"description_width": "110px"},
            layout={"width": "210px"},
        )
        self._lower = widgets.Checkbox(value=False, description="interval's lower bound must reach it", indent=False)
        self._per_class = widgets.Checkbox(value=False, description="one threshold per predicted class", indent=False)
        self._error_cost = _cost_box("cost of an error", error_cost)
        self._review_cost = _cost_box("cost of a review", review_cost)
        self._interval = widgets.Dropdown(
            options=[("Wilson score", "wilson"), ("Clopper-Pearson (exact)", "clopper-pearson")],
            value=interval,
            description="interval",
            style={"description_width": "56px"},
            layout={"width": "250px"},
        )
        self._level = widgets.Dropdown(
            options=[("90%", 0.9), ("95%", 0.95), ("99%", 0.99)],
            value=level,
            description="level",
            style={"description_width": "40px"},
            layout={"width": "120px"},
        )
        self._y_kind = widgets.ToggleButtons(
            options=["accuracy", "risk"], value="accuracy", style={"button_width": "84px"}
        )
        self._target_box = widgets.HBox([self._target, self._lower, self._per_class], layout={"flex_flow": "row wrap"})
        self._cost_box = widgets.HBox([self._error_cost, self._review_cost])
        self.readout = widgets.HTML()
        self.class_table = widgets.HTML()
        self.caution = widgets.HTML(
            _CSS + f"<div class='logitscope-caution'><b>Caution.</b> {html.escape(an.CAUTION)}</div>"
        )
        self.note = widgets.HTML()
        super().__init__(
            children=[
                widgets.HBox([self._mode_buttons, self._interval, self._level], layout={"flex_flow": "row wrap"}),
                self._target_box,
                self._cost_box,
                widgets.HBox([self.slider, widgets.Label("curve:"), self._y_kind], layout={"align_items": "center"}),
                widgets.HBox(
                    [self.figure, widgets.VBox([self.readout, self.caution], layout={"margin": "24px 0 0 8px"})],
                    layout={"flex_flow": "row wrap"},
                ),
                self.note,
                self.class_table,
            ],
            **kwargs,
        )
        self.add_class("logitscope-threshold")
        with self.hold_trait_notifications():
            self.mode, self.target_accuracy = mode, float(target_accuracy)
            self.error_cost, self.review_cost = float(error_cost), float(review_cost)
            self.interval, self.level = interval, float(level)
        for control, trait in (
            (self._mode_buttons, "mode"),
            (self._target, "target_accuracy"),
            (self._lower, "use_lower_bound"),
            (self._per_class, "per_class"),
            (self._error_cost, "error_cost"),
            (self._review_cost, "review_cost"),
            (self._interval, "interval"),
            (self._level, "level"),
            (self._y_kind, "y_kind"),
        ):
            widgets.link((control, "value"), (self, trait))
        self.slider.observe(self._on_slider, "value")
        self.observe(self._on_rule_option, ["mode", "target_accuracy", "use_lower_bound", "error_cost", "review_cost"])
        self.observe(self._on_readout_option, ["interval", "level", "per_class"])
        self.observe(self._on_y_kind, "y_kind")
        self.observe(self._on_threshold, "threshold")
        self.state.observe(self._on_temperature, "temperature")
        self.state.observe(self._on_rows, "rows")
        self.state.observe(self._on_state_threshold, "threshold")
        if not frame.has_labels:
            self.note.value = "<i>Choosing a review threshold needs labels; this frame has none.</i>"
            return
        if self.state.threshold is not None and mode == "by hand":
            self.threshold = float(self.state.threshold)
        self._refresh(apply_rule=True)

    # ------------------------------------------------------------------ rows and numbers

    def _rows(self, rows: Any) -> np.ndarray:
        return rows_or_all(rows, self.frame.n_samples, "a threshold picker")

    def set_rows(self, rows: Any) -> None:
        """Use other rows of the frame (None: all) for the curve and the rules."""
        self.rows = self._rows(rows)
        if self.frame.has_labels:
            self._refresh(apply_rule=True)

    def scores(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Confidence, correctness and predicted class of the view's rows at the shared temperature."""
        s = self.frame.sample_scores(self.state.temperature)
        if s.correct is None:
            raise ParameterError("choosing a threshold needs labels; this frame has none")
        return s.confidence[self.rows], s.correct[self.rows], s.predicted[self.rows]

    def rule_choice(self) -> an.ThresholdChoice:
        """The threshold the current rule gives (or the hand-set one, evaluated)."""
        conf, ok, _ = self.scores()
        kw: _IntervalOptions = {"level": self.level, "method": cast(IntervalMethod, self.interval)}
        if self.mode == "target accuracy":
            return an.threshold_for_accuracy(conf, ok, self.target_accuracy, use_lower_bound=self.use_lower_bound, **kw)
        if self.mode == "costs":
            return an.threshold_for_cost(conf, ok, self.error_cost, self.review_cost, **kw)
        return an.evaluate_threshold(conf, ok, self.threshold, **kw)

    def _refresh(self, apply_rule: bool = False) -> None:
        """Recompute the curve, the rule's threshold (when asked) and every readout."""
        conf, ok, pred = self.scores()
        self.curve = an.risk_coverage_curve(conf, ok)
        if apply_rule and self.mode != "by hand":
            c = self.rule_choice()
            self._busy = True
            try:
                self.threshold = c.threshold if math.isfinite(c.threshold) else 1.0 + 1e-9
            finally:
                self._busy = False
        self._compute_readouts(conf, ok, pred)
        self._draw()

    def _compute_readouts(self, conf: np.ndarray, ok: np.ndarray, pred: np.ndarray) -> None:
        kw: _IntervalOptions = {"level": self.level, "method": cast(IntervalMethod, self.interval)}
        if self.mode == "by hand":
            self.choice = an.evaluate_threshold(conf, ok, self.threshold, **kw)
        else:
            self.choice = self.rule_choice()  # an unreachable target gives threshold inf: nothing accepted
        t = self.choice.threshold
        self.class_choices = []
        for k in range(self.frame.n_classes):
            m = pred == k
            self.class_choices.append(an.evaluate_threshold(conf[m], ok[m], t, **kw) if m.any() else None)
        self.class_thresholds = None
        self.combined = None
        if self.per_class and self.mode == "target accuracy":
            own = an.per_class_thresholds(
                conf, ok, pred, self.target_accuracy, self.frame.n_classes, use_lower_bound=self.use_lower_bound, **kw
            )
            self.class_thresholds = np.array([np.inf if c is None else c.threshold for c in own])
            accepted = conf >= self.class_thresholds[pred]
            n_acc, n_right = int(accepted.sum()), int((accepted & ok).sum())
            lo, hi = an.binomial_interval(n_right, n_acc, self.level, cast(IntervalMethod, self.interval))
            self.combined = {
                "coverage": n_acc / conf.size,
                "accuracy": n_right / n_acc if n_acc else float("nan"),
                "n_accepted": n_acc,
                "n_review": int(conf.size - n_acc),
                "interval": (lo, hi),
                "own": own,
            }
        if self.state.threshold != (t if math.isfinite(t) else None):
            self._busy = True
            try:
                self.state.threshold = t if math.isfinite(t) else None
            finally:
                self._busy = False

    # ------------------------------------------------------------------ drawing

    def _curve_xy(self) -> tuple[np.ndarray, np.ndarray]:
        rc = self.curve
        assert rc is not None
        y = rc.accuracy if self.y_kind == "accuracy" else rc.risk
        x = rc.coverage
        if x.size > MAX_CURVE_POINTS:
            idx = np.unique(np.linspace(0, x.size - 1, MAX_CURVE_POINTS).round().astype(np.int64))
            x, y = x[idx], y[idx]
        return np.r_[0.0, x], np.r_[y[0], y]

    def _draw(self) -> None:
        if self.curve is None or self.choice is None:
            return
        x, y = self._curve_xy()
        acc_mode = self.y_kind == "accuracy"
        c = self.choice
        target = self.target_accuracy if self.mode == "target accuracy" else None
        lo_data = float(np.min(y)) if acc_mode else 0.0
        hi_data = 1.0 if acc_mode else float(np.max(y))
        if acc_mode:
            y0 = max(0.0, math.floor((min(lo_data, target or 1.0) - 0.01) * 50) / 50)
            y1 = 1.0
        else:
            y0, y1 = 0.0, max(0.02, math.ceil((max(hi_data, 1 - (target or 1.0)) + 0.01) * 50) / 50)
        cy = c.accuracy if acc_mode else 1.0 - c.accuracy
        with self.figure.hold_sync():
            self._sy.min, self._sy.max = y0, y1
            self._ay.label = "accuracy of accepted" if acc_mode else "risk (error rate) of accepted"
            self.figure.title = (
                "Accuracy of accepted predictions" if acc_mode else "Risk of accepted predictions"
            ) + " (brush to select samples)"
            with self.line.hold_sync():
                self.line.x, self.line.y = x, y
            with self.rule.hold_sync():
                self.rule.x, self.rule.y = [c.coverage, c.coverage], [y0, y1]
            self.rule.visible = c.n_accepted > 0
            with self.point.hold_sync():
                self.point.x, self.point.y = [c.coverage], [cy if math.isfinite(cy) else y1]
            self.point.visible = c.n_accepted > 0
            if target is not None:
                ty = target if acc_mode else 1.0 - target
                self.target_rule.x, self.target_rule.y = [0.0, 1.0], [ty, ty]
            self.target_rule.visible = target is not None
        self._busy = True
        try:
            t = c.threshold
            self.slider.value = min(max(t, self.slider.min), self.slider.max) if math.isfinite(t) else self.slider.max
        finally:
            self._busy = False
        self._target_box.layout.display = "" if self.mode == "target accuracy" else "none"
        self._cost_box.layout.display = "" if self.mode == "costs" else "none"
        self.readout.value = _CSS + self._readout_html()
        self.class_table.value = _CSS + self._class_table_html()
        self._on_rows()

    def _readout_html(self) -> str:
        c = self.choice
        assert c is not None
        lo, hi = c.interval
        method = "Wilson score" if c.interval_method == "wilson" else "Clopper-Pearson"
        rows = [
            ("rule", html.escape(c.rule if self.mode != "by hand" else "set by hand")),
            ("threshold", _num(c.threshold if math.isfinite(c.threshold) else None)),
            ("coverage", _pct(c.coverage)),
            ("accepted", f"{c.n_accepted:,}"),
            ("sent for review", f"{c.n_review:,}"),
            ("accuracy of accepted", _num(c.accuracy)),
            (f"{c.level:.0%} interval ({method})", f"[{_num(lo)}, {_num(hi)}]"),
        ]
        if c.expected_cost is not None:
            rows.append(("expected cost per sample", _num(c.expected_cost)))
        if not c.feasible:
            rows.append(("note", "no threshold reaches the target: everything goes to review"))
        if self.combined is not None:
            cb = self.combined
            rows += [
                ("<b>per-class thresholds</b>", ""),
                ("coverage", _pct(cb["coverage"])),
                ("sent for review", f"{cb['n_review']:,}"),
                ("accuracy of accepted", _num(cb["accuracy"])),
                (f"{c.level:.0%} interval", f"[{_num(cb['interval'][0])}, {_num(cb['interval'][1])}]"),
            ]
        body = "".join(f"<tr><th>{k}</th><td>{v}</td></tr>" for k, v in rows)
        return f"<table class='logitscope-readout'>{body}</table>"

    def _class_table_html(self) -> str:
        head = ["predicted class", "predicted", "accepted", "to review", "coverage", "accuracy", "interval"]
        own = self.combined["own"] if self.combined is not None else None
        if own is not None:
            head += ["own threshold", "own coverage", "own accuracy"]
        rows = []
        for k, c in enumerate(self.class_choices):
            if c is None:
                continue
            cells = [
                html.escape(self.frame.classes[k]),
                f"{c.n_total:,}",
                f"{c.n_accepted:,}",
                f"{c.n_review:,}",
                _pct(c.coverage),
                _num(c.accuracy),
                f"[{_num(c.interval[0], 3)}, {_num(c.interval[1], 3)}]",
            ]
            if own is not None:
                o = own[k]
                cells += (
                    ["", "", ""]
                    if o is None
                    else [_num(o.threshold if math.isfinite(o.threshold) else None), _pct(o.coverage), _num(o.accuracy)]
                )
            rows.append("<tr>" + "".join(f"<td>{v}</td>" for v in cells) + "</tr>")
        th = "".join(f"<th>{html.escape(h)}</th>" for h in head)
        return (
            "<details open><summary>By predicted class, at this threshold</summary>"
            f"<table class='logitscope-classes'><tr>{th}</tr>{''.join(rows)}</table></details>"
        )

    # ------------------------------------------------------------------ threshold in

    def set_threshold(self, threshold: float) -> None:
        """Set the threshold by hand (switches the mode to "by hand")."""
        t = float(threshold)
        if not math.isfinite(t):
            raise ParameterError(f"threshold must be a finite number, got {threshold!r}")
        with self.hold_trait_notifications():
            self.mode = "by hand"
            self.threshold = t

    def _on_slider(self, change: Any) -> None:
        if self._busy or not self.frame.has_labels:
            return
        self.set_threshold(float(change["new"]))

    def _on_threshold(self, change: Any) -> None:
        if self._busy or not self.frame.has_labels:
            return
        self._refresh()

    def _on_state_threshold(self, change: Any) -> None:
        if self._busy or not self.frame.has_labels or change["new"] is None:
            return
        if self.choice is not None and change["new"] == self.choice.threshold:
            return
        self.set_threshold(float(change["new"]))

    def _on_rule_option(self, change: Any) -> None:
        if not self.frame.has_labels:
            return
        self._refresh(apply_rule=True)

    def _on_readout_option(self, change: Any) -> None:
        if not self.frame.has_labels:
            return
        self._refresh()

    def _on_y_kind(self, change: Any) -> None:
        self._draw()

    def _on_temperature(self, change: Any) -> None:
        if not self.frame.has_labels:
            return
        self.brushed = None
        self.brush.selected = None
        self._refresh(apply_rule=True)

    # ------------------------------------------------------------------ selection out

    def select_confidence_range(self, low: float, high: float) -> np.ndarray:
        """Select the rows (of this view's rows) whose confidence lies in ``[low, high]``; return them."""
        lo, hi = sorted((float(low), float(high)))
        conf, _, _ = self.scores()
        self.brushed = (lo, hi)
        self.state.select(self.rows[(conf >= lo) & (conf <= hi)], origin=self.name)
        return self.state.rows

    def confidence_range_of_coverage(self, c0: float, c1: float) -> tuple[float, float]:
        """The confidences at which the curve passes between coverages ``c0`` and ``c1``.

        A brushed coverage interval holds the curve's points (one per distinct
        confidence) with coverage in it; the range runs from the lowest to the
        highest of their thresholds. A brush too narrow to hold a point takes
        the point nearest its middle.
        """
        rc = self.curve
        assert rc is not None
        a, b = sorted((float(c0), float(c1)))
        inside = np.flatnonzero((rc.coverage >= a) & (rc.coverage <= b))
        if inside.size == 0:
            inside = np.array([int(np.argmin(np.abs(rc.coverage - (a + b) / 2)))])
        t = rc.threshold[inside]
        return float(t.min()), float(t.max())

    def select_coverage_range(self, c0: float, c1: float) -> np.ndarray:
        """Select the samples whose confidence lies in the range a coverage interval spans; return them."""
        return self.select_confidence_range(*self.confidence_range_of_coverage(c0, c1))

    def _on_brush(self, change: Any) -> None:
        b = self.brush
        if b.brushing or self.curve is None:
            return
        sel = b.selected
        if sel is None or len(sel) < 2:
            if self.brushed is not None and self.state.origin == self.name:
                self.brushed = None
                self.state.clear(origin=self.name)
            return
        self.select_coverage_range(float(sel[0]), float(sel[1]))

    # ------------------------------------------------------------------ selection in

    def _on_rows(self, change: Any = None) -> None:
        if self.curve is None:
            return
        rows = self.state.rows
        if self.state.origin != self.name and self.brushed is not None:
            self.brushed = None
            self.brush.selected = None
        if rows.size == 0:
            self.selected_points.visible = False
            self.note.value = ""
            return
        mine = np.isin(rows, self.rows, assume_unique=True)
        sel = rows[mine]
        s = self.frame.sample_scores(self.state.temperature)
        conf = s.confidence[sel]
        t = self.choice.threshold if self.choice is not None else math.inf
        above = int(np.sum(conf >= t))
        where = f" by {html.escape(self.state.origin)}" if self.state.origin else ""
        lo_hi = ""
        if self.brushed is not None and self.state.origin == self.name:
            lo_hi = f" (confidence {self.brushed[0]:.4f} – {self.brushed[1]:.4f})"
        self.note.value = (
            f"{sel.size:,} samples selected{where}{lo_hi}: {above:,} accepted, {sel.size - above:,} sent for review"
        )
        if self.state.origin == self.name or sel.size == 0:
            self.selected_points.visible = False
            return
        # where the selected samples sit on the curve: each at the coverage of its own confidence
        rc = self.curve
        if sel.size > MAX_SELECTED_POINTS:
            sel = sel[np.linspace(0, sel.size - 1, MAX_SELECTED_POINTS).round().astype(np.int64)]
            conf = s.confidence[sel]
        pos = np.searchsorted(-rc.threshold, -conf, side="left")
        pos = np.clip(pos, 0, rc.threshold.size - 1)
        y = rc.accuracy[pos] if self.y_kind == "accuracy" else rc.risk[pos]
        with self.selected_points.hold_sync():
            self.selected_points.x, self.selected_points.y = rc.coverage[pos], y
            self.selected_points.visible = True


def _cost_box(description: str, value: float) -> widgets.BoundedFloatText:
    """A non-negative cost entry of the cost rule."""
    return widgets.BoundedFloatText(
        value=value, min=0.0, max=1e9, description=description,
        style={"description_width": "100px"}, layout={"width": "200px"},
    )  # fmt: skip
