"""Which classes get confused, at the top and within the top k."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ..errors import ShapeError
from ._blocks import block_slices
from ._validation import check_k, check_labels, check_logits

__all__ = ["ConfusedPair", "confusion_matrix", "most_confused_pairs", "normalize_rows", "top_k_confusion"]


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


def top_k_confusion(logits: ArrayLike, labels: ArrayLike, k: int = 3) -> np.ndarray:
    """``C[i, j]``: samples of true class ``i`` with class ``j != i`` among their ``k`` largest logits.

    With ``k = 1`` this is the confusion matrix (up to ties). Which of several
    classes tied at the k-th place is counted is not specified (continuous
    logits rarely tie). The diagonal counts samples whose true class is
    itself in the top ``k``.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.array([[3.0, 2.0, 0.0], [0.0, 3.0, 2.0], [1.0, 0.0, 3.0]])
    >>> top_k_confusion(z, [0, 1, 1], k=2).tolist()
    [[1, 1, 0], [1, 1, 2], [0, 0, 0]]
    """
    z = check_logits(logits)
    n, kk = z.shape
    y = check_labels(labels, n, kk)
    k = check_k(k, kk)
    out = np.zeros(kk * kk, dtype=np.int64)
    for rows in block_slices(n, kk):
        b = np.asarray(z[rows])
        top = np.argpartition(-b, k - 1, axis=1)[:, :k] if k < kk else np.broadcast_to(np.arange(kk), b.shape)
        yy = np.repeat(y[rows], k)
        out += np.bincount(yy * kk + top.ravel(), minlength=kk * kk)
    return out.reshape(kk, kk)


@dataclass(frozen=True)
class ConfusedPair:
    """One (true, other) pair of classes and how often ``other`` wins or ranks high."""

    true: int
    other: int
    count: int
    rate: float


def most_confused_pairs(matrix: ArrayLike, n: int = 10, class_counts: ArrayLike | None = None) -> list[ConfusedPair]:
    """The largest off-diagonal cells of a confusion matrix, largest first.

    ``rate`` is the count over the number of samples of the true class:
    ``class_counts`` when given (needed for a top-k matrix, whose rows sum to
    ``k`` times the class size), else the row sums. Ties are broken by class index.

    Examples
    --------
    >>> [(p.true, p.other, p.count) for p in most_confused_pairs([[5, 2, 0], [3, 4, 0], [0, 1, 6]], n=2)]
    [(1, 0, 3), (0, 1, 2)]
    """
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
