"""Set-level metrics against scikit-learn, scipy and the published definitions."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special, stats
from sklearn.metrics import accuracy_score, brier_score_loss, log_loss, top_k_accuracy_score

from logitscope.analysis import (
    accuracy,
    brier,
    default_ks,
    mean_confidence,
    mean_entropy,
    nll,
    sample_scores,
    top_k_accuracies,
    top_k_accuracy,
)
from logitscope.errors import InputTypeError, LabelError, ParameterError

TEMPERATURES = (0.5, 1.0, 3.0)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_accuracy_matches_sklearn(make_logits, backend, dtype):
    z, y = make_logits(n=500, k=5, dtype=dtype)
    # reference: sklearn.metrics.accuracy_score on numpy.argmax predictions
    assert accuracy(z, y) == pytest.approx(accuracy_score(y, np.argmax(z, axis=1)), abs=1e-15)


@pytest.mark.parametrize("k_classes", [4, 6, 10])
def test_top_k_accuracy_matches_sklearn(make_logits, backend, k_classes):
    z, y = make_logits(n=800, k=k_classes, scale=1.5)
    ks = default_ks(k_classes)
    # the definition: k in (2, 3, 5) with k < K
    assert ks == tuple(k for k in (2, 3, 5) if k < k_classes)
    ranks = sample_scores(z, y, backend=backend).true_rank
    via_rank = top_k_accuracies(ranks, ks)
    assert list(via_rank) == list(ks)
    for k in ks:
        # reference: sklearn.metrics.top_k_accuracy_score (continuous logits, so no ties)
        ref = top_k_accuracy_score(y, z, k=k, labels=np.arange(k_classes))
        assert top_k_accuracy(z, y, k=k) == pytest.approx(ref, abs=1e-15)
        assert via_rank[k] == pytest.approx(ref, abs=1e-15)
    # k = 1 is the accuracy
    assert top_k_accuracy(z, y, k=1) == pytest.approx(accuracy_score(y, z.argmax(axis=1)))


def test_top_k_ties_go_to_the_lower_index():
    # documented rule (as numpy.argmax; scikit-learn prefers the higher class index on ties): among tied
    # logits the lower class index ranks first, so top-1 is the accuracy (tests/test_ties.py has more)
    z = np.array([[1.0, 1.0, 0.0]])
    assert top_k_accuracy(z, [0], k=1) == 1.0
    assert top_k_accuracy(z, [1], k=1) == 0.0 == accuracy_score([1], z.argmax(axis=1))
    assert top_k_accuracy(z, [1], k=2) == 1.0
    assert top_k_accuracy(z, [2], k=2) == 0.0


@pytest.mark.parametrize("t", TEMPERATURES)
def test_nll_matches_sklearn_log_loss(make_logits, backend, t):
    z, y = make_logits(n=600, k=7, scale=2.0, true_temperature=2.0)
    p = special.softmax(z / t, axis=1)
    # reference: sklearn.metrics.log_loss on scipy.special.softmax(z / T), natural log
    assert nll(z, y, temperature=t) == pytest.approx(log_loss(y, p, labels=np.arange(7)), rel=1e-12)


def test_nll_stays_finite_where_the_probability_underflows(backend):
    z = np.array([[0.0, 2000.0], [0.0, 0.0]])
    # log p_y of row 0 is -2000 - log(1 + e^-2000) = -2000 (scipy.special.log_softmax)
    ref = -np.mean(special.log_softmax(z, axis=1)[[0, 1], [0, 1]])
    assert nll(z, [0, 1]) == pytest.approx(ref, rel=1e-14)
    assert np.isfinite(nll(z, [0, 1]))


@pytest.mark.parametrize("t", TEMPERATURES)
def test_brier_multiclass_matches_numpy_one_hot(make_logits, backend, t):
    z, y = make_logits(n=500, k=6)
    p = special.softmax(z / t, axis=1)
    onehot = np.eye(6)[y]
    # Brier (1950): mean over rows of the sum over classes of (p_k - 1[y = k])^2
    ref = np.mean(np.sum((p - onehot) ** 2, axis=1))
    assert brier(z, y, temperature=t) == pytest.approx(ref, rel=1e-12)


def test_brier_binary_is_twice_sklearn(make_logits, backend):
    z, y = make_logits(n=400, k=2)
    p1 = special.softmax(z, axis=1)[:, 1]
    # for two classes the summed Brier score is 2 x sklearn.metrics.brier_score_loss of the positive class
    assert brier(z, y) == pytest.approx(2 * brier_score_loss(y, p1), rel=1e-12)


def test_brier_range_ends(backend):
    # confidently right: 0; confidently wrong: (1 - 0)^2 + (0 - 1)^2 = 2 (Brier 1950)
    z = np.array([[1e4, -1e4]])
    assert brier(z, [0]) == pytest.approx(0.0, abs=1e-12)
    assert brier(z, [1]) == pytest.approx(2.0, abs=1e-12)


@pytest.mark.parametrize("t", TEMPERATURES)
def test_mean_confidence_and_entropy_match_scipy(make_logits, backend, t):
    z, _ = make_logits(n=500, k=8)
    p = special.softmax(z / t, axis=1)
    # references: scipy.special.softmax and scipy.stats.entropy (nats)
    assert mean_confidence(z, temperature=t) == pytest.approx(np.mean(p.max(axis=1)), rel=1e-12)
    assert mean_entropy(z, temperature=t) == pytest.approx(np.mean(stats.entropy(p, axis=1)), rel=1e-12)


def test_metric_input_errors():
    z = np.zeros((3, 4))
    with pytest.raises(ParameterError, match=r"k must lie in \[1, 4\]"):
        top_k_accuracy(z, [0, 1, 2], k=5)
    with pytest.raises(ParameterError, match=r"k must lie in \[1, 4\]"):
        top_k_accuracy(z, [0, 1, 2], k=0)
    with pytest.raises(InputTypeError, match="k must be an integer"):
        top_k_accuracy(z, [0, 1, 2], k=True)
    with pytest.raises(LabelError, match=r"length 2 but the logits have 3 rows"):
        nll(z, [0, 1])
    with pytest.raises(LabelError, match=r"out of range at row 2"):
        brier(z, [0, 1, 4])
