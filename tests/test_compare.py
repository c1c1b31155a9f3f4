"""Checkpoint comparison against independent references."""

import numpy as np
import pytest
from scipy import stats
from sklearn.datasets import load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from logitscope import LabelError, LogitFrame, ShapeError
from logitscope.analysis import compare_checkpoints, mcnemar_exact


@pytest.mark.parametrize(("b", "c"), [(2, 10), (0, 5), (7, 7), (30, 12), (0, 0)])
def test_mcnemar_matches_exact_binomial_definition(b, c):
    # exact McNemar test (McNemar 1947): two-sided binomial(b + c, 1/2) tail on the discordant pairs,
    # reference computed with scipy.stats.binom.cdf: p = min(1, 2 * P(X <= min(b, c)))
    n = b + c
    ref = 1.0 if n == 0 else min(1.0, 2 * stats.binom.cdf(min(b, c), n, 0.5))
    assert mcnemar_exact(b, c) == pytest.approx(ref, rel=1e-12)


def _wine_checkpoints():
    # two "checkpoints" of a wine-cellar sorting model: weak and strong regularisation, out-of-fold logits
    x, y = load_wine(return_X_y=True)
    weak = make_pipeline(StandardScaler(), LogisticRegression(C=0.01, max_iter=2000))
    strong = make_pipeline(StandardScaler(), LogisticRegression(C=1.0, max_iter=2000))
    za = cross_val_predict(weak, x, y, cv=5, method="decision_function")
    zb = cross_val_predict(strong, x, y, cv=5, method="decision_function")
    return za, zb, y


def test_counts_and_rows_match_a_direct_tabulation():
    za, zb, y = _wine_checkpoints()
    c = compare_checkpoints(za, zb, y)
    ra, rb = za.argmax(1) == y, zb.argmax(1) == y  # reference: numpy argmax, the definition of a prediction
    assert c.both_right == np.sum(ra & rb)
    assert c.only_a_right == np.sum(ra & ~rb)
    assert c.only_b_right == np.sum(~ra & rb)
    assert c.both_wrong == np.sum(~ra & ~rb)
    assert c.accuracy_a == pytest.approx(ra.mean()) and c.accuracy_b == pytest.approx(rb.mean())
    np.testing.assert_array_equal(c.fixed_rows, np.flatnonzero(~ra & rb))
    np.testing.assert_array_equal(c.changed_rows, np.flatnonzero(za.argmax(1) != zb.argmax(1)))
    # mean |confidence change| against scipy.special.softmax
    from scipy.special import softmax

    ref = np.mean(np.abs(softmax(za, 1).max(1) - softmax(zb, 1).max(1)))
    assert c.mean_abs_confidence_change == pytest.approx(ref, rel=1e-10)
    assert 0.0 <= c.mcnemar_p <= 1.0


def test_frame_compare_matches_rows_by_id():
    za, zb, y = _wine_checkpoints()
    n = len(y)
    a = LogitFrame(za, labels=y)
    same_order = a.compare(LogitFrame(zb, labels=y))
    # B's rows shuffled, ids shuffled with them: the comparison must come out the same, rows of `a`
    order = np.random.default_rng(3).permutation(n)
    shuffled = a.compare(LogitFrame(zb[order], labels=y[order], ids=np.arange(n)[order]))
    assert shuffled.n_samples == same_order.n_samples == n
    # reference: a direct tabulation of numpy argmax predictions in a's row order
    ra, rb = za.argmax(1) == y, zb.argmax(1) == y
    np.testing.assert_array_equal(shuffled.fixed_rows, np.flatnonzero(~ra & rb))
    np.testing.assert_array_equal(shuffled.broken_rows, np.flatnonzero(ra & ~rb))
    assert shuffled.mcnemar_p == same_order.mcnemar_p
    with pytest.raises(ShapeError, match="not in other"):
        a.compare(LogitFrame(zb[:-2], labels=y[:-2]))
    with pytest.raises(LabelError, match="different labels"):
        a.compare(LogitFrame(zb, labels=(y + 1) % 3))
    with pytest.raises(ShapeError, match="same samples and classes"):
        compare_checkpoints(za, zb[:, :2])


def test_without_labels_only_agreement():
    za, zb, _ = _wine_checkpoints()
    c = compare_checkpoints(za, zb)
    assert c.mcnemar_p is None and c.fixed_rows is None
    assert c.agreement == pytest.approx(np.mean(za.argmax(1) == zb.argmax(1)))
