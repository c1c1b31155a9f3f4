"""Linked views over a LogitFrame; each observes one :class:`SharedState`."""

from .card import SampleCard
from .confusion import ConfusionHeatmap
from .dashboard import Dashboard
from .dial import TemperatureDial
from .gallery import SampleGallery
from .histogram import ConfidenceHistogram
from .relabel import LabelIssuePicker, RelabelQueue
from .scatter import ScoreScatter
from .state import SharedState, as_rows

__all__ = [
    "ConfidenceHistogram",
    "ConfusionHeatmap",
    "Dashboard",
    "LabelIssuePicker",
    "RelabelQueue",
    "SampleCard",
    "SampleGallery",
    "ScoreScatter",
    "SharedState",
    "TemperatureDial",
    "as_rows",
]
