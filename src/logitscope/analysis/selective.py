"""Selective prediction: accept confident predictions, send the rest to a person.

A threshold ``t`` accepts the samples with ``confidence >= t``. Its
*coverage* is the accepted fraction and its *selective risk* the error rate
among them (Geifman and El-Yaniv 2017, "Selective Classification for Deep
Neural Networks"). The risk-coverage curve traces both over every threshold;
the area under it (AURC, Geifman, Uziel and El-Yaniv 2019, "Bias-Reduced
Uncertainty Estimation for Deep Neural Classifiers") summarises a confidence
score's ranking quality.

Caution: a threshold chosen on one sample holds only for data like it.
Validate it on held-out data before use, and where errors can hurt people
(medical triage, vehicles) follow local regulation and licensed practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
from numpy.typing import ArrayLike
from scipy import special, stats

from ..errors import ParameterError, ShapeError
from ..parameters import check as check_parameter

__all__ = [
    "CAUTION",
    "RiskCoverage",
    "ThresholdChoice",
    "accuracy_rule_on_curve",
    "aurc",
    "aurc_of_curve",
    "binomial_interval",
    "cost_rule_on_curve",
    "evaluate_threshold",
    "per_class_thresholds",
    "risk_coverage_curve",
    "threshold_for_accuracy",
    "threshold_for_cost",
]

IntervalMethod = Literal["wilson", "clopper-pearson"]

#: The caution shown beside every threshold decision.
CAUTION = (
    "A threshold fitted on one sample holds only for data like it. Validate it on held-out "
    "data before use, and for medical, vehicle or other safety uses follow local regulation "
    "and licensed practice."
)


def _check_pair(confidence: ArrayLike, correct: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    conf = np.asarray(confidence, dtype=np.float64)
    ok = np.asarray(correct)
    if conf.ndim != 1 or ok.shape != conf.shape:
        raise ShapeError(f"confidence and correct must be 1-D of one length, got {conf.shape} and {ok.shape}")
    if conf.size == 0:
        raise ShapeError("at least one sample is needed")
    if np.any(~np.isfinite(conf)):
        raise ParameterError("confidence holds NaN or infinite values")
    return conf, ok.astype(bool)


@dataclass(frozen=True)
class RiskCoverage:
    """The risk-coverage curve at every distinct threshold, most confident first.

    ``threshold[i]`` accepts ``n_accepted[i]`` samples with ``n_errors[i]``
    errors among them. Tied confidences are accepted or refused together.
    """

    threshold: np.ndarray
    n_accepted: np.ndarray
    n_errors: np.ndarray
    n_total: int

    @property
    def coverage(self) -> np.ndarray:
        return self.n_accepted / self.n_total

    @property
    def risk(self) -> np.ndarray:
        return self.n_errors / self.n_accepted

    @property
    def accuracy(self) -> np.ndarray:
        return 1.0 - self.risk


def risk_coverage_curve(confidence: ArrayLike, correct: ArrayLike) -> RiskCoverage:
    """Selective risk and coverage at each distinct confidence threshold.

    Examples
    --------
    >>> rc = risk_coverage_curve([0.9, 0.8, 0.8, 0.6], [1, 1, 0, 0])
    >>> rc.threshold.tolist(), rc.n_accepted.tolist(), rc.n_errors.tolist()
    ([0.9, 0.8, 0.6], [1, 3, 4], [0, 1, 2])
    """
    return _curve(*_check_pair(confidence, correct))


def _select_kernels() -> Any:
    """The compiled curve and bin kernels (:mod:`._numba_select`), or None when numba does not run."""
    from .scores import _numba

    if _numba() is None:
        return None
    from . import _numba_select

    return _numba_select


def _curve(conf: np.ndarray, ok: np.ndarray) -> RiskCoverage:
    # a sort instead of an arg-sort (several times faster): the distinct confidences come from the sorted
    # values, and each error is placed in its run by merging the errors' sorted confidences into them
    c = np.sort(conf)[::-1]  # descending
    kernels = _select_kernels()
    if kernels is not None:
        thresholds, n_accepted, n_errors = kernels.curve_runs(c, np.sort(conf[~ok])[::-1])
        return RiskCoverage(threshold=thresholds, n_accepted=n_accepted, n_errors=n_errors, n_total=conf.size)
    last = np.flatnonzero(np.r_[c[1:] != c[:-1], True])  # last index of each run of equal confidence
    thresholds = c[last]
    # each error's run: its confidence is one of the thresholds; the errors' confidences are sorted first,
    # so that the binary searches walk the thresholds in order (several times faster than in random order)
    run = np.searchsorted(-thresholds, np.sort(-conf[~ok]), side="left")
    n_errors = np.cumsum(np.bincount(run, minlength=thresholds.size))
    return RiskCoverage(threshold=thresholds, n_accepted=last + 1, n_errors=n_errors, n_total=conf.size)


def aurc(confidence: ArrayLike, correct: ArrayLike) -> float:
    """Area under the risk-coverage curve (Geifman, Uziel and El-Yaniv 2019).

    Without ties this is ``(1/N) sum_{n=1}^{N} errors(n) / n``, where
    ``errors(n)`` counts the errors among the ``n`` most confident samples.
    A threshold cannot split samples of equal confidence, so tied samples
    are accepted together, as in :func:`risk_coverage_curve`: each group of
    ties contributes its share of the samples times the selective risk of
    accepting it with everything more confident. Equivalently, AURC is the
    mean over samples of the risk of the threshold at each sample's own
    confidence; a constant confidence gives the error rate.

    Examples
    --------
    >>> round(aurc([0.9, 0.8, 0.7, 0.6], [1, 1, 0, 0]), 6)  # (0 + 0 + 1/3 + 2/4) / 4
    0.208333
    >>> aurc([0.8, 0.8, 0.8, 0.8], [1, 1, 1, 0])  # no ranking at all: the error rate
    0.25
    """
    return aurc_of_curve(risk_coverage_curve(confidence, correct))


def aurc_of_curve(rc: RiskCoverage) -> float:
    """:func:`aurc` of a curve already computed (no second sort of the confidences).

    Examples
    --------
    >>> round(aurc_of_curve(risk_coverage_curve([0.9, 0.8, 0.7, 0.6], [1, 1, 0, 0])), 6)
    0.208333
    """
    kernels = _select_kernels()
    if kernels is not None and rc.n_accepted.dtype == np.int64 and rc.n_errors.dtype == np.int64:
        return float(np.sum(kernels.aurc_terms(rc.n_accepted, rc.n_errors, rc.n_total)))  # the same terms, one pass
    share = np.diff(rc.n_accepted, prepend=0) / rc.n_total
    return float(np.sum(share * rc.n_errors / rc.n_accepted))


def _wilson(k: np.ndarray, n: np.ndarray, alpha: float) -> tuple[np.ndarray, np.ndarray]:
    """Wilson (1927) score interval for arrays of successes ``k`` out of ``n > 0`` trials."""
    zc = float(stats.norm.ppf(1 - alpha / 2))
    phat = k / n
    denom = 1 + zc * zc / n
    centre = (phat + zc * zc / (2 * n)) / denom
    half = zc * np.sqrt(phat * (1 - phat) / n + zc * zc / (4 * n * n)) / denom
    return np.maximum(0.0, centre - half), np.minimum(1.0, centre + half)


def binomial_interval(
    successes: int, trials: int, level: float = 0.95, method: IntervalMethod = "wilson"
) -> tuple[float, float]:
    """Two-sided confidence interval for a binomial proportion.

    ``"wilson"`` is the Wilson (1927) score interval; ``"clopper-pearson"``
    the exact interval of Clopper and Pearson (1934) from beta quantiles.
    With no trials the interval is ``(0, 1)``.

    Examples
    --------
    >>> [round(v, 4) for v in binomial_interval(8, 10)]
    [0.4902, 0.9433]
    """
    level = float(check_parameter(level, "level"))
    k, n = int(successes), int(trials)
    if n < 0 or not 0 <= k <= max(n, 0):
        raise ParameterError(f"need 0 <= successes <= trials, got {k} of {n}")
    if n == 0:
        return 0.0, 1.0
    alpha = 1.0 - level
    if method == "wilson":
        lo, hi = _wilson(np.asarray(float(k)), np.asarray(float(n)), alpha)
        return float(lo), float(hi)
    if method == "clopper-pearson":
        lo_cp = 0.0 if k == 0 else float(stats.beta.ppf(alpha / 2, k, n - k + 1))
        hi_cp = 1.0 if k == n else float(stats.beta.ppf(1 - alpha / 2, k + 1, n - k))
        return lo_cp, hi_cp
    raise ParameterError(f"method must be 'wilson' or 'clopper-pearson', got {method!r}")


def _cp_reaches(k: np.ndarray, n: np.ndarray, target: float, alpha: float) -> np.ndarray:
    """Rows (``0 < target < k / n``) whose Clopper-Pearson lower end is at least ``target``.

    The lower end ``p_L`` solves ``P(X >= k; n, p_L) = alpha / 2`` and the tail
    grows with ``p``, so ``p_L >= t`` exactly when ``P(X >= k; n, t) <= alpha / 2``
    (Clopper and Pearson 1934): a regularised incomplete beta function
    ``I_t(k, n - k + 1)``, with no quantile to invert. Most rows are decided
    without it by two bounds on that tail, with ``lam = k / n`` and ``D`` the
    Kullback-Leibler divergence of Bernoulli(lam) from Bernoulli(t): Chernoff's
    ``P <= exp(-n D)`` (so ``n D >= log(2 / alpha)`` suffices) and
    ``P >= P(X = k) >= exp(-n D) / sqrt(8 n lam (1 - lam))`` for ``k < n``
    (Ash 1990, Lemma 4.7.2; so a row that reaches the target has
    ``n D + log(8 n lam (1 - lam)) / 2 >= log(2 / alpha)``). For ``k = n`` the
    tail is ``t^n`` exactly. Only rows between the two bounds, and after the
    last row the first bound settles, get the exact tail: the returned mask's
    last True is exact, earlier rows may be left False.
    """
    out = np.zeros(k.shape, dtype=bool)
    need = -math.log(alpha / 2)
    every = k == n
    out[every] = -n[every] * math.log(target) >= need
    idx = np.flatnonzero(~every)
    if idx.size == 0:
        return out
    lm, nm = k[idx] / n[idx], n[idx]
    d = lm * np.log(lm / target) + (1 - lm) * np.log((1 - lm) / (1 - target))
    slack = 1e-9 * (1.0 + need)
    sure = nm * d >= need + slack
    maybe = ~sure & (nm * d + 0.5 * np.log(8 * nm * lm * (1 - lm)) >= need - slack)
    out[idx[sure]] = True
    after = int(np.flatnonzero(out)[-1]) if out.any() else -1
    check = idx[maybe]
    check = check[check > after]  # only rows after the last settled one can change the last True
    if check.size:
        tail = special.betainc(k[check], n[check] - k[check] + 1, target)  # P(X >= k; n, target)
        out[check] = tail <= alpha / 2
    return out


def _last_lower_bound_reaching(
    k: np.ndarray, n: np.ndarray, target: float, level: float, method: IntervalMethod, chunk: int = 1 << 16
) -> int:
    """Index of the last row (successes ``k`` of ``n``) whose interval's lower end is ``>= target``; -1 if none.

    Both intervals contain ``k / n``, so only rows with ``k / n >= target``
    can reach it. Those are scanned from the last one backwards in chunks,
    and the scan stops in the first chunk holding a row that reaches the
    target: in the usual case only the last few candidates are evaluated.
    Wilson's lower end has a closed form; Clopper-Pearson's is decided by
    :func:`_cp_reaches`.
    """
    alpha = 1.0 - level
    if target <= 0:
        return k.size - 1
    kf = k.astype(np.float64)
    nf = n.astype(np.float64)
    cand = np.flatnonzero(kf / nf >= target - 1e-12)
    for stop in range(cand.size, 0, -chunk):
        idx = cand[max(0, stop - chunk) : stop]
        if method == "wilson":
            hit = _wilson(kf[idx], nf[idx], alpha)[0] >= target
        else:
            hit = np.zeros(idx.size, dtype=bool)
            inside = kf[idx] / nf[idx] > target  # where k / n == target, p_L < k / n = target
            sub = np.flatnonzero(inside)
            if sub.size:
                hit[sub] = _cp_reaches(kf[idx[sub]], nf[idx[sub]], target, alpha)
        if hit.any():
            return int(idx[np.flatnonzero(hit)[-1]])
    return -1


@dataclass(frozen=True)
class ThresholdChoice:
    """A confidence threshold and what it does to the data it was chosen on.

    ``feasible`` is False when no threshold reaches the asked-for target;
    the threshold then accepts nothing.
    """

    threshold: float
    coverage: float
    accuracy: float
    n_accepted: int
    n_review: int
    n_total: int
    interval: tuple[float, float]
    interval_method: str
    level: float
    rule: str
    feasible: bool = True
    expected_cost: float | None = None
    caution: str = field(default=CAUTION, repr=False)

    def to_dict(self) -> dict[str, object]:
        """A JSON-ready dict (NaN accuracy becomes None)."""
        acc = None if np.isnan(self.accuracy) else self.accuracy
        return {
            "value": self.threshold if np.isfinite(self.threshold) else None,
            "coverage": self.coverage,
            "accuracy": acc,
            "interval": list(self.interval),
            "interval_method": self.interval_method,
            "level": self.level,
            "n_accepted": self.n_accepted,
            "n_review": self.n_review,
            "rule": self.rule,
            "feasible": self.feasible,
            "expected_cost": self.expected_cost,
        }


def _choice(
    threshold: float, n_acc: int, n_err: int, n: int, level: float, method: IntervalMethod, rule: str,
    feasible: bool = True, cost: float | None = None,
) -> ThresholdChoice:  # fmt: skip
    right = n_acc - n_err
    acc = right / n_acc if n_acc else float("nan")
    return ThresholdChoice(
        threshold=float(threshold), coverage=n_acc / n, accuracy=acc, n_accepted=int(n_acc),
        n_review=int(n - n_acc), n_total=int(n), interval=binomial_interval(right, n_acc, level, method),
        interval_method=method, level=level, rule=rule, feasible=feasible, expected_cost=cost,
    )  # fmt: skip


def evaluate_threshold(
    confidence: ArrayLike,
    correct: ArrayLike,
    threshold: float,
    level: float = 0.95,
    method: IntervalMethod = "wilson",
) -> ThresholdChoice:
    """Coverage and accuracy (with a binomial interval) of accepting ``confidence >= threshold``.

    ``threshold`` lies in [0, 1], or is ``inf``: accept nothing (what an
    unreachable target gives, see :func:`threshold_for_accuracy`).

    Examples
    --------
    >>> c = evaluate_threshold([0.9, 0.8, 0.8, 0.6], [1, 1, 0, 0], 0.8)
    >>> c.coverage, round(c.accuracy, 4), c.n_review
    (0.75, 0.6667, 1)
    """
    if not (isinstance(threshold, float | np.floating) and threshold == np.inf):
        threshold = float(check_parameter(threshold, "threshold"))
    level = float(check_parameter(level, "level"))
    conf, ok = _check_pair(confidence, correct)
    acc = conf >= threshold
    n_acc = int(acc.sum())
    return _choice(threshold, n_acc, int((acc & ~ok).sum()), conf.size, level, method, f"fixed at {threshold:g}")


def threshold_for_accuracy(
    confidence: ArrayLike,
    correct: ArrayLike,
    target: float,
    level: float = 0.95,
    method: IntervalMethod = "wilson",
    use_lower_bound: bool = False,
) -> ThresholdChoice:
    """The lowest threshold whose accepted samples reach ``target`` accuracy.

    Among the distinct confidences ``t``, pick the smallest for which the
    accuracy of ``{confidence >= t}`` is at least ``target`` (with
    ``use_lower_bound=True``: the lower end of its confidence interval, a
    stricter rule that accounts for the sample size). The lowest such
    threshold gives the largest coverage.

    Examples
    --------
    >>> c = threshold_for_accuracy([0.95, 0.9, 0.8, 0.7, 0.6], [1, 1, 1, 0, 1], 0.75)
    >>> c.threshold, c.coverage, c.accuracy
    (0.6, 1.0, 0.8)
    """
    target = float(check_parameter(target, "target_accuracy"))
    level = float(check_parameter(level, "level"))
    conf, ok = _check_pair(confidence, correct)
    if method not in ("wilson", "clopper-pearson"):
        raise ParameterError(f"method must be 'wilson' or 'clopper-pearson', got {method!r}")
    return accuracy_rule_on_curve(_curve(conf, ok), target, level, method, use_lower_bound)


def accuracy_rule_on_curve(
    rc: RiskCoverage, target: float, level: float, method: IntervalMethod, use_lower_bound: bool = False
) -> ThresholdChoice:
    """:func:`threshold_for_accuracy` on a curve already computed (checked arguments).

    Examples
    --------
    >>> rc = risk_coverage_curve([0.95, 0.9, 0.8, 0.7, 0.6], [1, 1, 1, 0, 1])
    >>> accuracy_rule_on_curve(rc, 0.75, 0.95, "wilson").threshold
    0.6
    """
    n = rc.n_total
    right = rc.n_accepted - rc.n_errors
    # thresholds run from high to low: the last one that reaches the target is the lowest
    if use_lower_bound:
        i = _last_lower_bound_reaching(right, rc.n_accepted, target - 1e-12, level, method)
        rule = f"lowest threshold whose {method} {level:.0%} lower bound on accuracy >= {target:g}"
    else:
        hits = np.flatnonzero(right / rc.n_accepted >= target - 1e-12)
        i = int(hits[-1]) if hits.size else -1
        rule = f"lowest threshold whose accuracy >= {target:g}"
    if i < 0:
        return _choice(np.inf, 0, 0, n, level, method, rule, feasible=False)
    return _choice(rc.threshold[i], int(rc.n_accepted[i]), int(rc.n_errors[i]), n, level, method, rule)


def threshold_for_cost(
    confidence: ArrayLike,
    correct: ArrayLike,
    error_cost: float,
    review_cost: float,
    level: float = 0.95,
    method: IntervalMethod = "wilson",
) -> ThresholdChoice:
    """The threshold that minimises the expected cost per sample.

    Each accepted error costs ``error_cost``; each sample sent for review
    costs ``review_cost`` (the reviewer is assumed right). The expected cost
    of a threshold is ``(error_cost * accepted errors + review_cost * reviewed) / N``;
    accepting nothing (threshold ``inf``) is one of the candidates. Ties go to
    the larger coverage.

    Examples
    --------
    >>> c = threshold_for_cost([0.95, 0.9, 0.8, 0.7, 0.6], [1, 1, 1, 0, 1], 5.0, 1.0)
    >>> c.threshold, c.n_review, c.expected_cost
    (0.8, 2, 0.4)
    """
    error_cost = float(check_parameter(error_cost, "error_cost"))
    review_cost = float(check_parameter(review_cost, "review_cost"))
    level = float(check_parameter(level, "level"))
    conf, ok = _check_pair(confidence, correct)
    return cost_rule_on_curve(_curve(conf, ok), error_cost, review_cost, level, method)


def cost_rule_on_curve(
    rc: RiskCoverage, error_cost: float, review_cost: float, level: float, method: IntervalMethod
) -> ThresholdChoice:
    """:func:`threshold_for_cost` on a curve already computed (checked arguments).

    Examples
    --------
    >>> rc = risk_coverage_curve([0.95, 0.9, 0.8, 0.7, 0.6], [1, 1, 1, 0, 1])
    >>> cost_rule_on_curve(rc, 5.0, 1.0, 0.95, "wilson").n_review
    2
    """
    n = rc.n_total
    acc = np.r_[0, rc.n_accepted]
    err = np.r_[0, rc.n_errors]
    thr = np.r_[np.inf, rc.threshold]
    cost = (error_cost * err + review_cost * (n - acc)) / n
    best = np.flatnonzero(cost <= cost.min() + 1e-12)[-1]
    rule = f"minimum expected cost with error cost {error_cost:g} and review cost {review_cost:g}"
    return _choice(thr[best], int(acc[best]), int(err[best]), n, level, method, rule, cost=float(cost[best]))


def per_class_thresholds(
    confidence: ArrayLike,
    correct: ArrayLike,
    predicted: ArrayLike,
    target: float,
    n_classes: int,
    level: float = 0.95,
    method: IntervalMethod = "wilson",
    use_lower_bound: bool = False,
) -> list[ThresholdChoice | None]:
    """One :func:`threshold_for_accuracy` per predicted class (None where a class is never predicted).

    Examples
    --------
    >>> out = per_class_thresholds([0.9, 0.6, 0.8, 0.7], [1, 0, 1, 1], [0, 0, 1, 1], 0.9, 2)
    >>> [c.threshold for c in out]
    [0.9, 0.7]
    """
    conf, ok = _check_pair(confidence, correct)
    pred = np.asarray(predicted)
    if pred.shape != conf.shape:
        raise ShapeError(f"predicted must have shape {conf.shape}, got {pred.shape}")
    out: list[ThresholdChoice | None] = []
    for k in range(n_classes):
        m = pred == k
        out.append(threshold_for_accuracy(conf[m], ok[m], target, level, method, use_lower_bound) if m.any() else None)
    return out
