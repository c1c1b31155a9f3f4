"""LogitFrame under hostile or mistaken input: own copies, probabilities passed as logits, strings, odd ids."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import special

from logitscope import LogitFrame
from logitscope.errors import (
    ClassNameError,
    InputTypeError,
    LabelError,
    LooksLikeProbabilitiesWarning,
    NonFiniteError,
    ParameterError,
    ShapeError,
)

TEAMS = ["billing", "password reset", "hardware"]


# --------------------------------------------------------------------------- the frame's own copies


def test_writing_into_the_callers_arrays_leaves_the_frame_as_it_was(rng):
    z = rng.normal(size=(30, 3))
    y = rng.integers(0, 3, 30)
    ids = np.arange(100, 130)
    images = rng.integers(0, 255, (30, 4, 4), dtype=np.uint8)
    f = LogitFrame(z, labels=y, ids=ids, images=images)
    before = f.summary()
    expected = special.softmax(z, axis=1)  # scipy, on the values at construction
    z[:] = np.nan
    y[:] = 0
    ids[:] = 7
    images[:] = 0
    np.testing.assert_allclose(f.probabilities(), expected, rtol=1e-12)
    assert f.summary() == before
    assert len(set(f.ids.tolist())) == 30 and f.payload.data.max() > 0
    for arr in (f.logits, f.labels, f.ids, f.payload.data):
        assert not arr.flags.writeable
        with pytest.raises(ValueError, match="read-only"):
            arr[0] = 0


def test_writing_into_a_torch_tensor_in_place_leaves_the_frame_as_it_was(rng):
    torch = pytest.importorskip("torch")
    t = torch.randn(20, 4, generator=torch.Generator().manual_seed(0))
    expected = torch.softmax(t, dim=1).numpy().copy()  # torch's softmax before the change
    f = LogitFrame(t, labels=torch.zeros(20, dtype=torch.int64))
    t.add_(float("nan"))  # an in-place op, as a training loop would do
    np.testing.assert_allclose(f.probabilities(), expected, rtol=1e-6)
    assert np.all(np.isfinite(f.logits))


def test_copy_false_shares_the_logits_and_nothing_else(rng):
    z = rng.normal(size=(10, 3)).astype(np.float32)
    y = rng.integers(0, 3, 10)
    f = LogitFrame(z, labels=y, copy=False)
    assert np.shares_memory(f.logits, z) and not f.logits.flags.writeable
    assert not np.shares_memory(f.labels, y) and not np.shares_memory(f.ids, np.arange(10))
    df = pd.DataFrame(z, columns=TEAMS)
    assert not np.shares_memory(LogitFrame(df).logits, df.to_numpy())


# --------------------------------------------------------------------------- probabilities passed as logits


def test_probabilities_passed_as_logits_warn_and_name_from_probabilities():
    from sklearn.datasets import load_iris
    from sklearn.linear_model import LogisticRegression
    from sklearn.metrics import log_loss

    x, y = load_iris(return_X_y=True)
    p = LogisticRegression(max_iter=1000).fit(x, y).predict_proba(x)
    with pytest.warns(LooksLikeProbabilitiesWarning, match="from_probabilities"):
        wrong = LogitFrame(p, labels=y)
    right = LogitFrame.from_probabilities(p, labels=y)
    # the numbers the warning is about: sklearn's log_loss of the model's own probabilities ...
    assert right.summary()["nll"] == pytest.approx(log_loss(y, p), rel=1e-9)
    # ... against the log loss of softmax(p), which is what taking p as logits computes
    assert wrong.summary()["nll"] == pytest.approx(log_loss(y, special.softmax(p, axis=1)), rel=1e-9)
    assert wrong.summary()["nll"] > 3 * right.summary()["nll"]
    with pytest.warns(LooksLikeProbabilitiesWarning):
        LogitFrame(p.astype(np.float32))


def test_logits_and_log_probabilities_do_not_warn(rng):
    z = rng.normal(size=(3000, 4))
    p = special.softmax(z, axis=1)
    late = p.copy()
    late[2500] = [0.5, 0.5, 0.5, -0.5]  # one row (past the first block looked at) is no probability vector
    with warnings.catch_warnings():
        warnings.simplefilter("error", LooksLikeProbabilitiesWarning)
        LogitFrame(z)
        LogitFrame(np.log(p))  # log-probabilities are logits
        LogitFrame(late)
        LogitFrame([[1.5, -0.5], [0.2, 0.8]])  # sums to one but negative
        LogitFrame.from_probabilities(p)


# --------------------------------------------------------------------------- strings taken apart


@pytest.mark.parametrize(
    ("kwargs", "needle"),
    [
        ({"classes": "abcde"}, "classes must be a sequence of items, got a single string"),
        ({"classes": np.array("abcde")}, "classes must be one-dimensional"),
        ({"classes": np.array([list("abcde")])}, "classes must be one-dimensional"),  # 2-D, shape (1, 5)
        ({"classes": [["a", "b"], "c", "d", "e", "f"]}, "item 0 is a list"),
        ({"classes": {"a", "b", "c", "d", "e"}}, "ordered sequence"),
        ({"texts": "hello"}, "texts must be a sequence of items, got a single string"),
        ({"texts": np.array("hello")}, "texts must be one-dimensional"),
        ({"image_paths": "a.png"}, "image_paths must be a sequence of items"),
        ({"labels": "aabba", "classes": ["a", "b", "c", "d", "e"]}, "labels must be a sequence"),
    ],
)
def test_strings_are_not_taken_as_lists_of_characters(kwargs, needle):
    with pytest.raises(InputTypeError, match=needle):
        LogitFrame(np.zeros((5, 5)), **kwargs)


def test_numeric_class_names_are_still_names():
    # scikit-learn's classes_ may be integers or floats: they become names, as str() writes them
    assert LogitFrame(np.array([[0.0, 1.0, 2.0]]), classes=np.array([0.0, 1.0, 2.5])).classes == ("0.0", "1.0", "2.5")
    assert LogitFrame(np.array([[0.0, 1.0]]), classes=[np.int64(3), 7]).classes == ("3", "7")


def test_integer_image_paths_name_the_rows():
    with pytest.raises(InputTypeError, match=r"image_paths must be file paths.*rows 1, 3 \(first int 7\)"):
        LogitFrame(np.zeros((4, 2)), image_paths=["a.png", 7, "c.png", 8])
    from pathlib import Path

    f = LogitFrame(np.zeros((2, 2)), image_paths=[Path("scans/a.png"), "scans/b.png"])
    assert f.payload.data == ("scans/a.png", "scans/b.png")


# --------------------------------------------------------------------------- parameters and labels


@pytest.mark.parametrize("atol", [float("nan"), -1e-3, 1.0, float("inf")])
def test_from_probabilities_refuses_a_meaningless_tolerance(atol):
    with pytest.raises(ParameterError, match=r"atol.*must lie in \[0, 1\)"):
        LogitFrame.from_probabilities([[0.2, 0.8]], atol=atol)
    with pytest.raises(InputTypeError, match="atol must be a number"):
        LogitFrame.from_probabilities([[0.2, 0.8]], atol="tight")  # type: ignore[arg-type]


def test_string_labels_without_classes_infer_sorted_classes(rng):
    from sklearn.preprocessing import LabelEncoder

    names = np.array(["shipping", "billing", "hardware", "billing", "shipping", "hardware"])
    z = rng.normal(size=(6, 3))
    f = LogitFrame(z, labels=names)
    enc = LabelEncoder().fit(names)  # scikit-learn's encoder: sorted classes, labels as their positions
    assert f.classes == tuple(enc.classes_)
    np.testing.assert_array_equal(f.labels, enc.transform(names))
    # the default names keep their column order (numeric order, not the sorted strings "0", "1", "10", "2")
    g = LogitFrame(rng.normal(size=(3, 11)), labels=["10", "2", "0"])
    assert g.classes[:3] == ("0", "1", "2") and g.labels.tolist() == [10, 2, 0]
    with pytest.raises(ClassNameError, match=r"labels name 2 classes \('billing', 'shipping'\).*3 columns.*classes="):
        LogitFrame(z, labels=["billing", "shipping"] * 3)


def test_one_dimensional_scores_say_how_to_pass_a_binary_model(rng):
    s = rng.normal(size=8)
    with pytest.raises(ShapeError, match=r"1-D.*binary=True.*from_probabilities"):
        LogitFrame(s)
    # the way the message names: a single log-odds column, softmax([0, s]) = sigmoid (scipy.special.expit)
    np.testing.assert_allclose(LogitFrame(s, binary=True).probabilities()[:, 1], special.expit(s), rtol=1e-12)


def test_a_label_of_uint64_max_is_shown_as_it_is():
    big = np.array([0, np.iinfo(np.uint64).max], dtype=np.uint64)
    with pytest.raises(LabelError, match=r"out of range at row 1 \(values \[18446744073709551615\]\)"):
        LogitFrame(np.zeros((2, 2)), labels=big)
    with pytest.raises(LabelError, match=r"out of range at row 0 \(values \[1e\+30\]\)"):
        LogitFrame(np.zeros((2, 2)), labels=np.array([1e30, 0.0]))


def test_nan_ids_name_their_rows():
    with pytest.raises(NonFiniteError, match=r"ids must not be NaN.*rows 1, 3"):
        LogitFrame(np.zeros((4, 2)), ids=[1.0, np.nan, 2.0, np.nan])
    with pytest.raises(NonFiniteError, match="row 0"):
        LogitFrame(np.zeros((2, 2)), ids=[np.nan, 2.0])
