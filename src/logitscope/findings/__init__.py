"""The findings layer: results computed once, which every view, the report and the CLI render.

Between the analysis layer (pure functions of arrays) and the presentation
(widgets, the HTML report, the CLI) sit *findings*: immutable results
computed from a frame, a temperature, some rows and one shared binning
setting. A view or the report never assembles a metric itself; it renders a
finding, so two renderings made for the same :class:`Choices` show the same
numbers.

- :func:`calibration_summary` -> :class:`CalibrationSummary` (accuracy, top-k,
  NLL, Brier, ECE, MCE and the reliability bins, AURC);
  :func:`prediction_summary` -> :class:`PredictionSummary` (needs no labels);
- :func:`sweep_finding` -> :class:`SweepFinding` (fitted T, NLL / ECE / Brier over T);
- :func:`threshold_decision` -> :class:`ThresholdDecision` (rule, threshold,
  coverage, accuracy with interval, per-class table, the caution);
- :func:`held_out_check` -> :class:`HeldOutCheck`;
- :func:`confusion_summary` -> :class:`ConfusionSummary`;
- :func:`suspect_labels` -> :class:`SuspectLabels`;
- :func:`confidence_histogram` -> :class:`ConfidenceHistogram`;
- :func:`resolve_choices` and :func:`collect` -> :class:`Findings`, all of a report's findings.
"""

from .calibration import (
    CalibrationSummary,
    PredictionSummary,
    SelectionCount,
    bin_range_label,
    calibration_summary,
    count_selection,
    prediction_summary,
)
from .choices import INTERVAL_NAMES, STRATEGY_NAMES, Binning, Choices, ThresholdRule
from .collect import Findings, TemperatureContext, collect, resolve_choices, rule_from_options, temperature_context
from .confusion import ConfusionSummary, confusion_summary
from .held_out import HeldOutCheck, held_out_check
from .histogram import ConfidenceHistogram, confidence_histogram
from .history import EPOCH_COLUMNS, EpochRecord, epoch_record
from .suspects import SuspectLabels, suspect_labels
from .sweep import SweepFinding, fitted_temperature, sweep_finding, sweep_grid
from .threshold import MAX_CURVE_POINTS, ThresholdDecision, thin_indices, threshold_decision

__all__ = [
    "EPOCH_COLUMNS",
    "INTERVAL_NAMES",
    "MAX_CURVE_POINTS",
    "STRATEGY_NAMES",
    "Binning",
    "CalibrationSummary",
    "Choices",
    "ConfidenceHistogram",
    "ConfusionSummary",
    "EpochRecord",
    "Findings",
    "HeldOutCheck",
    "PredictionSummary",
    "SelectionCount",
    "SuspectLabels",
    "SweepFinding",
    "TemperatureContext",
    "ThresholdDecision",
    "ThresholdRule",
    "bin_range_label",
    "calibration_summary",
    "collect",
    "confidence_histogram",
    "confusion_summary",
    "count_selection",
    "epoch_record",
    "fitted_temperature",
    "held_out_check",
    "prediction_summary",
    "resolve_choices",
    "rule_from_options",
    "suspect_labels",
    "sweep_finding",
    "sweep_grid",
    "temperature_context",
    "thin_indices",
    "threshold_decision",
]
