"""Selective prediction: risk-coverage, AURC, thresholds and binomial intervals."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import binomtest

from logitscope.analysis import (
    CAUTION,
    aurc,
    binomial_interval,
    evaluate_threshold,
    per_class_thresholds,
    risk_coverage_curve,
    sample_scores,
    threshold_for_accuracy,
    threshold_for_cost,
)
from logitscope.errors import ParameterError, ShapeError

SCIPY_METHOD = {"wilson": "wilson", "clopper-pearson": "exact"}


@pytest.fixture
def conf_correct(make_logits):
    # the functions here take confidences and correctness; the scores backends are tested elsewhere
    z, y = make_logits(n=400, k=5, scale=2.5, true_temperature=1.5)
    s = sample_scores(z, y)
    return s.confidence, s.correct


def test_risk_coverage_against_brute_force(conf_correct):
    conf, ok = conf_correct
    rc = risk_coverage_curve(conf, ok)
    thresholds = np.unique(conf)[::-1]
    np.testing.assert_array_equal(rc.threshold, thresholds)
    for i, t in enumerate(thresholds):
        accepted = conf >= t
        assert rc.n_accepted[i] == accepted.sum()
        assert rc.n_errors[i] == (accepted & ~ok).sum()
    assert rc.coverage[-1] == 1.0 and rc.n_total == conf.size
    np.testing.assert_allclose(rc.risk + rc.accuracy, 1.0)


def _aurc_loop(conf: np.ndarray, ok: np.ndarray) -> float:
    """(1/N) sum_n errors among the n most confident / n (Geifman and El-Yaniv), a direct loop.

    Without ties (this helper's use) the order of the samples is unique."""
    assert np.unique(conf).size == conf.size
    order = sorted(range(conf.size), key=lambda i: -conf[i])
    total, errors = 0.0, 0
    for n, i in enumerate(order, start=1):
        errors += not ok[i]
        total += errors / n
    return total / conf.size


def test_aurc_against_a_direct_loop(conf_correct):
    conf, ok = conf_correct
    assert aurc(conf, ok) == pytest.approx(_aurc_loop(conf, ok), rel=1e-12)


def test_aurc_ties_and_ends(rng):
    # ties are grouped (tests/test_ties.py checks the grouped value against its own loop)
    conf = np.round(rng.uniform(0.3, 1.0, 300), 1)  # few distinct values: many ties
    # every prediction right: 0; every prediction wrong: 1 (each prefix has error rate 1)
    assert aurc(conf, np.ones(300, bool)) == 0.0
    assert aurc(conf, np.zeros(300, bool)) == 1.0
    # a perfect ranking (all errors least confident) beats the reverse ranking
    ok2 = np.r_[np.ones(80, bool), np.zeros(20, bool)]
    c2 = np.linspace(1.0, 0.5, 100)
    assert aurc(c2, ok2) < aurc(c2[::-1], ok2)


@pytest.mark.parametrize("method", ["wilson", "clopper-pearson"])
@pytest.mark.parametrize("level", [0.9, 0.95, 0.99])
def test_binomial_interval_matches_scipy(method, level):
    for k, n in [(0, 1), (1, 1), (0, 10), (3, 10), (10, 10), (47, 50), (512, 1000), (1, 2000)]:
        # reference: scipy.stats.binomtest(k, n).proportion_ci
        ref = binomtest(k, n).proportion_ci(confidence_level=level, method=SCIPY_METHOD[method])
        lo, hi = binomial_interval(k, n, level, method)
        assert lo == pytest.approx(ref.low, abs=1e-12) and hi == pytest.approx(ref.high, abs=1e-12)
    assert binomial_interval(0, 0) == (0.0, 1.0)


def test_binomial_interval_errors():
    with pytest.raises(ParameterError, match="level must lie in"):
        binomial_interval(1, 2, level=1.0)
    with pytest.raises(ParameterError, match="successes <= trials"):
        binomial_interval(3, 2)
    with pytest.raises(ParameterError, match="method must be"):
        binomial_interval(1, 2, method="normal")


def _brute_threshold(conf: np.ndarray, ok: np.ndarray, target: float) -> float:
    """Lowest distinct confidence t with accuracy(conf >= t) >= target, by trying every one."""
    feasible = [t for t in np.unique(conf) if ok[conf >= t].mean() >= target]
    return min(feasible) if feasible else np.inf


@pytest.mark.parametrize("target", [0.6, 0.8, 0.9, 0.95, 0.99])
@pytest.mark.parametrize("method", ["wilson", "clopper-pearson"])
def test_threshold_for_accuracy_against_brute_force(conf_correct, target, method):
    conf, ok = conf_correct
    c = threshold_for_accuracy(conf, ok, target, method=method)
    t = _brute_threshold(conf, ok, target)
    assert c.feasible == np.isfinite(t)
    if not c.feasible:
        assert c.coverage == 0.0 and c.n_accepted == 0
        return
    accepted = conf >= t
    assert c.threshold == t
    assert c.accuracy >= target and c.accuracy == pytest.approx(ok[accepted].mean())
    assert c.coverage == pytest.approx(accepted.mean())
    assert c.n_accepted == accepted.sum() and c.n_review == conf.size - accepted.sum()
    # reference interval: scipy.stats.binomtest on the accepted samples
    ref = binomtest(int(ok[accepted].sum()), int(accepted.sum())).proportion_ci(method=SCIPY_METHOD[method])
    assert c.interval == pytest.approx((ref.low, ref.high), abs=1e-12)
    assert c.caution == CAUTION


@pytest.mark.parametrize("target", [0.7, 0.8, 0.9])
def test_threshold_with_the_lower_bound_rule(conf_correct, target):
    conf, ok = conf_correct
    c = threshold_for_accuracy(conf, ok, target, use_lower_bound=True)
    # brute force: lowest t whose Wilson 95% lower bound (scipy.stats.binomtest) reaches the target
    feasible = []
    for t in np.unique(conf):
        m = conf >= t
        if binomtest(int(ok[m].sum()), int(m.sum())).proportion_ci(method="wilson").low >= target:
            feasible.append(t)
    assert c.feasible == bool(feasible)
    if feasible:
        assert c.threshold == min(feasible)
        assert c.interval[0] >= target
        # the stricter rule never accepts more than the plain one
        assert c.coverage <= threshold_for_accuracy(conf, ok, target).coverage
    else:
        assert c.threshold == np.inf and c.n_accepted == 0


def test_threshold_docstring_style_example():
    # hand-checked: accepting conf >= 0.6 keeps 4 right of 5 = 0.8 >= 0.75; no lower threshold exists
    c = threshold_for_accuracy([0.95, 0.9, 0.8, 0.7, 0.6], [1, 1, 1, 0, 1], 0.75)
    assert (c.threshold, c.coverage, c.accuracy) == (0.6, 1.0, 0.8)
    # target 0.9: conf >= 0.8 keeps 3 of 3; conf >= 0.7 keeps 3 of 4 = 0.75 < 0.9
    c = threshold_for_accuracy([0.95, 0.9, 0.8, 0.7, 0.6], [1, 1, 1, 0, 1], 0.9)
    assert (c.threshold, c.coverage, c.accuracy) == (0.8, 0.6, 1.0)
    # the most confident sample wrong and target 1: no threshold reaches it
    c = threshold_for_accuracy([0.95, 0.9, 0.8], [0, 1, 1], 1.0)
    assert not c.feasible and c.threshold == np.inf and c.n_review == 3 and c.to_dict()["accuracy"] is None


def test_threshold_for_cost_hand_worked():
    conf = [0.95, 0.9, 0.8, 0.7, 0.6]
    ok = [1, 1, 1, 0, 1]
    # Worked by hand, cost per sample = (error_cost * accepted errors + review_cost * reviewed) / N,
    # N = 5, error cost 2, review cost 1:
    #   accept none (t = inf): (2*0 + 1*5) / 5 = 1.0
    #   t = 0.95: 1 accepted, 0 errors, 4 reviewed -> 0.8
    #   t = 0.90: 2 accepted, 0 errors, 3 reviewed -> 0.6
    #   t = 0.80: 3 accepted, 0 errors, 2 reviewed -> 0.4
    #   t = 0.70: 4 accepted, 1 error,  1 reviewed -> (2 + 1) / 5 = 0.6
    #   t = 0.60: 5 accepted, 1 error,  0 reviewed -> 2 / 5 = 0.4
    # Minimum 0.4, tied between 0.8 and 0.6; ties go to the larger coverage: t = 0.6.
    c = threshold_for_cost(conf, ok, error_cost=2.0, review_cost=1.0)
    assert c.threshold == 0.6 and c.expected_cost == pytest.approx(0.4) and c.n_review == 0
    # With error cost 5 instead, t = 0.6 costs 5/5 = 1.0 and t = 0.8 stays 0.4: the answer moves to 0.8.
    c = threshold_for_cost(conf, ok, error_cost=5.0, review_cost=1.0)
    assert c.threshold == 0.8 and c.expected_cost == pytest.approx(0.4) and c.n_review == 2
    # Review dearer than any error: accept everything (cost 1 error * 1 / 5).
    c = threshold_for_cost(conf, ok, error_cost=1.0, review_cost=10.0)
    assert c.threshold == 0.6 and c.expected_cost == pytest.approx(0.2)
    # Errors ruinous, review free: every threshold down to 0.8 costs 0 (no accepted error); the tie
    # goes to the larger coverage, t = 0.8.
    c = threshold_for_cost(conf, ok, error_cost=100.0, review_cost=0.0)
    assert c.threshold == 0.8 and c.expected_cost == 0.0
    # If the most confident sample is wrong, every threshold accepts an error: with errors ruinous
    # and review cheap, accept nothing (cost 0.1 * 5 / 5 = 0.1 against at least 100 / 5 = 20).
    c = threshold_for_cost(conf, [0, 1, 1, 1, 1], error_cost=100.0, review_cost=0.1)
    assert c.threshold == np.inf and c.coverage == 0.0 and c.expected_cost == pytest.approx(0.1)
    assert c.to_dict()["value"] is None


def test_threshold_for_cost_against_brute_force(conf_correct):
    conf, ok = conf_correct
    n = conf.size
    for error_cost, review_cost in [(1.0, 0.2), (10.0, 1.0), (3.0, 0.5)]:
        c = threshold_for_cost(conf, ok, error_cost, review_cost)
        candidates = [np.inf, *np.unique(conf)]
        costs = [(error_cost * (~ok & (conf >= t)).sum() + review_cost * (conf < t).sum()) / n for t in candidates]
        best = min(costs)
        assert c.expected_cost == pytest.approx(best, abs=1e-12)
        # ties go to the larger coverage, i.e. the lowest threshold among the cheapest
        assert c.threshold == min(t for t, k in zip(candidates, costs, strict=True) if k <= best + 1e-12)


def test_evaluate_threshold_against_brute_force(conf_correct):
    conf, ok = conf_correct
    for t in (0.3, 0.5, 0.75, 0.9):
        c = evaluate_threshold(conf, ok, t, method="clopper-pearson", level=0.9)
        m = conf >= t
        assert c.n_accepted == m.sum() and c.coverage == pytest.approx(m.mean())
        assert c.accuracy == pytest.approx(ok[m].mean())
        ref = binomtest(int(ok[m].sum()), int(m.sum())).proportion_ci(confidence_level=0.9, method="exact")
        assert c.interval == pytest.approx((ref.low, ref.high), abs=1e-12)
    nothing = evaluate_threshold(conf, ok, np.inf)  # documented: inf accepts nothing
    with pytest.raises(ParameterError, match=r"threshold must lie in \[0, 1\]"):
        evaluate_threshold(conf, ok, 2.0)
    assert nothing.n_accepted == 0 and np.isnan(nothing.accuracy) and nothing.to_dict()["accuracy"] is None


def test_per_class_thresholds_against_brute_force(make_logits):
    z, y = make_logits(n=500, k=4, scale=2.0)
    s = sample_scores(z, y)
    out = per_class_thresholds(s.confidence, s.correct, s.predicted, 0.85, n_classes=5)
    assert out[4] is None  # class 4 does not exist in the logits, so it is never predicted
    for k in range(4):
        m = s.predicted == k
        assert out[k].threshold == _brute_threshold(s.confidence[m], s.correct[m], 0.85)


def test_selective_input_errors():
    with pytest.raises(ShapeError, match="1-D of one length"):
        aurc([0.5, 0.6], [True])
    with pytest.raises(ShapeError, match="at least one sample"):
        risk_coverage_curve([], [])
    with pytest.raises(ParameterError, match="NaN or infinite"):
        aurc([0.5, np.nan], [True, False])
    with pytest.raises(ParameterError, match=r"target accuracy must lie in \(0, 1\]"):
        threshold_for_accuracy([0.5], [True], 1.5)
    with pytest.raises(ParameterError, match=r"target accuracy must lie in \(0, 1\]"):
        threshold_for_accuracy([0.5], [True], 0.0)
    with pytest.raises(ParameterError, match=r"error cost must lie in \[0, 1e\+09\]"):
        threshold_for_cost([0.5], [True], -1.0, 1.0)
    with pytest.raises(ShapeError, match="predicted must have shape"):
        per_class_thresholds([0.5, 0.6], [True, True], [0], 0.9, 2)


def _lower_bounds_loop(conf: np.ndarray, ok: np.ndarray, level: float, method: str) -> tuple[np.ndarray, np.ndarray]:
    """Every distinct confidence and the lower end of scipy.stats.binomtest's interval for accepting it, a loop."""
    thresholds = np.unique(conf)
    lows = []
    for t in thresholds:
        m = conf >= t
        test = binomtest(int(ok[m].sum()), int(m.sum()))
        lows.append(test.proportion_ci(confidence_level=level, method=SCIPY_METHOD[method]).low)
    return thresholds, np.array(lows)


@pytest.mark.parametrize("method", ["wilson", "clopper-pearson"])
def test_vectorised_lower_bound_rule_against_binomtest(rng, method):
    # the rule is computed on arrays (Wilson's closed form; Clopper-Pearson through the binomial tail with
    # Chernoff and Ash bounds deciding most rows); reference: scipy.stats.binomtest(k, n).proportion_ci
    # at every distinct confidence, the lowest one whose lower bound reaches the target
    cases = 0
    for n in (1, 3, 40, 600):
        for quality in (0.6, 0.9, 0.99):
            conf = np.round(rng.uniform(0.2, 1.0, n), 2)  # ties included
            ok = rng.random(n) < np.clip(conf + quality - 0.8, 0.0, 1.0)
            for level in (0.9, 0.95):
                thresholds, lows = _lower_bounds_loop(conf, ok, level, method)
                for target in (0.5, 0.8, 0.9, 0.95, 0.99):
                    reached = thresholds[lows >= target - 1e-12]
                    want = reached.min() if reached.size else np.inf
                    c = threshold_for_accuracy(conf, ok, target, level=level, method=method, use_lower_bound=True)
                    assert c.threshold == want, (n, quality, target, level)
                    assert c.feasible == np.isfinite(want)
                    if c.feasible:
                        assert c.interval[0] >= target - 1e-12
                    cases += c.feasible
    assert cases > 20  # the comparison covers feasible choices, not only empty ones


def test_lower_bound_rule_edges():
    # all right: the Clopper-Pearson lower bound of n out of n is (alpha / 2) ** (1 / n) (Clopper and Pearson 1934)
    conf = np.linspace(1.0, 0.5, 200)
    ok = np.ones(200, bool)
    c = threshold_for_accuracy(conf, ok, 0.98, method="clopper-pearson", use_lower_bound=True)
    n_needed = int(np.ceil(np.log(0.025) / np.log(0.98)))  # smallest n with 0.025 ** (1 / n) >= 0.98
    assert c.n_accepted == 200 and 0.025 ** (1 / 200) >= 0.98 and n_needed <= 200
    few = threshold_for_accuracy(conf[:100], ok[:100], 0.98, method="clopper-pearson", use_lower_bound=True)
    assert few.feasible == (0.025 ** (1 / 100) >= 0.98 - 1e-12)
    # target 1: no finite sample reaches a lower bound of 1
    assert not threshold_for_accuracy(conf, ok, 1.0, use_lower_bound=True).feasible
    with pytest.raises(ParameterError, match="method must be"):
        threshold_for_accuracy(conf, ok, 0.9, method="normal", use_lower_bound=True)


def test_the_tail_bounds_the_clopper_pearson_rule_relies_on():
    # The vectorised Clopper-Pearson rule decides most rows by two bounds on P(X >= k), X ~ Bin(n, t),
    # k / n = lam > t, D = KL(Bernoulli(lam) || Bernoulli(t)) (the bounds as recalled from memory:
    # Chernoff's bound, and Ash 1990, Lemma 4.7.2 / MacWilliams and Sloane 1977, Ch. 10, Lemma 7 for the
    # binomial coefficient). Checked here against scipy.stats.binom on a grid.
    from scipy import stats

    for n in (1, 2, 5, 17, 60, 250, 1000):
        k = np.arange(1, n + 1)
        for t in (0.05, 0.3, 0.5, 0.8, 0.95, 0.999):
            lam = k / n
            m = lam > t
            if not m.any():
                continue
            kk, lm = k[m], lam[m]
            with np.errstate(divide="ignore", invalid="ignore"):
                d = lm * np.log(lm / t) + np.where(lm < 1, (1 - lm) * np.log((1 - lm) / (1 - t)), 0.0)
            tail = stats.binom.sf(kk - 1, n, t)  # P(X >= k)
            assert np.all(tail <= np.exp(-n * d) * (1 + 1e-12))  # Chernoff
            inner = lm < 1
            pmf = stats.binom.pmf(kk[inner], n, t)
            lower = np.exp(-n * d[inner]) / np.sqrt(8 * n * lm[inner] * (1 - lm[inner]))
            assert np.all(pmf >= lower * (1 - 1e-12))  # Ash: P(X >= k) >= P(X = k) >= this
