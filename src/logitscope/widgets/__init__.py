"""Linked views over a LogitFrame; each observes one :class:`SharedState`."""

from .calibration_panel import CalibrationPanel
from .card import SampleCard
from .class_mix import ClassMixView
from .comparison import CheckpointComparisonView, ComparisonPanel
from .confusion import ConfusionHeatmap
from .dashboard import Dashboard
from .dial import TemperatureDial
from .forgetting import ForgettingList
from .gallery import SampleGallery
from .histogram import ConfidenceHistogram
from .pick_table import PickTable
from .relabel import DoubtfulLabelPicker, RelabelQueue
from .reliability import ReliabilityDiagram
from .scatter import ScoreScatter
from .state import SharedState, as_rows
from .sweep import TemperatureSweepView
from .threshold import ThresholdPicker

__all__ = [
    "CalibrationPanel",
    "CheckpointComparisonView",
    "ClassMixView",
    "ComparisonPanel",
    "ConfidenceHistogram",
    "ConfusionHeatmap",
    "Dashboard",
    "DoubtfulLabelPicker",
    "ForgettingList",
    "PickTable",
    "RelabelQueue",
    "ReliabilityDiagram",
    "SampleCard",
    "SampleGallery",
    "ScoreScatter",
    "SharedState",
    "TemperatureDial",
    "TemperatureSweepView",
    "ThresholdPicker",
    "as_rows",
]
