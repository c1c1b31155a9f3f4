"""Threshold picker: accuracy-coverage (or risk-coverage) curve, a review threshold and its readouts.

Predictions with confidence at or above the threshold are accepted; the
rest go to a person. The threshold is set by hand (a slider synced with a
vertical rule on the curve), by a target accuracy or by the costs of an
error and of a review. The picker turns its controls into a
:class:`~logitscope.findings.ThresholdRule` and renders the
:class:`~logitscope.findings.ThresholdDecision` of that rule on its rows at
the shared temperature: coverage, accuracy of the accepted predictions with
a binomial interval (Wilson or Clopper-Pearson), number sent for review, a
table by predicted class and optionally one threshold per predicted class.
The report renders the same finding for the same rule. The threshold is
written to ``state.threshold``.

Brushing an interval of coverage on the curve selects the samples whose
confidence lies in the brushed range (the samples just above and below the
threshold when the brush covers the rule).
"""

from __future__ import annotations

import html
import math
from typing import Any

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets
from bqplot.interacts import BrushIntervalSelector

from .. import analysis as an
from ..errors import LogitscopeError, ParameterError
from ..findings import INTERVAL_NAMES, ThresholdDecision, ThresholdRule, threshold_decision
from ..frame import LogitFrame
from ..parameters import RANGES
from ..parameters import check as check_parameter
from ..rows import rows_or_all
from ..text import shorten
from ..ticks import nice_ticks
from .base import LinkedView
from .state import SharedState
from .style import SELECTED, css, figure_layout

__all__ = ["MODES", "ThresholdPicker"]

MODES = ("by hand", "target accuracy", "costs")
#: Most selected samples marked on the curve.
MAX_SELECTED_POINTS = 2000
_CURVE = "#0072b2"
_RULE = "#b8421a"
_TARGET = "#0f8a6d"
#: Levels offered for the interval.
LEVELS = (0.9, 0.95, 0.99)


def _pct(v: float) -> str:
    return "n/a" if not math.isfinite(v) else f"{100 * v:.2f}%"


def _num(v: float | None, digits: int = 4) -> str:
    return "n/a" if v is None or not math.isfinite(v) else f"{v:.{digits}f}"


