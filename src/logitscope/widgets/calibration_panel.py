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

Every number comes from the findings layer: the diagrams render
calibration summaries, the sweep sweep findings, the picker a threshold
decision and the held-out table a :class:`~logitscope.findings.HeldOutCheck`,
all for the panel's :meth:`CalibrationPanel.choices` (the shared temperature
and binning, the picker's rule, the split). The "write report" button hands
the same choices to :func:`logitscope.report.write_report`, so the report
shows the numbers the panel shows.
"""

from __future__ import annotations

import html
import math
import os
from typing import Any

import ipywidgets as widgets
import traitlets

from ..analysis.split import Split, random_split, split_by_values
from ..errors import LogitscopeError
from ..findings import Choices, HeldOutCheck, fitted_temperature, held_out_check
from ..frame import LogitFrame
from ..parameters import RANGES
from .base import LinkedView
from .reliability import ReliabilityDiagram
from .state import SharedState
from .style import css
from .sweep import TemperatureSweepView
from .threshold import ThresholdPicker

__all__ = ["SPLIT_MODES", "CalibrationPanel"]

SPLIT_MODES = ("no split", "random split", "by a column")
_MAX_VALUES = 200  # metadata columns with more distinct values are not offered for a split


def _head(text: str) -> widgets.HTML:
    return widgets.HTML(css("views") + f"<div class='ls-head'>{html.escape(text)}</div>")


class CalibrationPanel(LinkedView, widgets.VBox):
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
    >>> panel.held_out.fitted.temperature == panel.sweep.fitted.temperature
    True
    """

    kind = "calibration panel"
    split_mode = traitlets.Enum(list(SPLIT_MODES), default_value="no split", help="how rows are split")

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        report_path: str = "logitscope-report.html",
        **kwargs: Any,
    ) -> None:
        self.state = state = LinkedView.link(self, frame, state, name=None)
        self.split: Split | None = None
        self.held_out: HeldOutCheck | None = None
        self._all_rows_fit: Any = None
        self.last_report: str | None = None
        self.relabel_store: Any = None  # the dashboard hands over its relabel list for the report
        labelled = frame.has_labels

        self.diagram = ReliabilityDiagram(frame, state, title="All rows")
        self.held_diagram = ReliabilityDiagram(
            frame, state, title="Held-out part", name="reliability diagram (held out)", show_controls=False
        )
        # the held-out diagram joins the row only with a split (a hidden bqplot figure draws with a
        # negative size and fills the browser console with errors)
        self._diagrams = widgets.HBox([self.diagram], layout={"flex_flow": "row wrap"})
        self._diagrams.add_class("logitscope-diagrams")
        self.sweep = TemperatureSweepView(frame, state)
        self.picker = ThresholdPicker(frame, state, mode="target accuracy")
        self.held_numbers = widgets.HTML()

        # split controls
        self._split_mode = widgets.ToggleButtons(
            options=list(SPLIT_MODES),
            value="no split",
            style={"button_width": "112px"},
            tooltips=["judge on the rows fitted on", "seeded random split", "fit on rows with chosen values"],
            disabled=not labelled,
        )
        # bounds from the accepted range (an open interval: its ends moved in by one step); no typed readout,
        # so no value is ever clamped (use_random_split takes any fraction of the range from Python)
        f_lo, f_hi, f_step = RANGES["held_out_fraction"].control_bounds()
        self._fraction = widgets.FloatSlider(
            value=RANGES["held_out_fraction"].default,
            min=f_lo,
            max=f_hi,
            step=f_step,
            description="held out",
            readout=False,
            continuous_update=False,
            style={"description_width": "60px"},
            layout={"width": "220px"},
        )
        self._fraction_text = widgets.Label()
        self._fraction.observe(lambda c: self._show_fraction(), "value")
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
        self._random_box = widgets.HBox(
            [self._fraction, self._fraction_text, self._seed, self._stratify], layout={"align_items": "center"}
        )
        self._show_fraction()
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
        widgets.VBox.__init__(self, children=children, **kwargs)
        self.add_class("logitscope-calibration")
        widgets.link((self._split_mode, "value"), (self, "split_mode"))
        self.observe(self._on_split_controls, "split_mode")
        for control in (self._fraction, self._seed, self._stratify, self._values):
            control.observe(self._on_split_controls, "value")
        self._column.observe(self._on_column, "value")
        self.state.observe(self._on_change, ["temperature", "threshold", "binning"])
        self.picker.observe(self._on_change, ["threshold", "mode", "interval", "level", "per_class"])
        self._on_column()
        self._show_split_controls()

    # ------------------------------------------------------------------ split

    def _show_fraction(self) -> None:
        self._fraction_text.value = f"{self._fraction.value:.0%}"

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
        if self.is_quiet:
            return
        self._show_split_controls()
        try:
            if self.split_mode == "no split":
                self.set_split(None)
            elif self.split_mode == "random split":
                self.use_random_split(self._fraction.value, self._seed.value, self._stratify.value)
            elif self._column.value is not None and self._values.value:
                self.use_column_split(self._column.value, list(self._values.value))
        except LogitscopeError as exc:
            self.split_note.value = f"{css('views')}<span class='ls-error'>{html.escape(str(exc))}</span>"

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
                f"{css('views')}<span class='ls-note'>{html.escape(split.description)}: "
                f"{len(split.fit):,} rows to fit, "
                f"{len(split.held_out):,} held out; T fitted on the fit part: {fitted:.4f} "
                "(press “use fitted T” to apply it).</span>"
            )
        self._on_change()

    # ------------------------------------------------------------------ held-out check

    def choices(self) -> Choices:
        """The panel's current choices: shared temperature and binning, the picker's rule, the split."""
        rule = self.picker.rule if self.frame.has_labels else None
        return Choices(
            temperature=self.state.temperature,
            temperature_how=self._temperature_how(),
            binning=self.state.binning,
            rule=rule,
            split=self.split,
        )

    def _temperature_how(self) -> str:
        t = self.state.temperature
        fitted = self.sweep.fitted
        if fitted is not None and math.isclose(t, fitted.temperature, rel_tol=1e-9):
            part = "all labelled rows" if self.split is None else "the fit part of the split"
            return f"fitted: minimum NLL on {part}"
        if math.isclose(t, self.frame.temperature, rel_tol=1e-12):
            return "as given"
        if self.frame.has_labels and self.split is not None:
            if self._all_rows_fit is None:
                self._all_rows_fit = fitted_temperature(self.frame)
            if math.isclose(t, self._all_rows_fit.temperature, rel_tol=1e-9):
                return "set in the panel, equal to the temperature fitted on all labelled rows"
        return "set in the panel"

    def _on_change(self, change: Any = None) -> None:
        if self.split is None or not self.frame.has_labels:
            self.held_out = None
            self.held_numbers.value = ""
            return
        c = self.choices()
        h = self.held_out = held_out_check(self.frame, self.split, c.temperature, c.rule, c.binning)
        head = "".join(f"<th>{html.escape(label)}, T = {t:.4g}</th>" for _, t, label in h.columns)
        body = "".join(
            f"<tr><th>{name} ({part_name})</th>"
            + "".join(f"<td>{getattr(part[key], metric):.4f}</td>" for key, _, _ in h.columns)
            + "</tr>"
            for part, part_name in ((h.fit, "fit part"), (h.held, "held out"))
            for metric, name in (("nll", "NLL"), ("ece", "ECE"), ("brier", "Brier"))
        )
        text = ""
        if h.judged_on_held is not None and h.decision_on_fit is not None:
            j = h.judged_on_held
            lo, hi = j.interval
            acc = "n/a" if not math.isfinite(j.accuracy) else f"{j.accuracy:.4f}"
            thr = h.decision_on_fit.threshold
            text = (
                f"<p class='ls-note'>The threshold {thr:.4f} chosen on the fit part accepts "
                f"{100 * j.coverage:.2f}% of the held-out rows with accuracy {acc} "
                f"[{lo:.4f}, {hi:.4f}] ({j.level:.0%} {j.interval_method}); {j.n_review:,} go to review.</p>"
            )
        self.held_numbers.value = (
            css("views") + f"<table class='ls-held'><thead><tr><th>{html.escape(c.binning.describe())}</th>{head}"
            f"</tr></thead>{body}</table>{text}"
        )

    # ------------------------------------------------------------------ report

    def report_options(self) -> dict[str, Any]:
        """The options :func:`logitscope.report.write_report` gets for the current choices."""
        c = self.choices()
        opts: dict[str, Any] = {"choices": c}
        if self.relabel_store is not None:
            opts["relabel"] = self.relabel_store
        return opts

    def write_report(self, path: str | os.PathLike[str] | None = None) -> str:
        """Write the report for the current choices to ``path`` (default: the path box); return the path."""
        from ..report import write_report

        target = os.fspath(path) if path is not None else self.report_path.value.strip()
        if not target:
            self.report_status.value = f"{css('views')}<span class='ls-error'>Give a file name for the report.</span>"
            raise LogitscopeError("no report path given")
        try:
            write_report(self.frame, target, **self.report_options())
        except (LogitscopeError, OSError) as exc:
            self.report_status.value = f"{css('views')}<span class='ls-error'>{html.escape(str(exc))}</span>"
            raise
        self.last_report = os.path.abspath(target)
        size = os.path.getsize(target)
        self.report_status.value = (
            f"{css('views')}<span class='ls-ok'>Wrote {html.escape(self.last_report)} ({size / 1024:.0f} kB) "
            f"at T = {self.state.temperature:.4g}.</span>"
        )
        return self.last_report

    # ------------------------------------------------------------------ hooks of the linked view

    def on_frame(self) -> None:
        labelled = self.frame.has_labels
        self._split_mode.disabled = not labelled
        with self.quietly():
            self.split_mode = "no split"
        self._show_split_controls()
        columns = [c for c in self.frame.meta.columns if 1 < self.frame.meta[c].nunique(dropna=False) <= _MAX_VALUES]
        self._columns = {str(c): c for c in columns}
        self._column.options = [str(c) for c in columns]
        self._on_column()
        self.split = None
        self._all_rows_fit = None
        self.split_note.value = ""
        self._on_change()
