"""Which classes get confused, at the top and within the top k."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ..errors import ShapeError
from ..parameters import check as check_parameter
from ._blocks import block_slices
from ._validation import check_k, check_labels, check_logits

__all__ = ["ConfusedPair", "confusion_matrix", "largest_confusions", "normalize_rows", "top_k_confusion"]


def confusion_matrix(labels: ArrayLike, predicted: ArrayLike, n_classes: int) -> np.ndarray:
    """Counts ``C[i, j]`` of samples with true class ``i`` predicted as ``j``.

    Same convention as scikit-learn's ``confusion_matrix`` (rows true, columns predicted).

    Examples
    --------
    >>> confusion_matrix([0, 0, 1, 2], [0, 1, 1, 2], 3).tolist()
    [[1, 1, 0], [0, 1, 0], [0, 0, 1]]
    """
    y = np.asarray(labels)
    n = y.shape[0] if y.ndim == 1 else -1
    y = check_labels(y, n, n_classes)
    p = check_labels(predicted, n, n_classes, what="predicted")
    return np.bincount(y * n_classes + p, minlength=n_classes * n_classes).reshape(n_classes, n_classes)


def normalize_rows(matrix: ArrayLike) -> np.ndarray:
    """Divide each row by its sum (rows of zeros stay zero): recall per true class.

    Examples
    --------
    >>> normalize_rows([[1, 3], [0, 0]]).tolist()
    [[0.25, 0.75], [0.0, 0.0]]
    """
    m = np.asarray(matrix, dtype=np.float64)
    if m.ndim != 2:
        raise ShapeError(f"a confusion matrix must be 2-D, got shape {m.shape}")
    sums = m.sum(axis=1, keepdims=True)
    return np.divide(m, sums, out=np.zeros_like(m), where=sums > 0)


def _top_k_members(b: np.ndarray, k: int) -> np.ndarray:
    """Boolean (rows, K): the ``k`` classes ranked first in each row, ties to the lower index."""
    kk = b.shape[1]
    if k >= kk:
        return np.ones(b.shape, dtype=bool)
    kth = -np.partition(-b, k - 1, axis=1)[:, k - 1]  # the k-th largest logit of each row
    above = b > kth[:, None]
    at = b == kth[:, None]
    room = k - above.sum(axis=1)  # places left for the classes tied at the k-th value
    return above | (at & (np.cumsum(at, axis=1) <= room[:, None]))


def top_k_confusion(logits: ArrayLike, labels: ArrayLike, k: int = 3) -> np.ndarray:
    """``C[i, j]``: samples of true class ``i`` with class ``j`` among their ``k`` first-ranked classes.

    Classes are ranked by logit, and among tied logits the lower class index
    ranks first (as :func:`numpy.argmax`, the rule of the whole package), so
    every row counts exactly ``k`` classes and ``k = 1`` gives the confusion
    matrix of the arg-max predictions. The diagonal counts samples whose true
    class is itself in the top ``k``.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.array([[3.0, 2.0, 0.0], [0.0, 3.0, 2.0], [1.0, 0.0, 3.0]])
    >>> top_k_confusion(z, [0, 1, 1], k=2).tolist()
    [[1, 1, 0], [1, 1, 2], [0, 0, 0]]
    >>> top_k_confusion(np.zeros((2, 3)), [2, 2], k=2).tolist()  # ties: classes 0 and 1 rank first
    [[0, 0, 0], [0, 0, 0], [2, 2, 0]]
    """
    z = check_logits(logits)
    n, kk = z.shape
    y = check_labels(labels, n, kk)
    k = check_k(k, kk)
    out = np.zeros(kk * kk, dtype=np.int64)
    for rows in block_slices(n, kk):
        member = _top_k_members(np.asarray(z[rows]), k)
        r, j = np.nonzero(member)
        out += np.bincount(y[rows][r] * kk + j, minlength=kk * kk)
    return out.reshape(kk, kk)


@dataclass(frozen=True)
class ConfusedPair:
    """One (true, other) pair of classes and how often ``other`` wins or ranks high."""

    true: int
    other: int
    count: int
    rate: float


def largest_confusions(matrix: ArrayLike, n: int = 10, class_counts: ArrayLike | None = None) -> list[ConfusedPair]:
    """The largest off-diagonal cells of a confusion matrix, largest first.

    ``rate`` is the count over the number of samples of the true class:
    ``class_counts`` when given (needed for a top-k matrix, whose rows sum to
    ``k`` times the class size), else the row sums. Ties are broken by class index.

    Examples
    --------
    >>> [(p.true, p.other, p.count) for p in largest_confusions([[5, 2, 0], [3, 4, 0], [0, 1, 6]], n=2)]
    [(1, 0, 3), (0, 1, 2)]
    """
    n = int(check_parameter(n, "n_pairs"))
    m = np.asarray(matrix)
    if m.ndim != 2 or m.shape[0] != m.shape[1]:
        raise ShapeError(f"a confusion matrix must be square, got shape {m.shape}")
    off = m.astype(np.int64).copy()
    np.fill_diagonal(off, 0)
    flat = off.ravel()
    nz = np.flatnonzero(flat > 0)
    order = nz[np.lexsort((nz, -flat[nz]))][:n]
    rows = m.sum(axis=1) if class_counts is None else np.asarray(class_counts)
    out = []
    for f in order:
        i, j = divmod(int(f), m.shape[0])
        out.append(ConfusedPair(true=i, other=j, count=int(flat[f]), rate=float(flat[f] / rows[i]) if rows[i] else 0.0))
    return out
