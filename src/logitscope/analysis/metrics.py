"""Set-level scores of a classifier's probabilities against true labels.

All functions take raw logits and compute ``p = softmax(z / T)`` themselves,
stably, so the same call works at any temperature.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ._blocks import block_slices
from ._validation import check_k, check_labels, check_logits
from .scores import sample_scores

__all__ = [
    "accuracy",
    "brier",
    "default_ks",
    "mean_confidence",
    "mean_entropy",
    "nll",
    "top_k_accuracies",
    "top_k_accuracy",
]


def _prepare(logits: ArrayLike, labels: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    z = check_logits(logits)
    return z, check_labels(labels, *z.shape)


def accuracy(logits: ArrayLike, labels: ArrayLike) -> float:
    """Fraction of rows whose arg-max logit is the label: ``mean(argmax z == y)``.

    Among tied maxima the lowest class index is the prediction (as :func:`numpy.argmax`).

    Examples
    --------
    >>> import numpy as np
    >>> accuracy(np.array([[2.0, 0.0], [0.0, 1.0], [3.0, 1.0]]), [0, 0, 0])
    0.6666666666666666
    """
    z, y = _prepare(logits, labels)
    return float(np.mean(z.argmax(axis=1) == y))


def top_k_accuracy(logits: ArrayLike, labels: ArrayLike, k: int = 5) -> float:
    """Fraction of rows whose label is among the ``k`` largest logits.

    Ties follow the rule of the whole package: among tied logits the lowest
    class index ranks first, as :func:`numpy.argmax` does, so the label is a
    hit when fewer than ``k`` classes have a larger logit or an equal logit
    at a lower index, and ``top_k_accuracy(z, y, 1) == accuracy(z, y)``
    always. Without ties this equals scikit-learn's ``top_k_accuracy_score``,
    which puts the higher class index first among ties instead.

    Examples
    --------
    >>> import numpy as np
    >>> top_k_accuracy(np.array([[3.0, 2.0, 1.0], [1.0, 2.0, 3.0]]), [1, 0], k=2)
    0.5
    >>> top_k_accuracy(np.zeros((5, 5)), [0, 1, 2, 3, 4], k=2)  # constant logits: classes 0 and 1 rank first
    0.4
    """
    z, y = _prepare(logits, labels)
    k = check_k(k, z.shape[1])
    hits = 0
    cols = np.arange(z.shape[1])
    for rows in block_slices(*z.shape):
        b = np.asarray(z[rows])
        yr = y[rows]
        zy = b[np.arange(b.shape[0]), yr]
        before = (b > zy[:, None]) | ((b == zy[:, None]) & (cols[None, :] < yr[:, None]))
        hits += int(np.count_nonzero(before.sum(axis=1) < k))
    return hits / z.shape[0]


def default_ks(n_classes: int) -> tuple[int, ...]:
    """The ``k`` values reported by default: those of (2, 3, 5) below ``n_classes``.

    Examples
    --------
    >>> default_ks(4)
    (2, 3)
    """
    return tuple(k for k in (2, 3, 5) if k < n_classes)


def top_k_accuracies(true_rank: ArrayLike, ks: tuple[int, ...]) -> dict[int, float]:
    """Top-k accuracies for several ``k`` from the rank of the true class.

    ``true_rank`` is 1 plus the number of classes ranked above the label
    (a larger logit, or an equal one at a lower index; see
    :func:`~logitscope.analysis.sample_scores`), so the label is in the top
    ``k`` exactly when ``true_rank <= k``.

    Examples
    --------
    >>> top_k_accuracies([1, 2, 3, 1], (2, 3))
    {2: 0.75, 3: 1.0}
    """
    r = np.asarray(true_rank)
    return {int(k): float(np.mean(r <= k)) for k in ks}


def nll(logits: ArrayLike, labels: ArrayLike, temperature: float = 1.0) -> float:
    """Mean negative log-likelihood ``mean(-log p_y)`` in nats (the log loss).

    ``log p_y`` is computed as ``z_y / T - logsumexp(z / T)``, so it stays
    finite where ``p_y`` itself underflows to zero.

    Examples
    --------
    >>> import numpy as np
    >>> round(nll(np.array([[0.0, 0.0]]), [1]), 6)  # log 2
    0.693147
    """
    z, y = _prepare(logits, labels)
    s = sample_scores(z, y, temperature=temperature)
    assert s.true_log_probability is not None  # labels given
    return float(-np.mean(s.true_log_probability))


def brier(logits: ArrayLike, labels: ArrayLike, temperature: float = 1.0) -> float:
    """Multi-class Brier score: mean over rows of ``sum_k (p_k - 1[y = k])^2`` (Brier 1950).

    It lies in ``[0, 2]``. For two classes it is twice scikit-learn's
    ``brier_score_loss`` on the positive class.

    Examples
    --------
    >>> import numpy as np
    >>> brier(np.array([[0.0, 0.0]]), [0])
    0.5
    """
    z, y = _prepare(logits, labels)
    s = sample_scores(z, y, temperature=temperature)
    assert s.brier is not None  # labels given
    return float(np.mean(s.brier))


def mean_confidence(logits: ArrayLike, temperature: float = 1.0) -> float:
    """Mean of the maximum softmax probability.

    Examples
    --------
    >>> import numpy as np
    >>> mean_confidence(np.array([[0.0, 0.0], [0.0, 0.0]]))
    0.5
    """
    return float(np.mean(sample_scores(logits, temperature=temperature).confidence))


def mean_entropy(logits: ArrayLike, temperature: float = 1.0) -> float:
    """Mean Shannon entropy of the predicted distribution, in nats.

    Examples
    --------
    >>> import numpy as np
    >>> round(mean_entropy(np.array([[0.0, 0.0]])), 6)
    0.693147
    """
    return float(np.mean(sample_scores(logits, temperature=temperature).entropy))
