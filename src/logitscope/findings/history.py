"""The epoch finding: one record of set-level numbers per frame a dashboard has shown.

While a model trains, a dashboard is given a new frame each epoch
(:meth:`logitscope.widgets.Dashboard.update`). Each frame becomes an
:class:`EpochRecord` (accuracy, NLL and ECE at the frame's own temperature,
and the temperature fitted on it) so the history can be plotted and read as
a table.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING, Any

from .calibration import calibration_summary, prediction_summary
from .choices import Binning
from .sweep import fitted_temperature

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["EPOCH_COLUMNS", "EpochRecord", "epoch_record", "record_time"]

#: Columns of :meth:`Dashboard.history`, in order.
EPOCH_COLUMNS = (
    "update",
    "label",
    "n_samples",
    "n_labelled",
    "accuracy",
    "nll",
    "ece",
    "fitted_temperature",
    "mean_confidence",
    "shown_at",
)


@dataclass(frozen=True)
class EpochRecord:
    """Set-level numbers of one frame shown: ``None`` where they need labels and the frame has none."""

    update: int
    label: str
    n_samples: int
    n_labelled: int
    accuracy: float | None
    nll: float | None
    ece: float | None
    fitted_temperature: float | None
    mean_confidence: float
    shown_at: str

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def record_time() -> str:
    """The local time now, as a record's ``shown_at`` gives it (ISO 8601, to the second).

    Examples
    --------
    >>> len(record_time()) >= len("2026-01-01T00:00:00+00:00")
    True
    """
    return _dt.datetime.now().astimezone().isoformat(timespec="seconds")


def epoch_record(
    frame: LogitFrame,
    update: int,
    label: str | None = None,
    binning: Binning | None = None,
    *,
    shown_at: str | None = None,
) -> EpochRecord:
    """The record of ``frame`` as update number ``update`` (at the frame's own temperature).

    ``shown_at`` is when the frame was shown (ISO 8601; default: now), for a record made later.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> r = epoch_record(LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0]]), labels=[0, 0]), 0, "epoch 1")
    >>> r.label, r.accuracy, r.n_samples
    ('epoch 1', 0.5, 2)
    """
    when = record_time() if shown_at is None else str(shown_at)
    name = f"update {update}" if label is None else str(label)
    if not frame.has_labels:
        p = prediction_summary(frame)
        return EpochRecord(update, name, frame.n_samples, 0, None, None, None, None, p.mean_confidence, when)
    c = calibration_summary(frame, None, None, binning)
    fit = fitted_temperature(frame)
    return EpochRecord(
        update, name, frame.n_samples, c.n, c.accuracy, c.nll, c.ece, fit.temperature, c.mean_confidence, when
    )
