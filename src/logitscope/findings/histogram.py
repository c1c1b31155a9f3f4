"""The confidence histogram finding: how many predictions fall at each confidence, right and wrong apart."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from .. import analysis as an
from ..errors import ParameterError
from .calibration import _rows, _take

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["ConfidenceHistogram", "confidence_histogram"]


@dataclass(frozen=True)
class ConfidenceHistogram:
    """Counts of predictions per confidence bin, ``n_bins`` equal-width bins from ``1 / K`` to 1.

    Bins are ``[edges[b], edges[b + 1])``, the last one closed (numpy's
    histogram rule). A confidence is never below ``1 / K``; one that rounding
    puts a hair below it counts in the first bin, so the counts sum to ``n``.
    ``right`` and ``wrong`` count the labelled rows when the frame has labels (None otherwise); in a partly
    labelled batch ``total - right - wrong`` are the unlabelled rows.
    """

    temperature: float
    edges: np.ndarray = field(repr=False)
    total: np.ndarray = field(repr=False)
    right: np.ndarray | None = field(default=None, repr=False)
    wrong: np.ndarray | None = field(default=None, repr=False)
    n: int = 0

    @property
    def labelled(self) -> bool:
        return self.right is not None


def confidence_histogram(
    frame: LogitFrame, temperature: float | None = None, rows: Any = None, n_bins: int = 20
) -> ConfidenceHistogram:
    """Histogram of the confidence of ``rows`` (default all) at ``temperature`` (default the frame's).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> z = np.log([[0.95, 0.05], [0.65, 0.35], [0.55, 0.45], [0.15, 0.85]])
    >>> h = confidence_histogram(LogitFrame(z, labels=[0, 1, 0, 1]), n_bins=5)
    >>> h.edges.round(2).tolist(), h.right.tolist(), h.wrong.tolist()
    ([0.5, 0.6, 0.7, 0.8, 0.9, 1.0], [1, 0, 0, 1, 1], [0, 1, 0, 0, 0])
    """
    if isinstance(n_bins, bool) or not isinstance(n_bins, int | np.integer) or not 1 <= int(n_bins) <= 1000:
        raise ParameterError(f"n_bins must be an integer from 1 to 1000, got {n_bins!r}")
    t = frame.temperature if temperature is None else an.check_temperature(temperature)
    r = _rows(frame, rows)
    s = frame.sample_scores(t)
    lo = 1.0 / frame.n_classes if frame.n_classes > 1 else 0.0
    edges = np.linspace(lo, 1.0, int(n_bins) + 1)
    conf = np.clip(_take(s.confidence, r), lo, 1.0)
    total = np.histogram(conf, edges)[0]
    right = wrong = None
    if s.correct is not None:
        ok = _take(s.correct, r)
        known = _take(frame.labelled, r)
        right = np.histogram(conf[ok], edges)[0]
        wrong = np.histogram(conf[known & ~ok], edges)[0]  # unlabelled rows are neither right nor wrong
    return ConfidenceHistogram(temperature=t, edges=edges, total=total, right=right, wrong=wrong, n=int(conf.size))
