"""Calibration: do the confidences match the accuracies?

The reliability diagram and the expected calibration error follow Guo,
Pleiss, Sun and Weinberger (2017), "On Calibration of Modern Neural
Networks": confidences ``max_k p_k`` are grouped into bins and each bin's
accuracy is compared with its mean confidence. Equal-width bins are
``(b / B, (b + 1) / B]``; equal-mass bins hold (nearly) the same number of
samples (Nixon et al. 2019, "Measuring Calibration in Deep Learning").
Classwise ECE averages a per-class ECE over the probabilities of every class
(Kull et al. 2019, "Beyond temperature scaling").
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike

from ..errors import ParameterError, ShapeError
from ..parameters import check as check_parameter
from ._blocks import as_float64_block, block_slices
from ._validation import check_labels, check_logits, check_temperature
from .scores import sample_scores

__all__ = [
    "ReliabilityBins",
    "classwise_calibration_error",
    "expected_calibration_error",
    "maximum_calibration_error",
    "reliability_bins",
]

Strategy = Literal["uniform", "quantile"]


@dataclass(frozen=True)
class ReliabilityBins:
    """Per-bin counts, accuracies and mean confidences of a reliability diagram.

    ``bin_of`` maps each sample to its bin (the smallest integer type that holds the bin numbers: int8 up
    to 127 bins), so a view can select a bin's samples.
    Empty bins have ``count == 0`` and NaN accuracy and confidence.
    """

    lower: np.ndarray
    upper: np.ndarray
    count: np.ndarray
    accuracy: np.ndarray
    confidence: np.ndarray
    bin_of: np.ndarray
    strategy: str

    @property
    def gap(self) -> np.ndarray:
        """``accuracy - confidence`` per bin (negative: over-confident)."""
        return self.accuracy - self.confidence

    @property
    def ece(self) -> float:
        """Expected calibration error: ``sum_b |B_b| / N * |acc_b - conf_b|``."""
        n = self.count.sum()
        used = self.count > 0
        return float(np.sum(self.count[used] / n * np.abs(self.gap[used])))

    @property
    def mce(self) -> float:
        """Maximum calibration error: the largest ``|acc_b - conf_b|`` over non-empty bins."""
        used = self.count > 0
        return float(np.max(np.abs(self.gap[used])))


def _check_bins(n_bins: int) -> int:
    return int(check_parameter(n_bins, "n_bins"))


def reliability_bins(
    confidence: ArrayLike, correct: ArrayLike, n_bins: int = 15, strategy: Strategy = "uniform"
) -> ReliabilityBins:
    """Bin samples by confidence and compare each bin's accuracy with its confidence.

    Parameters
    ----------
    confidence : array_like of shape (N,)
        Maximum softmax probability per sample, in ``[0, 1]``.
    correct : array_like of shape (N,)
        Whether the prediction was right.
    n_bins : int, default 15
        Number of bins (Guo et al. 2017 use 15), in the range
        :data:`logitscope.parameters.RANGES` gives (1 to 100).
    strategy : {"uniform", "quantile"}
        Equal-width bins ``(b / B, (b + 1) / B]`` or equal-mass bins.

    Examples
    --------
    >>> rb = reliability_bins([0.9, 0.9, 0.6, 0.6], [1, 1, 1, 0], n_bins=10)
    >>> round(rb.ece, 6)
    0.1
    """
    n_bins = _check_bins(n_bins)
    conf = np.asarray(confidence, dtype=np.float64)
    ok = np.asarray(correct).astype(bool)
    if conf.ndim != 1 or ok.shape != conf.shape:
        raise ShapeError(f"confidence and correct must be 1-D of one length, got {conf.shape} and {ok.shape}")
    if conf.size == 0:
        raise ShapeError("reliability_bins needs at least one sample")
    if np.any(~np.isfinite(conf)) or np.any((conf < 0) | (conf > 1)):
        raise ParameterError("confidence values must lie in [0, 1]")
    small = np.int8 if n_bins <= np.iinfo(np.int8).max else np.int16  # a bin index per row: one or two bytes
    if strategy == "uniform":
        edges = np.linspace(0.0, 1.0, n_bins + 1)
        lower, upper = edges[:-1], edges[1:]
        from .selective import _select_kernels

        kernels = _select_kernels()
        if kernels is not None:  # one pass: the bin of each row and the sums per bin, in row order
            bin_of = np.empty(conf.size, dtype=small)
            count, right, total = kernels.uniform_bins(conf, ok, edges[1:-1], bin_of)
            with np.errstate(invalid="ignore", divide="ignore"):
                acc, mconf = right / count, total / count
            return ReliabilityBins(lower, upper, count, acc, mconf, bin_of, strategy)
        bin_of = np.searchsorted(edges[1:-1], conf, side="left")
    elif strategy == "quantile":
        order = np.argsort(conf, kind="stable")
        bin_of = np.empty(conf.size, dtype=small)
        chunks = np.array_split(order, n_bins)
        lower = np.full(n_bins, np.nan)
        upper = np.full(n_bins, np.nan)
        for b, idx in enumerate(chunks):
            bin_of[idx] = b
            if idx.size:
                lower[b], upper[b] = conf[idx[0]], conf[idx[-1]]
    else:
        raise ParameterError(f"strategy must be 'uniform' or 'quantile', got {strategy!r}")
    count = np.bincount(bin_of, minlength=n_bins)
    with np.errstate(invalid="ignore", divide="ignore"):
        acc = np.bincount(bin_of, weights=ok, minlength=n_bins) / count
        mconf = np.bincount(bin_of, weights=conf, minlength=n_bins) / count
    return ReliabilityBins(
        lower=lower, upper=upper, count=count, accuracy=acc, confidence=mconf,
        bin_of=bin_of.astype(small), strategy=strategy,
    )  # fmt: skip


def _conf_correct(logits: ArrayLike, labels: ArrayLike, temperature: float) -> tuple[np.ndarray, np.ndarray]:
    s = sample_scores(logits, labels, temperature=temperature)
    assert s.correct is not None
    return s.confidence, s.correct


def expected_calibration_error(
    logits: ArrayLike,
    labels: ArrayLike,
    temperature: float = 1.0,
    n_bins: int = 15,
    strategy: Strategy = "uniform",
) -> float:
    """Expected calibration error of the top-label confidence (Guo et al. 2017).

    Examples
    --------
    >>> import numpy as np
    >>> z = np.log(np.array([[0.9, 0.1], [0.9, 0.1], [0.6, 0.4], [0.6, 0.4]]))
    >>> round(expected_calibration_error(z, [0, 0, 0, 1], n_bins=10), 6)
    0.1
    """
    conf, ok = _conf_correct(logits, labels, temperature)
    return reliability_bins(conf, ok, n_bins, strategy).ece


def maximum_calibration_error(
    logits: ArrayLike,
    labels: ArrayLike,
    temperature: float = 1.0,
    n_bins: int = 15,
    strategy: Strategy = "uniform",
) -> float:
    """Largest bin gap ``max_b |acc_b - conf_b|`` over non-empty bins (Guo et al. 2017).

    Examples
    --------
    >>> import numpy as np
    >>> z = np.log(np.array([[0.9, 0.1], [0.9, 0.1], [0.6, 0.4], [0.6, 0.4]]))
    >>> round(maximum_calibration_error(z, [0, 0, 0, 1], n_bins=10), 6)
    0.1
    """
    conf, ok = _conf_correct(logits, labels, temperature)
    return reliability_bins(conf, ok, n_bins, strategy).mce


def classwise_calibration_error(
    logits: ArrayLike, labels: ArrayLike, temperature: float = 1.0, n_bins: int = 15
) -> float:
    """Classwise ECE: the mean over classes ``k`` of the equal-width-bin ECE of ``p_k``
    against ``1[y = k]``, over all samples (Kull et al. 2019).

    Examples
    --------
    >>> import numpy as np
    >>> z = np.log(np.array([[0.9, 0.1], [0.9, 0.1], [0.6, 0.4], [0.6, 0.4]]))
    >>> round(classwise_calibration_error(z, [0, 0, 0, 1], n_bins=10), 6)
    0.1
    """
    z = check_logits(logits)
    n, k = z.shape
    y = check_labels(labels, n, k)
    n_bins = _check_bins(n_bins)
    beta = 1.0 / check_temperature(temperature)
    interior = np.linspace(0.0, 1.0, n_bins + 1)[1:-1]
    cells = k * n_bins
    count = np.zeros(cells)
    hits = np.zeros(cells)
    psum = np.zeros(cells)
    offsets = np.arange(k) * n_bins
    for rows in block_slices(n, k):
        b = as_float64_block(z, rows, beta)
        b -= b.max(axis=1, keepdims=True)
        np.exp(b, out=b)
        b /= b.sum(axis=1, keepdims=True)
        cell = (np.searchsorted(interior, b, side="left") + offsets[None, :]).ravel()
        onehot = np.zeros_like(b)
        onehot[np.arange(b.shape[0]), y[rows]] = 1.0
        count += np.bincount(cell, minlength=cells)
        hits += np.bincount(cell, weights=onehot.ravel(), minlength=cells)
        psum += np.bincount(cell, weights=b.ravel(), minlength=cells)
    gap = np.abs(hits - psum)  # |B| * |acc - conf| summed within each cell
    per_class = gap.reshape(k, n_bins).sum(axis=1) / n
    return float(per_class.mean())
