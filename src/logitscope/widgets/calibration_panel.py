"""Calibration and decision panel: reliability diagram, temperature sweep, threshold picker, report.

One panel for the second tab of the dashboard. Its parts share one
:class:`SharedState` with every other view: dragging the temperature in the
sweep redraws the diagram and the threshold readouts (and the views of the
first tab); clicking a bin or brushing the curve selects samples everywhere.

A temperature or threshold judged on the rows it was fitted on looks better
than it is, so the panel offers a split (a seeded random split or one by a
metadata column, from :mod:`logitscope.analysis.split`). With a split the
sweep fits T on the fit part and draws the held-out part's curves dashed,
two diagrams show the fit part and the held-out part, and the threshold
chosen on the fit part is judged on the held-out part.

The "write report" button writes :func:`logitscope.report.write_report` for
the current choices: the shared temperature, the threshold rule of the
picker, the interval method, the bins and the split.
"""

from __future__ import annotations

import html
import math
import os
from typing import Any, cast

import ipywidgets as widgets
import traitlets

from .. import analysis as an
from ..analysis.calibration import Strategy
from ..analysis.selective import IntervalMethod
from ..analysis.split import Split, random_split, split_by_values
from ..errors import LogitscopeError
from ..frame import LogitFrame
from .reliability import _TABLE_CSS, ReliabilityDiagram, calibration_numbers
from .scatter import view_state
from .state import SharedState
from .sweep import TemperatureSweepView
from .threshold import ThresholdPicker

__all__ = ["SPLIT_MODES", "CalibrationPanel"]

SPLIT_MODES = ("no split", "random split", "by a column")
_MAX_VALUES = 200  # metadata columns with more distinct values are not offered for a split

_HEAD_CSS = (
    "<style>.logitscope-head{font-size:14px;font-weight:600;margin:10px 0 2px;color:#1f2933;"
    "border-bottom:1px solid #e3e7ec;padding-bottom:3px}"
    ".logitscope-held{font-size:12.5px;border-collapse:collapse}"
    ".logitscope-held th{font-weight:normal;color:#5f6b7a;text-align:left;padding:2px 12px 2px 0}"
    ".logitscope-held td{text-align:right;font-variant-numeric:tabular-nums;padding:2px 10px 2px 0}"
    ".logitscope-held thead th{font-weight:600;color:#334}</style>"
)


def _head(text: str) -> widgets.HTML:
    return widgets.HTML(_HEAD_CSS + f"<div class='logitscope-head'>{html.escape(text)}</div>")


