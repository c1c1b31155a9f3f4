"""Confusion matrices against scikit-learn and an argsort loop."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.metrics import confusion_matrix as sk_confusion_matrix

from logitscope.analysis import confusion_matrix, largest_confusions, normalize_rows, top_k_confusion
from logitscope.errors import LabelError, ParameterError, ShapeError


def test_confusion_matrix_matches_sklearn(make_logits):
    z, y = make_logits(n=700, k=6, scale=1.5)
    pred = z.argmax(axis=1)
    # reference: sklearn.metrics.confusion_matrix (rows true, columns predicted)
    ref = sk_confusion_matrix(y, pred, labels=np.arange(6))
    np.testing.assert_array_equal(confusion_matrix(y, pred, 6), ref)
    # a class never seen in either still gets its row and column
    np.testing.assert_array_equal(confusion_matrix(y, pred, 8), sk_confusion_matrix(y, pred, labels=np.arange(8)))


def test_normalize_rows_matches_sklearn():
    y = np.array([0, 0, 1, 1, 1, 3])
    pred = np.array([0, 1, 1, 2, 1, 0])
    m = confusion_matrix(y, pred, 4)
    # reference: sklearn normalize="true" (a class with no samples gives a row of zeros there too)
    ref = sk_confusion_matrix(y, pred, labels=np.arange(4), normalize="true")
    np.testing.assert_allclose(normalize_rows(m), ref, rtol=1e-15)


def _top_k_loop(z: np.ndarray, y: np.ndarray, k: int) -> np.ndarray:
    kk = z.shape[1]
    out = np.zeros((kk, kk), dtype=int)
    for i in range(z.shape[0]):
        for j in np.argsort(-z[i])[:k]:  # the k largest logits, by numpy.argsort
            out[y[i], j] += 1
    return out


@pytest.mark.parametrize("k", [1, 2, 3, 6])
def test_top_k_confusion_against_an_argsort_loop(make_logits, k):
    z, y = make_logits(n=300, k=6, scale=1.5)
    got = top_k_confusion(z, y, k=k)
    np.testing.assert_array_equal(got, _top_k_loop(z, y, k))
    # each sample adds k entries to its true class's row
    np.testing.assert_array_equal(got.sum(axis=1), k * np.bincount(y, minlength=6))
    if k == 1:  # without ties this is the ordinary confusion matrix (sklearn)
        np.testing.assert_array_equal(got, sk_confusion_matrix(y, z.argmax(axis=1), labels=np.arange(6)))


def test_top_k_confusion_float32(make_logits):
    z, y = make_logits(n=200, k=5, dtype=np.float32)
    np.testing.assert_array_equal(top_k_confusion(z, y, k=2), _top_k_loop(z, y, 2))


def test_largest_confusions_against_sorting(make_logits):
    z, y = make_logits(n=900, k=7, scale=1.0)
    m = confusion_matrix(y, z.argmax(axis=1), 7)
    pairs = largest_confusions(m, n=10)
    # reference: every off-diagonal cell sorted by count descending, then by (true, other)
    cells = sorted(
        ((-int(m[i, j]), i, j) for i in range(7) for j in range(7) if i != j and m[i, j] > 0),
    )[:10]
    assert [(p.true, p.other, p.count) for p in pairs] == [(i, j, -c) for c, i, j in cells]
    for p in pairs:
        assert p.rate == pytest.approx(m[p.true, p.other] / m[p.true].sum())
    # with a top-k matrix the rate divides by the class size, not the row sum
    tk = top_k_confusion(z, y, k=3)
    sizes = np.bincount(y, minlength=7)
    for p in largest_confusions(tk, n=5, class_counts=sizes):
        assert p.rate == pytest.approx(tk[p.true, p.other] / sizes[p.true])
        assert 0 < p.rate <= 1


def test_confusion_input_errors():
    with pytest.raises(LabelError, match="out of range at row 1"):
        confusion_matrix([0, 3], [0, 1], 3)
    with pytest.raises(LabelError, match=r"predicted.*out of range"):
        confusion_matrix([0, 1], [0, 5], 3)
    with pytest.raises(LabelError, match="predicted have length 1"):
        confusion_matrix([0, 1], [0], 3)
    with pytest.raises(ParameterError, match=r"k must lie in \[1, 3\]"):
        top_k_confusion(np.zeros((2, 3)), [0, 1], k=4)
    with pytest.raises(ShapeError, match="must be square"):
        largest_confusions(np.zeros((2, 3)))
    with pytest.raises(ShapeError, match="must be 2-D"):
        normalize_rows([1, 2, 3])
