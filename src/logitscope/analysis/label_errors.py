"""Ranking samples whose given label is doubtful (likely wrong).

Three rankings, each returning row indices most doubtful first with a score
(lower score = more doubtful):

- ``given_probability``: ``p_y``, the probability the model gives the label;
- ``label_margin``: ``p_y - max_{k != y} p_k``, how far the given label's
  probability lies above (or below) the best other class (both scores are
  among the ranking options of Northcutt, Jiang and Chuang 2021, "Confident
  Learning: Estimating Uncertainty in Dataset Labels", Section 3.2);
- ``confident_learning``: the off-diagonal of the *confident joint* of the
  same paper. Each class ``j`` gets the threshold ``t_j`` = mean of ``p_j``
  over the samples labelled ``j``; a sample counts for class ``j`` when
  ``p_j >= t_j``, the largest such ``p_j`` deciding between several. Samples
  labelled ``y`` that count for some ``j != y`` are flagged, ranked by
  label margin.

The probabilities should be out-of-sample (cross-validated), as the paper
assumes; in-sample probabilities hide label errors that the model memorised.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike

from ..errors import ParameterError
from ..parameters import check as check_parameter
from ._blocks import as_float64_block, block_slices
from ._validation import assume_valid, check_labels, check_logits, check_temperature
from .scores import SampleScores, sample_scores

__all__ = ["DoubtfulLabelRanking", "confident_joint", "mean_given_probability", "rank_doubtful_labels"]

Method = Literal["given_probability", "label_margin", "confident_learning"]


@dataclass(frozen=True)
class DoubtfulLabelRanking:
    """Rows ordered most doubtful first, with their scores and suggested labels."""

    method: str
    index: np.ndarray
    score: np.ndarray
    suggested: np.ndarray

    def __len__(self) -> int:
        return int(self.index.shape[0])

    def top(self, n: int) -> DoubtfulLabelRanking:
        """The first ``n`` rows of the ranking (``n`` in the range of ``n_candidates``)."""
        n = int(check_parameter(n, "n_candidates"))
        return DoubtfulLabelRanking(self.method, self.index[:n], self.score[:n], self.suggested[:n])


def _probs_block(z: np.ndarray, rows: slice, beta: float) -> np.ndarray:
    b = as_float64_block(z, rows, beta)
    b -= b.max(axis=1, keepdims=True)
    np.exp(b, out=b)
    b /= b.sum(axis=1, keepdims=True)
    return b


def mean_given_probability(logits: ArrayLike, labels: ArrayLike, temperature: float = 1.0) -> np.ndarray:
    """Mean probability of each class over the samples labelled with it: ``t_j = mean(p_j | y = j)``.

    These are the per-class thresholds of confident learning (Northcutt et al.
    2021, Eq. 2); NaN for a class no sample is labelled with.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.log(np.array([[0.8, 0.2], [0.6, 0.4], [0.3, 0.7]]))
    >>> mean_given_probability(z, [0, 0, 1]).round(3)
    array([0.7, 0.7])
    """
    z = check_logits(logits)
    n, k = z.shape
    y = check_labels(labels, n, k)
    beta = 1.0 / check_temperature(temperature)
    total = np.zeros(k)
    for rows in block_slices(n, k):
        p = _probs_block(z, rows, beta)
        yr = y[rows]
        total += np.bincount(yr, weights=p[np.arange(p.shape[0]), yr], minlength=k)
    count = np.bincount(y, minlength=k)
    with np.errstate(invalid="ignore", divide="ignore"):
        return total / count


def _confident_assignment(z: np.ndarray, y: np.ndarray, beta: float, thresholds: np.ndarray) -> np.ndarray:
    """Class each row confidently counts for, or -1 where no ``p_j >= t_j``."""
    from ._sweep import numba_kernels
    from .scores import _numba_blocks, _pick

    n, k = z.shape
    assigned = np.full(n, -1, dtype=np.int64)
    thr = np.where(np.isnan(thresholds), np.inf, thresholds)
    if _pick("auto") == "numba":
        for rows, zc in _numba_blocks(z):
            chunks = int(min(64, max(1, zc.shape[0] // 1024)))
            numba_kernels().confident_kernel(zc, float(beta), thr.astype(np.float64), assigned[rows], chunks)
        return assigned
    for rows in block_slices(n, k):
        p = _probs_block(z, rows, beta)
        above = np.where(p >= thr[None, :] - 1e-12, p, -1.0)
        j = above.argmax(axis=1)
        has = above[np.arange(p.shape[0]), j] >= 0
        assigned[rows] = np.where(has, j, -1)
    return assigned


def confident_joint(logits: ArrayLike, labels: ArrayLike, temperature: float = 1.0) -> np.ndarray:
    """The confident joint ``C[i, j]``: samples labelled ``i`` that confidently count for ``j``.

    Rows of samples that count for no class are left out (Northcutt et al. 2021, Eq. 1).

    Examples
    --------
    >>> import numpy as np
    >>> z = np.log(np.array([[0.8, 0.2], [0.6, 0.4], [0.3, 0.7], [0.1, 0.9]]))
    >>> confident_joint(z, [0, 0, 1, 0]).tolist()
    [[2, 1], [0, 1]]
    """
    z = check_logits(logits)
    n, k = z.shape
    y = check_labels(labels, n, k)
    t = check_temperature(temperature)
    with assume_valid():
        assigned = _confident_assignment(z, y, 1.0 / t, mean_given_probability(z, y, t))
    m = assigned >= 0
    return np.bincount(y[m] * k + assigned[m], minlength=k * k).reshape(k, k)


def rank_doubtful_labels(
    logits: ArrayLike,
    labels: ArrayLike,
    method: Method = "confident_learning",
    temperature: float = 1.0,
    *,
    scores: SampleScores | None = None,
) -> DoubtfulLabelRanking:
    """Rank samples by how doubtful their given label is, most doubtful first.

    Parameters
    ----------
    logits : array_like of shape (N, K)
        Preferably out-of-sample (cross-validated) logits.
    labels : array_like of shape (N,)
    method : {"confident_learning", "given_probability", "label_margin"}
        ``given_probability`` (the label's probability) and ``label_margin``
        (the label's probability minus the best other class's) rank every sample;
        ``confident_learning`` returns only the flagged ones.
    temperature : float
        Softmax temperature.
    scores : SampleScores, optional
        :func:`sample_scores` of these logits and labels at this temperature, when already computed
        (a frame's cached scores); not checked against them.

    Returns
    -------
    DoubtfulLabelRanking
        ``suggested`` is the model's most probable class other than the label.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.log(np.array([[0.8, 0.2], [0.6, 0.4], [0.3, 0.7], [0.1, 0.9]]))
    >>> r = rank_doubtful_labels(z, [0, 0, 1, 0])
    >>> r.index.tolist(), r.suggested.tolist()
    ([3], [1])
    """
    z = check_logits(logits)
    n, k = z.shape
    y = check_labels(labels, n, k)
    t = check_temperature(temperature)
    with assume_valid():
        s = sample_scores(z, y, temperature=t) if scores is None else scores
    assert s.true_probability is not None and s.correct is not None
    if method == "confident_learning":
        return _confident_ranking(z, y, t, s)
    nm = _label_margin(s)
    # most probable class other than the label: the prediction, or the runner-up when the prediction is y
    suggested = s.predicted.copy()
    if np.any(s.correct):
        rows = np.flatnonzero(s.correct)
        with assume_valid():
            suggested[rows] = _runner_up(z, rows)
    if method == "given_probability":
        score = s.true_probability
        idx = np.argsort(score, kind="stable")
    elif method == "label_margin":
        score = nm
        idx = np.argsort(score, kind="stable")
    else:
        raise ParameterError(
            f"method must be 'confident_learning', 'given_probability' or 'label_margin', got {method!r}"
        )
    return DoubtfulLabelRanking(method=method, index=idx, score=score[idx], suggested=suggested[idx])


def _label_margin(s: SampleScores, rows: np.ndarray | None = None) -> np.ndarray:
    """The label's probability minus the best other class's, of every row (of ``rows`` only, when given)."""
    assert s.true_probability is not None and s.correct is not None

    def take(a: np.ndarray) -> np.ndarray:
        return a if rows is None else a[rows]

    conf = take(s.confidence)
    second = conf - take(s.margin)  # the runner-up probability
    return take(s.true_probability) - np.where(take(s.correct), second, conf)


def _confident_ranking(z: np.ndarray, y: np.ndarray, t: float, s: SampleScores) -> DoubtfulLabelRanking:
    """Confident learning's flagged rows (Northcutt et al. 2021), most doubtful (least label margin) first.

    Only the flagged rows get a margin and a suggestion (the class they confidently count for), so a large
    batch with few flagged rows costs one pass over the logits and a few per-row arrays.
    """
    k = z.shape[1]
    assert s.true_probability is not None
    # t_j = mean of p_j over the rows labelled j: p_y of each row is already among the scores
    with np.errstate(invalid="ignore", divide="ignore"):
        thr = np.bincount(y, weights=s.true_probability, minlength=k) / np.bincount(y, minlength=k)
    with assume_valid():
        assigned = _confident_assignment(z, y, 1.0 / t, thr)
    flagged = np.flatnonzero((assigned >= 0) & (assigned != y))
    nm = _label_margin(s, flagged)
    order = np.argsort(nm, kind="stable")
    return DoubtfulLabelRanking(
        method="confident_learning", index=flagged[order], score=nm[order], suggested=assigned[flagged[order]]
    )


def _runner_up(z: np.ndarray, rows: np.ndarray | None = None) -> np.ndarray:
    """Index of the second-largest logit of each row (of ``rows`` only, read in place, when given)."""
    from ._sweep import numba_kernels
    from .scores import _pick

    if rows is not None:
        if _pick("auto") == "numba" and z.dtype in (np.float32, np.float64) and z.flags.c_contiguous:
            out = np.empty(rows.size, dtype=np.int64)
            numba_kernels().runner_up_kernel(z, rows.astype(np.int64, copy=False), out)
            return out
        got = np.empty(rows.size, dtype=np.int64)
        per = max(1, (1 << 20) // max(1, z.shape[1]))
        for a in range(0, rows.size, per):  # a block of the rows at a time: no copy of the matrix
            got[a : a + per] = _runner_up(z[rows[a : a + per]])
        return got
    out = np.empty(z.shape[0], dtype=np.int64)
    for block in block_slices(*z.shape):
        b = np.array(z[block], dtype=np.float64)
        r = np.arange(b.shape[0])
        b[r, b.argmax(axis=1)] = -np.inf
        out[block] = b.argmax(axis=1)
    return out
