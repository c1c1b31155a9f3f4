"""The confusion finding: confusion matrix, top-k confusion and the largest confusions."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from .. import analysis as an
from .calibration import _label_rows, _take

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["ConfusionSummary", "confusion_summary"]


@dataclass(frozen=True)
class ConfusionSummary:
    """Counts of (true, predicted) classes, and the largest off-diagonal cells.

    ``matrix[i, j]`` counts samples of true class ``i`` predicted as ``j``
    (ties in the logits go to the lowest class index, as everywhere).
    ``top_k_matrix`` counts class ``j`` among the ``k`` largest logits of
    samples of class ``i`` (equal to ``matrix`` for ``k = 1``). ``pairs`` are
    the largest off-diagonal cells of ``top_k_matrix``, largest first, with
    their share of the true class.
    """

    temperature: float
    k: int
    matrix: np.ndarray = field(repr=False)
    top_k_matrix: np.ndarray = field(repr=False)
    class_counts: np.ndarray = field(repr=False)
    pairs: tuple[an.ConfusedPair, ...]
    n: int

    @property
    def n_wrong(self) -> int:
        return int(self.n - np.trace(self.matrix))

    def row_shares(self) -> np.ndarray:
        """``matrix`` divided by its row sums (rows of absent classes stay 0)."""
        return an.normalize_rows(self.matrix)

    def pairs_table(self, classes: tuple[str, ...]) -> list[dict[str, Any]]:
        """The pairs as records with class names."""
        return [
            {"true": classes[p.true], "predicted": classes[p.other], "count": p.count, "share": p.rate}
            for p in self.pairs
        ]


def confusion_summary(
    frame: LogitFrame, temperature: float | None = None, k: int = 1, n_pairs: int = 10, rows: Any = None
) -> ConfusionSummary:
    """The confusion matrix of ``rows`` (default all) and its ``n_pairs`` largest confusions within the top ``k``.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> z = np.array([[3.0, 2.0, 0.0], [0.0, 3.0, 2.0], [1.0, 0.0, 3.0]])
    >>> c = confusion_summary(LogitFrame(z, labels=[0, 1, 1]))
    >>> c.matrix.tolist(), [(p.true, p.other, p.count) for p in c.pairs]
    ([[1, 0, 0], [0, 1, 1], [0, 0, 0]], [(1, 2, 1)])
    """
    r = _label_rows(frame, rows, "a confusion matrix")
    t = frame.temperature if temperature is None else an.check_temperature(temperature)
    s = frame.sample_scores(t)
    assert frame.labels is not None
    y = _take(frame.labels, r)
    kk = frame.n_classes
    matrix = an.confusion_matrix(y, _take(s.predicted, r), kk)
    if k == 1:
        top = matrix
    else:
        z = frame.logits if r is None else frame.logits[r]  # only labelled rows are copied
        with an.assume_valid():
            top = an.top_k_confusion(z, y, k)
    counts = np.bincount(y, minlength=kk)
    pairs = an.largest_confusions(top, n=n_pairs, class_counts=counts)
    return ConfusionSummary(
        temperature=t, k=int(k), matrix=matrix, top_k_matrix=top, class_counts=counts, pairs=tuple(pairs), n=int(y.size)
    )
