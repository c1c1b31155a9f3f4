"""Linked views over a LogitFrame; each observes one :class:`SharedState`."""

from .state import SharedState, as_rows

__all__ = ["SharedState", "as_rows"]
