"""Linked views over a LogitFrame; each observes one :class:`SharedState`."""

from .card import SampleCard
from .gallery import SampleGallery
from .relabel import LabelIssuePicker, RelabelQueue
from .state import SharedState, as_rows

__all__ = ["LabelIssuePicker", "RelabelQueue", "SampleCard", "SampleGallery", "SharedState", "as_rows"]
