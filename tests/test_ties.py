"""One tie rule everywhere: among tied logits the lowest class index wins (as numpy.argmax).

Accuracy, top-k accuracy, the rank of the true class, the confusion matrix and the top-k confusion
matrix all follow it, so top-1 always equals accuracy. AURC, the risk-coverage curve and the
thresholds group tied confidences, since a threshold cannot split them.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.metrics import confusion_matrix as sk_confusion_matrix
from sklearn.metrics import top_k_accuracy_score

from logitscope import LogitFrame
from logitscope.analysis import (
    accuracy,
    aurc,
    confusion_matrix,
    risk_coverage_curve,
    sample_scores,
    threshold_for_accuracy,
    top_k_accuracies,
    top_k_accuracy,
    top_k_confusion,
)


def _ranked(row: np.ndarray) -> list[int]:
    """Classes of one row best first: larger logit first, the lower index first among equals (a plain loop)."""
    return sorted(range(row.size), key=lambda j: (-float(row[j]), j))


def _tied(rng: np.random.Generator, n: int = 800, k: int = 6) -> tuple[np.ndarray, np.ndarray]:
    z = rng.integers(0, 3, size=(n, k)).astype(np.float64)  # three values per entry: ties everywhere
    return z, rng.integers(0, k, n)


def test_constant_logits_k5(backend):
    # K = 5, every logit equal, balanced labels: class 0 wins every row, so accuracy is 1/5;
    # the top two are classes 0 and 1, so top-2 is 2/5 (the issue measured top-2 = 1.00 before)
    z = np.zeros((100, 5))
    y = np.tile(np.arange(5), 20)
    assert accuracy(z, y) == pytest.approx(0.2)
    assert top_k_accuracy(z, y, k=1) == pytest.approx(0.2)
    assert top_k_accuracy(z, y, k=2) == pytest.approx(0.4)
    s = sample_scores(z, y, backend=backend)
    assert top_k_accuracies(s.true_rank, (1, 2, 5)) == pytest.approx({1: 0.2, 2: 0.4, 5: 1.0})
    np.testing.assert_array_equal(s.true_rank, y + 1)
    # reference: scikit-learn's top_k_accuracy_score; it breaks ties the other way (higher index first),
    # but with balanced labels both rules give k / K
    for k in (1, 2, 3):
        assert top_k_accuracy(z, y, k=k) == pytest.approx(top_k_accuracy_score(y, z, k=k, labels=np.arange(5)))


@pytest.mark.parametrize("k", [1, 2, 3, 5])
def test_top_k_on_tied_data_against_sklearn_and_a_loop(rng, backend, k):
    z, y = _tied(rng)
    kk = z.shape[1]
    ours = top_k_accuracy(z, y, k=k)
    # reference 1: a per-sample loop over the documented rule
    loop = np.mean([y[i] in _ranked(z[i])[:k] for i in range(y.size)])
    assert ours == pytest.approx(loop, abs=0)
    # reference 2: scikit-learn's top_k_accuracy_score puts the higher class index first among ties;
    # reversing the class order (column j becomes K - 1 - j) makes its rule ours
    assert ours == pytest.approx(top_k_accuracy_score(kk - 1 - y, z[:, ::-1], k=k, labels=np.arange(kk)), abs=1e-15)
    # the per-sample rank of the true class follows the same rule on both backends
    s = sample_scores(z, y, backend=backend)
    ranks = np.array([_ranked(z[i]).index(y[i]) + 1 for i in range(y.size)])
    np.testing.assert_array_equal(s.true_rank, ranks)
    assert top_k_accuracies(s.true_rank, (k,))[k] == pytest.approx(ours, abs=0)


def test_top_1_equals_accuracy_on_tied_data(rng, backend):
    z, y = _tied(rng, k=4)
    s = sample_scores(z, y, backend=backend)
    # reference: numpy.argmax takes the first of tied maxima
    assert accuracy(z, y) == np.mean(np.argmax(z, axis=1) == y)
    assert top_k_accuracy(z, y, k=1) == accuracy(z, y) == np.mean(s.true_rank == 1) == np.mean(s.correct)
    frame = LogitFrame(z, labels=y)
    assert frame.summary()["accuracy"] == pytest.approx(accuracy(z, y), abs=0)


@pytest.mark.parametrize("k", [1, 2, 4, 6])
def test_top_k_confusion_on_tied_data(rng, k):
    z, y = _tied(rng, n=500)
    kk = z.shape[1]
    got = top_k_confusion(z, y, k=k)
    want = np.zeros((kk, kk), dtype=np.int64)
    for i in range(y.size):  # reference: a loop over the documented rule
        for j in _ranked(z[i])[:k]:
            want[y[i], j] += 1
    np.testing.assert_array_equal(got, want)
    if k == 1:
        # reference: scikit-learn's confusion_matrix of the numpy.argmax predictions
        np.testing.assert_array_equal(got, sk_confusion_matrix(y, z.argmax(axis=1), labels=np.arange(kk)))
        np.testing.assert_array_equal(got, confusion_matrix(y, z.argmax(axis=1), kk))
    # the diagonal counts the samples whose label is in the top k: top-k accuracy times the class size
    assert np.trace(got) == round(top_k_accuracy(z, y, k=k) * y.size)


def _aurc_grouped_loop(conf: np.ndarray, ok: np.ndarray) -> float:
    """Mean over samples of the selective risk of the threshold at the sample's own confidence.

    Each sample is accepted at the threshold equal to its confidence, together with every sample at
    least as confident; averaging that risk over the samples is the area under the risk-coverage
    step curve (Geifman, Uziel and El-Yaniv 2019) with tied confidences accepted together.
    """
    total = 0.0
    for c in conf:
        accepted = conf >= c
        total += float(np.mean(~ok[accepted]))
    return total / conf.size


def test_aurc_groups_ties(rng):
    conf = np.round(rng.uniform(0.3, 1.0, 400), 1)  # eight distinct values: ties everywhere
    ok = rng.random(400) < conf
    assert aurc(conf, ok) == pytest.approx(_aurc_grouped_loop(conf, ok), rel=1e-12)
    # a constant confidence cannot rank anything: AURC is the error rate (the area of a flat curve)
    flat = np.full(400, 0.7)
    assert aurc(flat, ok) == pytest.approx(np.mean(~ok), rel=1e-12)
    # the order of tied rows does not matter
    perm = rng.permutation(400)
    assert aurc(conf[perm], ok[perm]) == pytest.approx(aurc(conf, ok), rel=1e-12)
    # AURC is the area under the curve risk_coverage_curve draws: steps at the distinct thresholds
    rc = risk_coverage_curve(conf, ok)
    steps = np.diff(np.r_[0, rc.n_accepted]) / rc.n_total
    assert aurc(conf, ok) == pytest.approx(float(np.sum(steps * rc.risk)), rel=1e-12)


def test_threshold_never_splits_ties(rng):
    conf = np.round(rng.uniform(0.5, 1.0, 300), 1)
    ok = rng.random(300) < conf
    c = threshold_for_accuracy(conf, ok, 0.8)
    accepted = conf >= c.threshold
    assert c.n_accepted == accepted.sum()  # every sample at the threshold's confidence is accepted
    assert c.accuracy == pytest.approx(ok[accepted].mean())
