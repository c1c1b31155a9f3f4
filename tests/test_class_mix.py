"""Class-mix tests against scipy.stats, and prior re-estimation on a real prior shift (sklearn's wine)."""

from __future__ import annotations

from collections import Counter

import numpy as np
import pytest
from scipy import special, stats

from logitscope.analysis import (
    adjust_to_new_priors,
    class_counts,
    class_mix_test,
    compare_class_mix,
    estimate_priors,
    fit_temperature,
)
from logitscope.errors import ParameterError, ShapeError


@pytest.mark.parametrize(
    ("observed", "reference"),
    [
        ([30, 20, 50], [1, 1, 2]),
        ([120, 95, 80, 105, 0], [0.2, 0.2, 0.2, 0.2, 0.2]),  # an empty class
        ([5, 17, 3, 9], [10, 40, 5, 20]),  # reference given as counts
    ],
)
def test_goodness_of_fit_matches_scipy(observed, reference):
    obs = np.asarray(observed, dtype=float)
    exp = obs.sum() * np.asarray(reference, dtype=float) / np.sum(reference)
    t = class_mix_test(observed, reference, statistic="pearson")
    ref = stats.chisquare(obs, f_exp=exp)  # Pearson's chi-square, K - 1 degrees of freedom
    assert t.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert t.p_value == pytest.approx(ref.pvalue, rel=1e-10)
    assert t.dof == obs.size - 1
    np.testing.assert_allclose(t.expected, exp, rtol=1e-12)
    # Pearson residuals: their squares sum to the statistic
    assert np.sum(t.residual**2) == pytest.approx(ref.statistic, rel=1e-12)
    g = class_mix_test(observed, reference, statistic="g")
    ref_g = stats.power_divergence(obs, f_exp=exp, lambda_="log-likelihood")  # the G statistic
    assert g.statistic == pytest.approx(ref_g.statistic, rel=1e-12)
    assert g.p_value == pytest.approx(ref_g.pvalue, rel=1e-10)


def test_reference_zero_classes_are_dropped():
    t = class_mix_test([10, 0, 30, 20], [0.25, 0.0, 0.5, 0.25])
    ref = stats.chisquare([10, 30, 20], f_exp=np.array([0.25, 0.5, 0.25]) * 60)
    assert t.dof == 2
    assert t.statistic == pytest.approx(ref.statistic) and t.p_value == pytest.approx(ref.pvalue)
    with pytest.raises(ParameterError, match="reference proportion 0"):
        class_mix_test([1, 2, 3], [0.5, 0.0, 0.5])


@pytest.mark.parametrize("statistic", ["pearson", "g"])
def test_homogeneity_matches_chi2_contingency(statistic):
    a = np.array([50, 40, 30, 0, 80])
    b = np.array([30, 70, 25, 0, 60])  # class 3 absent from both: dropped
    t = compare_class_mix(a, b, statistic=statistic)
    table = np.vstack([a, b])[:, [0, 1, 2, 4]]
    lam = None if statistic == "pearson" else "log-likelihood"
    # reference: scipy.stats.chi2_contingency without Yates' correction
    ref = stats.chi2_contingency(table, correction=False, lambda_=lam)
    assert t.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert t.p_value == pytest.approx(ref.pvalue, rel=1e-10)
    assert t.dof == ref.dof == 3
    np.testing.assert_allclose(t.expected[[0, 1, 2, 4]], ref.expected_freq[1], rtol=1e-12)
    assert t.expected[3] == 0 and t.residual[3] == 0


def test_same_mix_is_not_rejected_and_a_shift_is(rng):
    pi = np.array([0.5, 0.3, 0.2])
    same = rng.multinomial(2000, pi)
    shifted = rng.multinomial(2000, [0.4, 0.3, 0.3])
    assert class_mix_test(same, pi).p_value > 0.01
    assert class_mix_test(shifted, pi).p_value < 1e-6
    # the residual points at the classes that moved
    r = class_mix_test(shifted, pi).residual
    assert r[0] < -3 and r[2] > 3


def test_class_counts_matches_counter(rng):
    c = rng.integers(0, 6, 500)
    counter = Counter(c.tolist())  # reference: collections.Counter
    assert class_counts(c, 7).tolist() == [counter.get(k, 0) for k in range(7)]
    with pytest.raises(ParameterError, match=r"must lie in \[0, 6\)"):
        class_counts(np.r_[c, 6], 6)


def test_adjust_to_new_priors_is_bayes_rule(make_logits):
    z, _ = make_logits(n=100, k=4)
    pt = np.array([0.4, 0.3, 0.2, 0.1])
    pn = np.array([0.1, 0.2, 0.3, 0.4])
    adjusted = special.softmax(adjust_to_new_priors(z, pt, pn), axis=1)
    # Saerens et al. (2002), Eq. 2.4: p_new(k|x) proportional to p(k|x) * pi_new_k / pi_train_k
    w = special.softmax(z, axis=1) * (pn / pt)
    np.testing.assert_allclose(adjusted, w / w.sum(axis=1, keepdims=True), rtol=1e-12)


def test_estimate_priors_recovers_a_shift_on_wine():
    from sklearn.datasets import load_wine
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import cross_val_predict, train_test_split
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    x, y = load_wine(return_X_y=True)  # bundled with scikit-learn
    x_fit, x_new, y_fit, y_new = train_test_split(x, y, test_size=0.5, stratify=y, random_state=0)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1, max_iter=2000))
    # calibrate first (the EM assumes calibrated probabilities): temperature from out-of-fold logits
    t = fit_temperature(cross_val_predict(model, x_fit, y_fit, cv=5, method="decision_function"), y_fit).temperature
    model.fit(x_fit, y_fit)
    train_priors = np.bincount(y_fit) / y_fit.size
    # a shifted batch: draw classes with new priors, then a held-out wine sample of each class
    rng = np.random.default_rng(1)
    classes = rng.choice(3, 2000, p=[0.6, 0.3, 0.1])
    rows = np.array([rng.choice(np.flatnonzero(y_new == c)) for c in classes])
    batch_priors = np.bincount(y_new[rows], minlength=3) / rows.size
    est = estimate_priors(model.decision_function(x_new[rows]), train_priors, temperature=t)
    assert est.converged
    np.testing.assert_allclose(est.priors.sum(), 1.0)
    # recovers the batch's class mix to a few percent, where the training mix is off by more than 0.25
    assert np.max(np.abs(est.priors - batch_priors)) < 0.03
    assert np.max(np.abs(train_priors - batch_priors)) > 0.25


def test_class_mix_input_errors():
    with pytest.raises(ShapeError, match="1-D of one length"):
        class_mix_test([1, 2], [1, 2, 3])
    with pytest.raises(ParameterError, match="non-negative"):
        class_mix_test([1, -2], [1, 1])
    with pytest.raises(ParameterError, match="non-negative"):
        compare_class_mix([0, 0], [1, 1])
    with pytest.raises(ParameterError, match="train_priors must be 3 positive numbers"):
        estimate_priors(np.zeros((4, 3)), [0.5, 0.5])
    with pytest.raises(ParameterError, match="priors must be 2 positive numbers"):
        adjust_to_new_priors(np.zeros((4, 2)), [0.5, 0.5], [1.0, 0.0])