class ThresholdPicker(LinkedView, widgets.VBox):
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
        Target of the "target accuracy" rule, in (0, 1].
    error_cost, review_cost : float
        Costs of the "costs" rule (non-negative): an accepted error, a sample sent for review.
    interval : {"wilson", "clopper-pearson"}
        Binomial confidence interval of the accuracy readouts.
    level : float
        Confidence level of the interval, in (0, 1) (the menu offers 90 %, 95 % and 99 %, and this level).
    name : str, optional
        Readable name shown where the view's selection is described.

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
    >>> ThresholdPicker(frame, mode="target accuracy", target_accuracy=0.3).target_accuracy
    0.3
    """

    kind = "threshold picker"
    mode = traitlets.Enum(list(MODES), default_value="by hand", help="how the threshold is chosen")
    threshold = traitlets.Float(0.5, help="the confidence threshold: accept confidence >= threshold")
    target_accuracy = traitlets.Float(0.95, help="target of the 'target accuracy' rule")
    use_lower_bound = traitlets.Bool(False, help="require the interval's lower bound to reach the target")
    error_cost = traitlets.Float(10.0, help="cost of an accepted error")
    review_cost = traitlets.Float(1.0, help="cost of sending a sample for review")
    interval = traitlets.Enum(list(INTERVAL_NAMES), default_value="wilson")
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
        name: str | None = None,
        **kwargs: Any,
    ) -> None:
        if mode not in MODES:
            raise ParameterError(f"mode must be one of {MODES}, got {mode!r}")
        # every rule option is checked once, by the rule itself
        ThresholdRule("accuracy", target_accuracy=target_accuracy, interval=interval, level=level)  # type: ignore[arg-type]
        ThresholdRule("cost", error_cost=error_cost, review_cost=review_cost)
        self.decision: ThresholdDecision | None = None
        self.brushed: tuple[float, float] | None = None

        self._sx = bq.LinearScale(min=0.0, max=1.0)
        self._sy = bq.LinearScale(min=0.8, max=1.0)
        sc = {"x": self._sx, "y": self._sy}
        self.line = bq.Lines(x=[0.0, 1.0], y=[1.0, 1.0], scales=sc, colors=[_CURVE], stroke_width=2)
        self.rule_line = bq.Lines(
            x=[0.5, 0.5], y=[0.0, 1.0], scales=sc, colors=[_RULE], stroke_width=1.5, line_style="dashed"
        )
        self.target_rule = bq.Lines(
            x=[0.0, 1.0], y=[0.95, 0.95], scales=sc, colors=[_TARGET], stroke_width=1.3, line_style="dotted",
            visible=False,
        )  # fmt: skip
        self.point = bq.Scatter(x=[0.5], y=[1.0], scales=sc, colors=[_RULE], default_size=70, stroke="white")
        self.selected_points = bq.Scatter(
            x=[0.0], y=[0.0], scales=sc, colors=[SELECTED], default_size=10, visible=False, opacities=[0.8]
        )
        self._ax = bq.Axis(scale=self._sx, label="coverage (share accepted without review)", tick_format=".1f")
        self._ay = bq.Axis(
            scale=self._sy, side="left", label="accuracy of accepted", tick_format=".3~f", grid_lines="dashed",
            label_offset="54px",
        )  # fmt: skip
        self.brush = BrushIntervalSelector(scale=self._sx, marks=[], color=SELECTED)
        self.brush.observe(self._on_brush, ["brushing", "selected"])
        self.figure = bq.Figure(
            marks=[self.target_rule, self.line, self.selected_points, self.rule_line, self.point],
            axes=[self._ax, self._ay],
            interaction=self.brush,
            title="Accuracy of accepted predictions (brush to select samples)",
            title_style={"font-size": "12.5px"},
            fig_margin={"top": 30, "bottom": 42, "left": 70, "right": 14},
            display_toolbar=False,
            layout=figure_layout("420px", "320px"),
        )
        # every control takes its bounds from the parameter's accepted range: nothing the API accepts is clamped
        t_lo, t_hi, t_step = RANGES["threshold"].control_bounds()
        self.slider = widgets.FloatSlider(
            value=0.5, min=t_lo, max=t_hi, step=t_step / 2, description="threshold", readout_format=".4f",
            continuous_update=False, style={"description_width": "64px"}, layout={"width": "420px"},
        )  # fmt: skip
        self._mode_buttons = widgets.ToggleButtons(
            options=list(MODES),
            value=mode,
            style={"button_width": "124px"},
            tooltips=["move the slider", "lowest threshold reaching a target accuracy", "least expected cost"],
        )
        # a plain number box: a value outside the accepted range is refused with a message, never clamped
        self._target = widgets.FloatText(
            value=target_accuracy, step=0.005, description="target accuracy",
            tooltip=f"in {RANGES['target_accuracy'].interval()}",
            style={"description_width": "110px"}, layout={"width": "210px"},
        )  # fmt: skip
        self._lower = widgets.Checkbox(value=False, description="interval's lower bound must reach it", indent=False)
        self._per_class = widgets.Checkbox(value=False, description="one threshold per predicted class", indent=False)
        self._error_cost = _cost_box("cost of an accepted error", error_cost, "error_cost")
        self._review_cost = _cost_box("cost of a review", review_cost, "review_cost")
        self._interval = widgets.Dropdown(
            options=[(v, k) for k, v in INTERVAL_NAMES.items()], value=interval, description="interval",
            style={"description_width": "56px"}, layout={"width": "250px"},
        )  # fmt: skip
        self._level = widgets.Dropdown(
            options=_level_options(float(level)), value=float(level), description="level",
            style={"description_width": "40px"}, layout={"width": "120px"},
        )  # fmt: skip
        self._y_kind = widgets.ToggleButtons(
            options=["accuracy", "risk"], value="accuracy", style={"button_width": "84px"}
        )
        self._target_box = widgets.HBox([self._target, self._lower, self._per_class], layout={"flex_flow": "row wrap"})
        self._cost_box = widgets.HBox([self._error_cost, self._review_cost])
        self.readout = widgets.HTML()
        self.class_table = widgets.HTML()
        self.caution = widgets.HTML(
            css("views") + f"<div class='ls-caution'><b>Caution.</b> {html.escape(an.CAUTION)}</div>"
        )
        self.note = widgets.HTML()
        self.error = widgets.HTML()
        # a fixed width: the readout stays beside the chart (or, on a narrow page, below it) in every mode
        side = widgets.VBox(
            [self.readout, self.caution], layout={"margin": "24px 0 0 8px", "width": "340px", "flex": "0 0 340px"}
        )
        widgets.VBox.__init__(
            self,
            children=[
                widgets.HBox([self._mode_buttons, self._interval, self._level], layout={"flex_flow": "row wrap"}),
                self._target_box,
                self._cost_box,
                self.error,
                widgets.HBox([self.slider, widgets.Label("curve:"), self._y_kind], layout={"align_items": "center"}),
                widgets.HBox([self.figure, side], layout={"flex_flow": "row wrap", "align_items": "flex-start"}),
                self.note,
                self.class_table,
            ],
            **kwargs,
        )
        self.add_class("logitscope-threshold")
        self.link(frame, state, name)
        self.rows = self._rows(rows)
        with self.hold_trait_notifications():
            self.mode, self.target_accuracy = mode, float(target_accuracy)
            self.error_cost, self.review_cost = float(error_cost), float(review_cost)
            self.interval, self.level = interval, float(level)
        for control, trait in (
            (self._mode_buttons, "mode"),
            (self._lower, "use_lower_bound"),
            (self._per_class, "per_class"),
            (self._interval, "interval"),
            (self._level, "level"),
            (self._y_kind, "y_kind"),
        ):
            widgets.link((control, "value"), (self, trait))
        for control, trait in (
            (self._target, "target_accuracy"),
            (self._error_cost, "error_cost"),
            (self._review_cost, "review_cost"),
        ):
            widgets.dlink((self, trait), (control, "value"))
            control.observe(self._on_number_entry(trait), "value")
        self.slider.observe(self._on_slider, "value")
        self.observe(self._on_rule_option, ["mode", "target_accuracy", "use_lower_bound", "error_cost", "review_cost"])
        self.observe(self._on_readout_option, ["interval", "level", "per_class"])
        self.observe(lambda c: self._draw(), "y_kind")
        self.observe(self._on_threshold, "threshold")
        self.state.observe(self._on_state_threshold, "threshold")
        if not frame.has_labels:
            self.note.value = "<i>Choosing a review threshold needs labels; this frame has none.</i>"
            return
        if self.state.threshold is not None and mode == "by hand":
            self.threshold = float(self.state.threshold)
        self._refresh(apply_rule=True)

    @traitlets.validate("level")
    def _valid_level(self, proposal: Any) -> float:
        level = float(check_parameter(proposal["value"], "level"))
        menu = getattr(self, "_level", None)
        if menu is not None and level not in [v for _, v in menu.options]:
            menu.options = _level_options(level)
        return level

    # ------------------------------------------------------------------ the rule and its finding

    @property
    def rule(self) -> ThresholdRule:
        """The threshold rule the controls describe ("by hand": a fixed threshold)."""
        common: dict[str, Any] = {"interval": self.interval, "level": self.level}
        if self.mode == "target accuracy":
            return ThresholdRule(
                "accuracy", target_accuracy=self.target_accuracy, use_lower_bound=self.use_lower_bound,
                per_class=self.per_class, **common,
            )  # fmt: skip
        if self.mode == "costs":
            return ThresholdRule("cost", error_cost=self.error_cost, review_cost=self.review_cost, **common)
        return ThresholdRule("fixed", threshold=min(max(self.threshold, 0.0), 1.0), **common)

    @property
    def choice(self) -> an.ThresholdChoice | None:
        """The chosen threshold's readouts (None without labels)."""
        return None if self.decision is None else self.decision.choice

    @property
    def curve(self) -> an.RiskCoverage | None:
        return None if self.decision is None else self.decision.curve

    def _rows(self, rows: Any) -> np.ndarray:
        return rows_or_all(rows, self.frame.n_samples, "a threshold picker")

    def set_rows(self, rows: Any) -> None:
        """Use other rows of the frame (None: all) for the curve and the rules."""
        self.rows = self._rows(rows)
        if self.frame.has_labels:
            self._refresh(apply_rule=True)

    def _refresh(self, apply_rule: bool = False) -> None:
        """Recompute the decision (the rule's threshold when asked) and every readout."""
        rows = None if self.rows.size == self.frame.n_samples else self.rows
        d = self.decision = threshold_decision(self.frame, self.rule, self.state.temperature, rows)
        t = d.threshold
        if apply_rule and self.mode != "by hand":
            with self.quietly():
                self.threshold = t if math.isfinite(t) else 1.0
        if self.state.threshold != (t if math.isfinite(t) else None):
            with self.quietly():
                self.state.threshold = t if math.isfinite(t) else None
        self._draw()

    # ------------------------------------------------------------------ drawing

    def _draw(self) -> None:
        d = self.decision
        if d is None:
            return
        acc_mode = self.y_kind == "accuracy"
        cx, cy_all = d.curve_points("accuracy" if acc_mode else "risk")
        x, y = np.r_[0.0, cx], np.r_[cy_all[0], cy_all]
        c = d.choice
        target = d.rule.target_accuracy if d.rule.kind == "accuracy" else None
        if acc_mode:
            y0 = max(0.0, math.floor((min(float(np.min(y)), target or 1.0) - 0.01) * 50) / 50)
            y1 = 1.0
        else:
            y0, y1 = 0.0, max(0.02, math.ceil((max(float(np.max(y)), 1 - (target or 1.0)) + 0.01) * 50) / 50)
        cy = c.accuracy if acc_mode else 1.0 - c.accuracy
        with self.figure.hold_sync():
            self._sy.min, self._sy.max = y0, y1
            self._ay.tick_values = np.asarray(nice_ticks(y0, y1, n=5))  # few round ticks: none under the title
            self._ay.label = "accuracy of accepted" if acc_mode else "risk (error rate) of accepted"
            self.figure.title = (
                "Accuracy of accepted predictions" if acc_mode else "Risk of accepted predictions"
            ) + " (brush to select samples)"
            with self.line.hold_sync():
                self.line.x, self.line.y = x, y
            with self.rule_line.hold_sync():
                self.rule_line.x, self.rule_line.y = [c.coverage, c.coverage], [y0, y1]
            self.rule_line.visible = c.n_accepted > 0
            with self.point.hold_sync():
                self.point.x, self.point.y = [c.coverage], [cy if math.isfinite(cy) else y1]
            self.point.visible = c.n_accepted > 0
            if target is not None:
                ty = target if acc_mode else 1.0 - target
                self.target_rule.x, self.target_rule.y = [0.0, 1.0], [ty, ty]
            self.target_rule.visible = target is not None
        with self.quietly():
            t = c.threshold
            self.slider.value = min(max(t, self.slider.min), self.slider.max) if math.isfinite(t) else self.slider.max
        self._target_box.layout.display = "" if self.mode == "target accuracy" else "none"
        self._cost_box.layout.display = "" if self.mode == "costs" else "none"
        self.readout.value = css("views") + self._readout_html()
        self.class_table.value = css("views") + self._class_table_html()
        self.on_selection(self.state.rows, self.owns_selection)

    def _readout_html(self) -> str:
        d = self.decision
        assert d is not None
        c = d.choice
        lo, hi = c.interval
        rows = [
            ("rule", html.escape(d.rule.describe() if self.mode != "by hand" else "set by hand")),
            ("threshold", _num(c.threshold if math.isfinite(c.threshold) else None)),
            ("coverage", _pct(c.coverage)),
            ("accepted", f"{c.n_accepted:,}"),
            ("sent for review", f"{c.n_review:,}"),
            ("accuracy of accepted", _num(c.accuracy)),
            (f"{_level_text(c.level)} interval ({INTERVAL_NAMES[c.interval_method]})", f"[{_num(lo)}, {_num(hi)}]"),
        ]
        if c.expected_cost is not None:
            rows.append(("expected cost per sample", _num(c.expected_cost)))
        if d.accept_all_cost is not None and d.review_all_cost is not None:
            rows.append(("cost: accept all / review all", f"{_num(d.accept_all_cost)} / {_num(d.review_all_cost)}"))
        if not c.feasible:
            rows.append(("note", "no threshold reaches the target: everything goes to review"))
        if d.own_combined is not None:
            cb = d.own_combined
            rows += [
                ("<b>per-class thresholds</b>", ""),
                ("coverage", _pct(cb.coverage)),
                ("sent for review", f"{cb.n_review:,}"),
                ("accuracy of accepted", _num(cb.accuracy)),
                (f"{_level_text(cb.level)} interval", f"[{_num(cb.interval[0])}, {_num(cb.interval[1])}]"),
            ]
        body = "".join(f"<tr><th>{k}</th><td>{v}</td></tr>" for k, v in rows)
        return f"<table class='ls-readout'>{body}</table>"

    def _class_table_html(self) -> str:
        d = self.decision
        assert d is not None
        head = ["predicted class", "predicted", "accepted", "to review", "coverage", "accuracy", "interval"]
        if d.own is not None:
            head += ["own threshold", "own coverage", "own accuracy"]
        rows = []
        for k, c in enumerate(d.by_class):
            if c is None:
                continue
            name = self.frame.classes[k]
            cells = [
                f"<td class='ls-name' title='{html.escape(name)}'>"
                f"{html.escape(shorten(name, 40, where='middle'))}</td>",
                *(
                    f"<td>{v}</td>"
                    for v in (
                        f"{c.n_total:,}",
                        f"{c.n_accepted:,}",
                        f"{c.n_review:,}",
                        _pct(c.coverage),
                        _num(c.accuracy),
                        f"[{_num(c.interval[0], 3)}, {_num(c.interval[1], 3)}]",
                    )
                ),
            ]
            if d.own is not None:
                o = d.own[k]
                own = (
                    ["", "", ""]
                    if o is None
                    else [_num(o.threshold if math.isfinite(o.threshold) else None), _pct(o.coverage), _num(o.accuracy)]
                )
                cells += [f"<td>{v}</td>" for v in own]
            rows.append("<tr>" + "".join(cells) + "</tr>")
        th = "".join(f"<th>{html.escape(h)}</th>" for h in head)
        return (
            "<details open><summary>By predicted class, at this threshold</summary>"
            f"<table class='ls-classes'><tr>{th}</tr>{''.join(rows)}</table></details>"
        )

    # ------------------------------------------------------------------ threshold in

    def set_threshold(self, threshold: float) -> None:
        """Set the threshold by hand (switches the mode to "by hand")."""
        t = float(threshold)
        if not math.isfinite(t) or not 0.0 <= t <= 1.0:
            raise ParameterError(f"threshold must lie in [0, 1], got {threshold!r}")
        with self.hold_trait_notifications():
            self.mode = "by hand"
            self.threshold = t

    def _on_number_entry(self, trait: str) -> Any:
        """A callback that copies a number box into ``trait`` when the rule accepts it, else says why."""

        def copy(change: Any) -> None:
            value = change["new"]
            try:
                check_parameter(value, trait)  # the declared range (parameters.RANGES), as the analysis layer
                if trait == "target_accuracy":
                    ThresholdRule("accuracy", target_accuracy=value)
                else:
                    costs = {"error_cost": self.error_cost, "review_cost": self.review_cost, trait: value}
                    ThresholdRule("cost", **costs)
            except LogitscopeError as exc:
                self.error.value = f"{css('views')}<span class='ls-error'>{html.escape(str(exc))}</span>"
                return
            self.error.value = ""
            setattr(self, trait, float(value))

        return copy

    def _on_slider(self, change: Any) -> None:
        if self.is_quiet or not self.frame.has_labels:
            return
        self.set_threshold(float(change["new"]))

    def _on_threshold(self, change: Any) -> None:
        if self.is_quiet or not self.frame.has_labels:
            return
        self._refresh()

    def _on_state_threshold(self, change: Any) -> None:
        if self.is_quiet or not self.frame.has_labels or change["new"] is None:
            return
        if self.choice is not None and change["new"] == self.choice.threshold:
            return
        self.set_threshold(float(change["new"]))

    def _on_rule_option(self, change: Any) -> None:
        if self.frame.has_labels and not self.is_quiet:
            self._refresh(apply_rule=True)

    def _on_readout_option(self, change: Any) -> None:
        if self.frame.has_labels:
            self._refresh()

    def on_temperature(self, temperature: float) -> None:
        if not self.frame.has_labels:
            return
        self.brushed = None
        self.brush.selected = None
        self._refresh(apply_rule=True)

    def on_frame(self) -> None:
        self.rows = self._rows(None)
        self.brushed = None
        self.brush.selected = None
        if self.frame.has_labels:
            self._refresh(apply_rule=True)

    # ------------------------------------------------------------------ selection out

    def select_confidence_range(self, low: float, high: float) -> np.ndarray:
        """Select the rows (of this view's rows) whose confidence lies in ``[low, high]``; return them."""
        lo, hi = sorted((float(low), float(high)))
        conf = self.frame.sample_scores(self.state.temperature).confidence[self.rows]
        self.brushed = (lo, hi)
        return self.select(self.rows[(conf >= lo) & (conf <= hi)])

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
        if b.brushing or self.curve is None or self.is_quiet:
            return
        sel = b.selected
        if sel is None or len(sel) < 2:
            if self.brushed is not None and self.owns_selection:
                self.brushed = None
                self.clear_selection()
            return
        self.select_coverage_range(float(sel[0]), float(sel[1]))

    # ------------------------------------------------------------------ selection in

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        rc = self.curve
        if rc is None:
            return
        if not mine and self.brushed is not None:
            self.brushed = None
            with self.quietly():
                self.brush.selected = None
        if rows.size == 0:
            self.selected_points.visible = False
            self.note.value = ""
            return
        sel = rows[np.isin(rows, self.rows, assume_unique=True)]
        conf_all = self.frame.sample_scores(self.state.temperature).confidence
        conf = conf_all[sel]
        t = self.choice.threshold if self.choice is not None else math.inf
        above = int(np.sum(conf >= t))
        where = "" if mine else self.selected_by()
        lo_hi = ""
        if self.brushed is not None and mine:
            lo_hi = f" (confidence {self.brushed[0]:.4f} – {self.brushed[1]:.4f})"
        self.note.value = (
            f"{sel.size:,} samples selected{where}{lo_hi}: {above:,} accepted, {sel.size - above:,} sent for review"
        )
        if mine or sel.size == 0:
            self.selected_points.visible = False
            return
        # where the selected samples sit on the curve: each at the coverage of its own confidence
        if sel.size > MAX_SELECTED_POINTS:
            sel = sel[np.linspace(0, sel.size - 1, MAX_SELECTED_POINTS).round().astype(np.int64)]
            conf = conf_all[sel]
        pos = np.clip(np.searchsorted(-rc.threshold, -conf, side="left"), 0, rc.threshold.size - 1)
        y = rc.accuracy[pos] if self.y_kind == "accuracy" else rc.risk[pos]
        with self.selected_points.hold_sync():
            self.selected_points.x, self.selected_points.y = rc.coverage[pos], y
            self.selected_points.visible = True


def _cost_box(description: str, value: float, name: str) -> widgets.FloatText:
    """A cost entry of the cost rule (any number of its range; the rule says when it is not), never clamped."""
    return widgets.FloatText(
        value=value, description=description, tooltip=f"in {RANGES[name].interval()}",
        style={"description_width": "initial"}, layout={"width": "auto"},
    )  # fmt: skip


def _level_text(level: float) -> str:
    """``0.95`` as ``"95%"``, ``0.975`` as ``"97.5%"``."""
    return f"{100 * level:.4g}%"


def _level_options(level: float) -> list[tuple[str, float]]:
    """The offered interval levels, with ``level`` among them (any level of the accepted range)."""
    values = sorted({*LEVELS, float(check_parameter(level, "level"))})
    return [(_level_text(v), v) for v in values]