class CalibrationPanel(widgets.VBox):
    """Reliability diagram, temperature sweep and threshold picker over one frame, with a split and a report.

    Parameters
    ----------
    frame : LogitFrame
        The data.
    state : SharedState, optional
        Shared state; a new one is made when None.
    report_path : str, default "logitscope-report.html"
        Starting text of the report path box.

    Attributes
    ----------
    diagram, held_diagram : ReliabilityDiagram
        Diagram of the fit part (all rows without a split) and of the held-out part (hidden without a split).
    sweep : TemperatureSweepView
    picker : ThresholdPicker
    split : Split or None
        The current split.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> rng = np.random.default_rng(0)
    >>> z = rng.normal(size=(40, 3)) * 3
    >>> frame = LogitFrame(z, labels=z.argmax(axis=1))
    >>> panel = CalibrationPanel(frame)
    >>> panel.use_random_split(0.5, seed=1)
    >>> len(panel.split.fit) + len(panel.split.held_out)
    40
    >>> panel.sweep.use_fitted() == panel.state.temperature
    True
    """

    split_mode = traitlets.Enum(list(SPLIT_MODES), default_value="no split", help="how rows are split")

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        report_path: str = "logitscope-report.html",
        **kwargs: Any,
    ) -> None:
        self.frame = frame
        self.state = view_state(frame, state)
        self.split: Split | None = None
        self.last_report: str | None = None
        labelled = frame.has_labels

        self.diagram = ReliabilityDiagram(frame, self.state, title="All rows", name="reliability")
        self.held_diagram = ReliabilityDiagram(
            frame, self.state, title="Held-out part", name="reliability (held out)", show_controls=False
        )
        # the held-out diagram joins the row only with a split (a hidden bqplot figure draws with a
        # negative size and fills the browser console with errors)
        self._diagrams = widgets.HBox([self.diagram], layout={"flex_flow": "row wrap"})
        self._diagrams.add_class("logitscope-diagrams")
        self.sweep = TemperatureSweepView(frame, self.state, name="temperature sweep")
        self.picker = ThresholdPicker(frame, self.state, mode="target accuracy", name="threshold")
        self.diagram.observe(self._mirror_bins, ["n_bins", "strategy"])
        self.held_numbers = widgets.HTML()

        # split controls
        self._split_mode = widgets.ToggleButtons(
            options=list(SPLIT_MODES),
            value="no split",
            style={"button_width": "112px"},
            tooltips=["judge on the rows fitted on", "seeded random split", "fit on rows with chosen values"],
            disabled=not labelled,
        )
        self._fraction = widgets.FloatSlider(
            value=0.5,
            min=0.1,
            max=0.9,
            step=0.05,
            description="held out",
            readout_format=".0%",
            continuous_update=False,
            style={"description_width": "60px"},
            layout={"width": "260px"},
        )
        self._seed = widgets.IntText(
            value=0, description="seed", style={"description_width": "34px"}, layout={"width": "120px"}
        )
        self._stratify = widgets.Checkbox(value=True, description="keep class shares", indent=False)
        columns = [c for c in frame.meta.columns if 1 < frame.meta[c].nunique(dropna=False) <= _MAX_VALUES]
        self._column = widgets.Dropdown(
            options=[str(c) for c in columns],
            value=str(columns[0]) if columns else None,
            description="column",
            style={"description_width": "50px"},
            layout={"width": "240px"},
        )
        self._columns = {str(c): c for c in columns}
        self._values = widgets.SelectMultiple(
            options=[], description="fit on", rows=4, style={"description_width": "50px"}, layout={"width": "260px"}
        )
        self._random_box = widgets.HBox([self._fraction, self._seed, self._stratify], layout={"align_items": "center"})
        self._column_box = widgets.HBox([self._column, self._values])
        self.split_note = widgets.HTML()
        self._split_box = widgets.VBox([self._split_mode, self._random_box, self._column_box, self.split_note])

        # report controls
        self.report_path = widgets.Text(
            value=report_path,
            description="report file",
            style={"description_width": "72px"},
            layout={"width": "420px"},
        )
        self.report_button = widgets.Button(
            description="write report",
            icon="file",
            button_style="primary",
            layout={"width": "130px"},
            tooltip="write a self-contained HTML report for the current temperature, threshold rule and split",
        )
        self.report_status = widgets.HTML()
        self.report_button.on_click(lambda _: self.write_report())

        children: list[widgets.Widget] = []
        if not labelled:
            children.append(
                widgets.HTML(
                    "<p><i>Calibration, the temperature fit and the review threshold need labels; this frame has "
                    "none. The report still lists what needs no labels.</i></p>"
                )
            )
        else:
            children += [
                _head("Judge on held-out rows"),
                self._split_box,
                _head("Reliability"),
                self._diagrams,
                self.held_numbers,
                _head("Temperature"),
                self.sweep,
                _head("Review threshold"),
                self.picker,
            ]
        children += [
            _head("Report for teammates"),
            widgets.HBox([self.report_path, self.report_button], layout={"align_items": "center"}),
            self.report_status,
        ]
        super().__init__(children=children, **kwargs)
        self.add_class("logitscope-calibration")
        widgets.link((self._split_mode, "value"), (self, "split_mode"))
        self.observe(self._on_split_controls, "split_mode")
        for control in (self._fraction, self._seed, self._stratify, self._values):
            control.observe(self._on_split_controls, "value")
        self._column.observe(self._on_column, "value")
        self.state.observe(self._on_change, ["temperature", "threshold"])
        self.picker.observe(self._on_change, ["threshold", "mode", "interval", "level"])
        self._on_column()
        self._show_split_controls()

    # ------------------------------------------------------------------ split

    def _show_split_controls(self) -> None:
        self._random_box.layout.display = "" if self.split_mode == "random split" else "none"
        self._column_box.layout.display = "" if self.split_mode == "by a column" else "none"
        if not self._columns:
            self._split_mode.tooltips = ["", "", "no metadata column with 2 to 200 values"]

    def _on_column(self, change: Any = None) -> None:
        name = self._column.value
        if name is None:
            self._values.options = []
            return
        col = self.frame.meta[self._columns[name]]
        values = sorted(col.dropna().unique().tolist(), key=str)
        self._values.options = [(str(v), v) for v in values]
        self._values.value = (values[0],) if values else ()

    def _on_split_controls(self, change: Any = None) -> None:
        self._show_split_controls()
        try:
            if self.split_mode == "no split":
                self.set_split(None)
            elif self.split_mode == "random split":
                self.use_random_split(self._fraction.value, self._seed.value, self._stratify.value)
            elif self._column.value is not None and self._values.value:
                self.use_column_split(self._column.value, list(self._values.value))
        except LogitscopeError as exc:
            self.split_note.value = f"<span style='color:#c23b3b'>{html.escape(str(exc))}</span>"

    def use_random_split(self, held_out_fraction: float = 0.5, seed: int = 0, stratify: bool = True) -> None:
        """Split the rows at random (seeded), keeping class shares when ``stratify``."""
        labels = self.frame.labels if stratify else None
        self.set_split(random_split(self.frame.n_samples, held_out_fraction, seed=int(seed), stratify=labels))

    def use_column_split(self, column: str, fit_values: Any) -> None:
        """Fit on the rows whose metadata ``column`` holds one of ``fit_values``; hold out the rest."""
        col = self._columns.get(str(column), column)
        if col not in self.frame.meta.columns:
            raise LogitscopeError(f"no metadata column {column!r}; the frame has {list(self.frame.meta.columns)}")
        self.set_split(split_by_values(self.frame.meta[col].to_numpy(), fit_values))

    def set_split(self, split: Split | None) -> None:
        """Use ``split`` (None: judge on all rows): the sweep and the picker fit on its fit part."""
        if split is not None and (len(split.fit) == 0 or len(split.held_out) == 0):
            raise LogitscopeError("both parts of a split need at least one row")
        self.split = split
        if split is None:
            self.diagram.set_rows(None, title="All rows")
            self._diagrams.children = [self.diagram]
            self.sweep.set_rows(None)
            self.picker.set_rows(None)
            self.split_note.value = ""
        else:
            self.diagram.set_rows(split.fit, title=f"Fit part ({len(split.fit):,} rows)")
            self.held_diagram.set_rows(split.held_out, title=f"Held-out part ({len(split.held_out):,} rows)")
            self._diagrams.children = [self.diagram, self.held_diagram]
            self.sweep.set_rows(split.fit, split.held_out)
            self.picker.set_rows(split.fit)
            fitted = self.sweep.fitted.temperature if self.sweep.fitted else float("nan")
            self.split_note.value = (
                f"<span style='color:#5f6b7a'>{html.escape(split.description)}: {len(split.fit):,} rows to fit, "
                f"{len(split.held_out):,} held out; T fitted on the fit part: {fitted:.4f} "
                "(press “use fitted T” to apply it).</span>"
            )
        self._on_change()

    def _mirror_bins(self, change: Any) -> None:
        self.held_diagram.n_bins, self.held_diagram.strategy = self.diagram.n_bins, self.diagram.strategy

    # ------------------------------------------------------------------ held-out numbers

    def held_out_numbers(self) -> dict[str, Any] | None:
        """Calibration numbers and the threshold's readouts on the held-out part (None without a split)."""
        if self.split is None or not self.frame.has_labels or self.picker.choice is None:
            return None
        held = self.split.held_out
        t = self.state.temperature
        s = self.frame.sample_scores(t)
        assert s.correct is not None
        strategy = cast(Strategy, self.diagram.strategy)  # a traitlets.Enum of the two strategies
        bins = an.reliability_bins(s.confidence[held], s.correct[held], self.diagram.n_bins, strategy)
        out: dict[str, Any] = {"calibration": calibration_numbers(self.frame, held, t, bins)}
        base = self.frame.sample_scores(self.frame.temperature)
        assert base.correct is not None
        b0 = an.reliability_bins(base.confidence[held], base.correct[held], self.diagram.n_bins, strategy)
        out["calibration_as_given"] = calibration_numbers(self.frame, held, self.frame.temperature, b0)
        thr = self.picker.choice.threshold
        out["threshold"] = an.evaluate_threshold(
            s.confidence[held], s.correct[held], thr, self.picker.level, cast(IntervalMethod, self.picker.interval)
        )
        return out

    def _on_change(self, change: Any = None) -> None:
        nums = self.held_out_numbers()
        if nums is None:
            self.held_numbers.value = ""
            return
        a, b, c = nums["calibration_as_given"], nums["calibration"], nums["threshold"]
        lo, hi = c.interval
        method = "Wilson" if c.interval_method == "wilson" else "Clopper-Pearson"
        acc = "n/a" if not math.isfinite(c.accuracy) else f"{c.accuracy:.4f}"
        self.held_numbers.value = (
            _HEAD_CSS + _TABLE_CSS + "<table class='logitscope-held'><thead><tr><th>held-out part</th>"
            f"<th>T = {a['temperature']:.4g} (as given)</th><th>T = {b['temperature']:.4g} (current)</th></tr></thead>"
            + "".join(
                f"<tr><th>{name}</th><td>{a[key]:.4f}</td><td>{b[key]:.4f}</td></tr>"
                for key, name in (("nll", "NLL"), ("ece", "ECE"), ("brier", "Brier"))
            )
            + "</table>"
            f"<p style='font-size:12.5px'>The threshold {c.threshold:.4f} chosen on the fit part accepts "
            f"{100 * c.coverage:.2f}% of the held-out rows with accuracy {acc} "
            f"[{lo:.4f}, {hi:.4f}] ({c.level:.0%} {method}); {c.n_review:,} go to review.</p>"
        )

    # ------------------------------------------------------------------ report

    def report_options(self) -> dict[str, Any]:
        """The options :func:`logitscope.report.write_report` gets for the current choices."""
        opts: dict[str, Any] = {"temperature": self.state.temperature}
        if not self.frame.has_labels:
            return opts
        p = self.picker
        if p.mode == "target accuracy":
            opts["target_accuracy"] = p.target_accuracy
            opts["use_lower_bound"] = p.use_lower_bound
        elif p.mode == "costs":
            opts["costs"] = (p.error_cost, p.review_cost)
        elif p.choice is not None and math.isfinite(p.choice.threshold):
            opts["threshold"] = min(max(p.choice.threshold, 0.0), 1.0)
        opts.update(interval=p.interval, level=p.level, n_bins=self.diagram.n_bins, strategy=self.diagram.strategy)
        if self.split is not None:
            opts["split"] = self.split
        fitted = self.sweep.fitted
        if fitted is not None and math.isclose(self.state.temperature, fitted.temperature, rel_tol=1e-9):
            part = "all labelled rows" if self.split is None else "the fit part of the split"
            opts["temperature_how"] = f"fitted: minimum NLL on {part}"
        return opts

    def write_report(self, path: str | os.PathLike[str] | None = None) -> str:
        """Write the report for the current choices to ``path`` (default: the path box); return the path."""
        from ..report import write_report

        target = os.fspath(path) if path is not None else self.report_path.value.strip()
        if not target:
            self.report_status.value = "<span style='color:#c23b3b'>Give a file name for the report.</span>"
            raise LogitscopeError("no report path given")
        try:
            write_report(self.frame, target, **self.report_options())
        except (LogitscopeError, OSError) as exc:
            self.report_status.value = f"<span style='color:#c23b3b'>{html.escape(str(exc))}</span>"
            raise
        self.last_report = os.path.abspath(target)
        size = os.path.getsize(target)
        self.report_status.value = (
            f"<span style='color:#2f855a'>Wrote {html.escape(self.last_report)} ({size / 1024:.0f} kB) "
            f"at T = {self.state.temperature:.4g}.</span>"
        )
        return self.last_report
