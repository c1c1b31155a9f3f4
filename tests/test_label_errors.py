"""Label-issue rankings against direct per-sample re-implementations of the published definitions.

References: Northcutt, Jiang and Chuang (2021), "Confident Learning: Estimating Uncertainty in
Dataset Labels", JAIR 70 — self-confidence and normalized margin (Sec. 3.2 ranking), per-class
thresholds t_j = mean of p_j over the samples labelled j (Eq. 2), and the confident joint (Eq. 1).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special

from logitscope.analysis import confident_joint, mean_given_probability, rank_doubtful_labels
from logitscope.errors import LabelError, ParameterError


def _noisy_problem(make_logits, n=400, k=5, flips=30, seed=5):
    z, y_true = make_logits(n=n, k=k, scale=3.0)
    # make the model mostly right, then flip some given labels (the planted label errors)
    z = z + 4.0 * np.eye(k)[y_true]
    rng = np.random.default_rng(seed)
    flipped = rng.choice(n, flips, replace=False)
    y = y_true.copy()
    y[flipped] = (y[flipped] + rng.integers(1, k, flips)) % k
    return z, y, flipped


def _reference(p: np.ndarray, y: np.ndarray):
    """Per-sample loops over the paper's definitions."""
    n, k = p.shape
    thresholds = np.full(k, np.nan)
    for j in range(k):
        members = [i for i in range(n) if y[i] == j]
        if members:
            thresholds[j] = sum(p[i, j] for i in members) / len(members)  # Eq. 2
    joint = np.zeros((k, k), dtype=int)
    assigned = np.full(n, -1)
    for i in range(n):
        above = [j for j in range(k) if not np.isnan(thresholds[j]) and p[i, j] >= thresholds[j]]
        if above:
            j_star = max(above, key=lambda j: p[i, j])  # argmax over the classes above threshold (Eq. 1)
            joint[y[i], j_star] += 1
            assigned[i] = j_star
    self_conf = np.array([p[i, y[i]] for i in range(n)])
    margin = np.array([p[i, y[i]] - max(p[i, j] for j in range(k) if j != y[i]) for i in range(n)])
    best_other = np.array([max((j for j in range(k) if j != y[i]), key=lambda j: p[i, j]) for i in range(n)])
    return thresholds, joint, assigned, self_conf, margin, best_other


@pytest.mark.parametrize("t", [1.0, 2.0])
def test_against_the_papers_definitions(make_logits, backend, t):
    z, y, _ = _noisy_problem(make_logits)
    p = special.softmax(z / t, axis=1)  # scipy.special.softmax
    thresholds, joint, assigned, self_conf, margin, best_other = _reference(p, y)

    np.testing.assert_allclose(mean_given_probability(z, y, temperature=t), thresholds, rtol=1e-12)
    np.testing.assert_array_equal(confident_joint(z, y, temperature=t), joint)

    r = rank_doubtful_labels(z, y, method="given_probability", temperature=t)
    np.testing.assert_array_equal(r.index, np.argsort(self_conf, kind="stable"))
    np.testing.assert_allclose(r.score, self_conf[r.index], rtol=1e-12)
    np.testing.assert_array_equal(r.suggested, best_other[r.index])

    r = rank_doubtful_labels(z, y, method="label_margin", temperature=t)
    np.testing.assert_array_equal(r.index, np.argsort(margin, kind="stable"))
    np.testing.assert_allclose(r.score, margin[r.index], rtol=1e-10, atol=1e-14)
    np.testing.assert_array_equal(r.suggested, best_other[r.index])

    r = rank_doubtful_labels(z, y, method="confident_learning", temperature=t)
    flagged = np.flatnonzero((assigned >= 0) & (assigned != y))  # off-diagonal of the confident joint
    assert len(r) == flagged.size == joint.sum() - np.trace(joint)
    np.testing.assert_array_equal(r.index, flagged[np.argsort(margin[flagged], kind="stable")])
    np.testing.assert_array_equal(r.suggested, assigned[r.index])
    np.testing.assert_allclose(r.score, margin[r.index], rtol=1e-10, atol=1e-14)


def test_planted_label_errors_rank_first(make_logits):
    z, y, flipped = _noisy_problem(make_logits, flips=30)
    for method in ("confident_learning", "given_probability", "label_margin"):
        top = rank_doubtful_labels(z, y, method=method).top(30)
        assert top.method == method
        # the model is right on the true labels (logit bonus 4), so the flips stand out; confident
        # learning returns only the flagged samples, the other two rank every sample
        assert len(top) == 30 or method == "confident_learning"
        hits = np.isin(top.index, flipped).sum()
        assert hits >= 25 and hits >= 0.9 * len(top), (method, hits, len(top))


def test_absent_class_gets_no_threshold(rng):
    z = rng.normal(size=(60, 4))
    y = rng.integers(0, 3, 60)  # class 3 never given as a label
    thr = mean_given_probability(z, y)
    assert np.isnan(thr[3]) and np.all(np.isfinite(thr[:3]))
    joint = confident_joint(z, y)
    assert joint[:, 3].sum() == 0 and joint[3].sum() == 0
    r = rank_doubtful_labels(z, y)
    assert not np.any(r.suggested == 3)


def test_label_errors_input_errors(rng):
    z = rng.normal(size=(10, 3))
    with pytest.raises(ParameterError, match="method must be"):
        rank_doubtful_labels(z, np.zeros(10, int), method="votes")
    with pytest.raises(LabelError, match="out of range"):
        confident_joint(z, np.full(10, 3))
