"""A real model end to end: multinomial logistic regression on scikit-learn's bundled digits.

Out-of-fold logits (cross_val_predict with method="decision_function") go through the LogitFrame;
the numbers are checked against scikit-learn's metrics, torchmetrics' ECE and scipy's optimiser.
The bundled mail-room demo (the same digits with deliberately flipped labels) checks that the
label-issue ranking finds the flips.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import optimize, special, stats
from sklearn.metrics import accuracy_score, log_loss, top_k_accuracy_score

from logitscope import LogitFrame, load_demo
from logitscope.analysis import rank_doubtful_labels


@pytest.fixture(scope="module")
def digits():
    from sklearn.datasets import load_digits
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import StratifiedKFold, cross_val_predict
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    x, y = load_digits(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=3000))
    cv = StratifiedKFold(n_splits=5, shuffle=True, random_state=0)
    z = cross_val_predict(model, x, y, cv=cv, method="decision_function")
    p = cross_val_predict(model, x, y, cv=cv, method="predict_proba")  # same folds, same fits
    return z, p, y


def test_frame_probabilities_are_sklearns(digits):
    z, p, y = digits
    f = LogitFrame(z, labels=y)
    # multinomial logistic regression: predict_proba = softmax(decision_function), fold by fold
    np.testing.assert_allclose(f.probabilities(), p, rtol=1e-8, atol=1e-12)


def test_summary_against_sklearn_and_torchmetrics(digits):
    torch = pytest.importorskip("torch")
    tm = pytest.importorskip("torchmetrics.functional.classification")
    z, p, y = digits
    s = LogitFrame(z, labels=y, classes=[str(d) for d in range(10)]).summary()
    assert s["n_samples"] == 1797 and s["n_classes"] == 10
    assert s["accuracy"] == pytest.approx(accuracy_score(y, p.argmax(axis=1)), abs=1e-15)
    for k in (2, 3, 5):
        assert s["top_k_accuracy"][str(k)] == pytest.approx(top_k_accuracy_score(y, p, k=k), abs=1e-15)
    assert s["nll"] == pytest.approx(log_loss(y, p), rel=1e-8)
    assert s["brier"] == pytest.approx(np.mean(np.sum((p - np.eye(10)[y]) ** 2, axis=1)), rel=1e-8)
    assert s["mean_entropy"] == pytest.approx(np.mean(stats.entropy(p, axis=1)), rel=1e-8)  # scipy
    # torchmetrics' calibration error (15 equal-width bins; it casts confidences to float32)
    conf = p.max(axis=1)
    assert np.all(conf.astype(np.float32) < 1.0)  # no confidence rounds onto torchmetrics' extra bin at 1.0
    target = torch.from_numpy(y)
    for key, norm in (("ece", "l1"), ("mce", "max")):
        ref = float(tm.multiclass_calibration_error(torch.from_numpy(p), target, 10, n_bins=15, norm=norm))
        assert s[key] == pytest.approx(ref, abs=1e-6), key
    # the model is a decent digit reader: a sanity bound from the data set, common practice
    assert s["accuracy"] > 0.9


def test_temperature_fit_against_scipy(digits):
    z, _, y = digits
    f = LogitFrame(z, labels=y)
    fit = f.fit_temperature()

    def nll(t: float) -> float:
        return float(-np.mean(special.log_softmax(z / t, axis=1)[np.arange(y.size), y]))

    # reference: scipy.optimize.minimize_scalar, bounded, tight xatol
    ref = optimize.minimize_scalar(nll, bounds=(0.05, 20), method="bounded", options={"xatol": 1e-10})
    assert fit.temperature == pytest.approx(ref.x, rel=1e-4)
    assert fit.nll_after == pytest.approx(ref.fun, rel=1e-8) and fit.nll_after <= fit.nll_before
    cal = f.calibrated()
    assert cal.temperature == fit.temperature
    assert cal.summary()["nll"] == pytest.approx(ref.fun, rel=1e-8)


def test_threshold_on_the_digits(digits):
    z, p, y = digits
    s = LogitFrame(z, labels=y).summary(target_accuracy=0.99)
    conf, ok = p.max(axis=1), p.argmax(axis=1) == y
    # brute force: the lowest confidence t with accuracy(conf >= t) >= 0.99
    t = min(c for c in np.unique(conf) if ok[conf >= c].mean() >= 0.99)
    assert s["threshold"]["value"] == pytest.approx(t, rel=1e-8)
    assert s["threshold"]["coverage"] == pytest.approx(np.mean(conf >= t))
    assert 0.0 < s["threshold"]["coverage"] < 1.0


def test_mailroom_doubtful_labels_find_the_flips():
    f = load_demo("mailroom")
    flipped = f.meta["was_flipped"].to_numpy()
    before = f.meta["keyed_before_flip"].to_numpy()
    n_flips = int(flipped.sum())
    assert n_flips > 0
    # confident learning flags few samples, and most of them are flips; most flips are flagged
    cl = rank_doubtful_labels(f.logits, f.labels, method="confident_learning")
    hits = int(flipped[cl.index].sum())
    assert hits >= 0.6 * n_flips and hits >= 0.8 * len(cl)
    # where a flagged sample is a flip, the suggested label is the digit keyed before the flip
    m = flipped[cl.index]
    assert np.mean(cl.suggested[m] == before[cl.index][m]) >= 0.9
    # ranking every sample: most flips are among the first n_flips, all of them well inside the first 2 x n_flips
    for method in ("given_probability", "label_margin"):
        r = rank_doubtful_labels(f.logits, f.labels, method=method)
        assert flipped[r.index[:n_flips]].sum() >= 0.75 * n_flips, method
        assert flipped[r.index[: 2 * n_flips]].sum() >= 0.95 * n_flips, method
