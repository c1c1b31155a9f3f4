"""LogitFrame: construction from numpy, pandas, torch and scikit-learn; immutability; bad input."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import special, stats

from logitscope import LogitFrame
from logitscope.errors import (
    ClassNameError,
    DuplicateError,
    InputTypeError,
    LabelError,
    NonFiniteError,
    ProbabilityError,
    ShapeError,
)

TEAMS = ["billing", "password reset", "hardware"]


@pytest.fixture
def frame(make_logits):
    z, y = make_logits(n=40, k=3)
    meta = pd.DataFrame({"channel": np.array(["email", "chat"] * 20), "hour": np.arange(40) % 24})
    ids = np.array([f"T-{i:03d}" for i in range(40)])
    texts = [f"ticket number {i}" for i in range(40)]
    return LogitFrame(z, labels=y, classes=TEAMS, ids=ids, meta=meta, texts=texts)


# --------------------------------------------------------------------------- construction


def test_from_numpy_with_int_and_name_labels(make_logits):
    z, y = make_logits(n=30, k=3)
    a = LogitFrame(z, labels=y, classes=TEAMS)
    b = LogitFrame(z, labels=[TEAMS[i] for i in y], classes=TEAMS)
    c = LogitFrame(z, labels=pd.Series([TEAMS[i] for i in y]), classes=TEAMS)
    for f in (a, b, c):
        np.testing.assert_array_equal(f.labels, y)
        assert f.classes == tuple(TEAMS) and f.n_samples == 30 and f.n_classes == 3 and len(f) == 30
    np.testing.assert_array_equal(a.ids, np.arange(30))
    assert LogitFrame(z).classes == ("0", "1", "2") and not LogitFrame(z).has_labels


def test_from_pandas_columns_become_classes(make_logits):
    z, y = make_logits(n=25, k=3)
    df = pd.DataFrame(z, columns=TEAMS, index=np.arange(100, 125))
    f = LogitFrame(df, labels=[TEAMS[i] for i in y])
    assert f.classes == tuple(TEAMS)
    np.testing.assert_array_equal(f.logits, z)
    np.testing.assert_array_equal(f.labels, y)


def test_from_torch_tensors(make_logits):
    torch = pytest.importorskip("torch")
    z, y = make_logits(n=20, k=3, dtype=np.float32)
    t = torch.from_numpy(z)
    f = LogitFrame(t, labels=torch.from_numpy(y))
    assert f.logits.dtype == np.float32
    assert not np.shares_memory(f.logits, z)  # the frame holds its own copy ...
    t.mul_(2.0)  # ... so an in-place op on the tensor leaves it as it was
    np.testing.assert_array_equal(f.logits, z / 2.0)
    t.div_(2.0)
    shared = LogitFrame(t, copy=False)  # a CPU tensor is read through its numpy view, no copy
    assert np.shares_memory(shared.logits, z)
    np.testing.assert_array_equal(f.labels, y)
    # probabilities against torch.softmax
    np.testing.assert_allclose(f.probabilities(), torch.softmax(t, dim=1).numpy(), rtol=1e-6)
    g = LogitFrame(t.requires_grad_(True))  # a tensor that needs grad is detached
    np.testing.assert_array_equal(g.logits, z)


@pytest.mark.parametrize("dtype", [np.float16, np.float32, np.float64])
def test_dtype_kept_and_shared_only_when_asked(rng, backend, dtype):
    z = (rng.normal(size=(50, 4)) * 3).astype(dtype)
    y = rng.integers(0, 4, 50)
    f = LogitFrame(z, labels=y, copy=False)
    assert f.logits.dtype == dtype
    assert np.shares_memory(f.logits, z)
    assert not np.shares_memory(f.labels, y)  # labels are always the frame's own
    assert not f.logits.flags.writeable
    with pytest.raises(ValueError, match="read-only"):
        f.logits[0, 0] = 1.0
    # numbers from the stored values, against scipy in float64
    p = special.softmax(z.astype(np.float64), axis=1)
    np.testing.assert_allclose(f.sample_scores().confidence, p.max(axis=1), rtol=1e-12)
    np.testing.assert_allclose(f.sample_scores().entropy, stats.entropy(p, axis=1), rtol=1e-10, atol=1e-12)
    assert f.summary()["accuracy"] == pytest.approx(np.mean(z.argmax(axis=1) == y))


def test_binary_single_column(rng):
    z = rng.normal(size=30) * 2
    f = LogitFrame(z, labels=rng.integers(0, 2, 30), binary=True, classes=["no stamp", "stamp"])
    np.testing.assert_array_equal(f.logits[:, 0], 0.0)
    np.testing.assert_array_equal(f.logits[:, 1], z)
    # softmax([0, z]) = [1 - sigmoid(z), sigmoid(z)]: reference scipy.special.expit
    np.testing.assert_allclose(f.probabilities()[:, 1], special.expit(z), rtol=1e-12)
    LogitFrame(z[:, None], binary=True)


def test_from_probabilities_round_trip(rng):
    p = special.softmax(rng.normal(size=(60, 4)) * 2, axis=1)
    f = LogitFrame.from_probabilities(p, labels=rng.integers(0, 4, 60))
    assert f.source == "probabilities"
    np.testing.assert_allclose(f.probabilities(), p, rtol=1e-12)
    # the stored logits are log-probabilities: scipy.special.log_softmax of them changes nothing
    np.testing.assert_allclose(special.log_softmax(f.logits, axis=1), np.log(p), rtol=1e-12, atol=1e-12)
    # exact zeros stay finite and come back as (almost) zero
    g = LogitFrame.from_probabilities([[1.0, 0.0], [0.25, 0.75]])
    assert np.all(np.isfinite(g.logits))
    np.testing.assert_allclose(g.probabilities(), [[1.0, 0.0], [0.25, 0.75]], atol=1e-300)
    # float32 input stays float32
    h = LogitFrame.from_probabilities(p.astype(np.float32))
    assert h.logits.dtype == np.float32
    np.testing.assert_allclose(h.probabilities(), p, rtol=1e-5)
    # a DataFrame's columns become the classes
    df = pd.DataFrame(p[:, :3] / p[:, :3].sum(axis=1, keepdims=True), columns=TEAMS)
    assert LogitFrame.from_probabilities(df).classes == tuple(TEAMS)


# --------------------------------------------------------------------------- scikit-learn


def test_from_estimator_multinomial_logistic_regression():
    from sklearn.datasets import load_wine
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    x, y = load_wine(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(x, y)
    f = LogitFrame.from_estimator(model, x, y)
    assert f.source == "logits" and f.classes == ("0", "1", "2")
    # multinomial: decision_function is the logit ...
    np.testing.assert_array_equal(f.logits, model.decision_function(x))
    # ... and log_softmax of it is sklearn's predict_log_proba
    np.testing.assert_allclose(f.log_probabilities(), model.predict_log_proba(x), rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(f.probabilities(), model.predict_proba(x), rtol=1e-10, atol=1e-14)
    np.testing.assert_array_equal(f.labels, y)
    np.testing.assert_array_equal(f.sample_scores().predicted, model.predict(x))


def test_from_estimator_string_classes():
    from sklearn.datasets import load_iris
    from sklearn.linear_model import LogisticRegression

    x, y = load_iris(return_X_y=True)
    names = np.array(["setosa", "versicolor", "virginica"])[y]
    model = LogisticRegression(max_iter=2000).fit(x, names)
    f = LogitFrame.from_estimator(model, x, names)
    assert f.classes == ("setosa", "versicolor", "virginica")
    np.testing.assert_array_equal(f.labels, y)
    with pytest.raises(ClassNameError, match="does not know: daisy"):
        LogitFrame.from_estimator(model, x[:2], ["setosa", "daisy"])


def test_from_estimator_binary_model():
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    x, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(x, y)
    f = LogitFrame.from_estimator(model, x, y)
    # one decision column z becomes [0, z]
    assert f.n_classes == 2
    np.testing.assert_array_equal(f.logits[:, 0], 0.0)
    np.testing.assert_array_equal(f.logits[:, 1], model.decision_function(x))
    np.testing.assert_allclose(f.probabilities(), model.predict_proba(x), rtol=1e-10, atol=1e-14)


def test_from_estimator_without_logits():
    from sklearn.datasets import load_wine
    from sklearn.ensemble import RandomForestClassifier
    from sklearn.svm import LinearSVC

    x, y = load_wine(return_X_y=True)
    forest = RandomForestClassifier(n_estimators=25, random_state=0).fit(x, y)
    f = LogitFrame.from_estimator(forest, x, y)
    assert f.source == "probabilities"
    # predict_proba has exact zeros here; they come back as zero to within float64's smallest normal
    assert np.any(forest.predict_proba(x) == 0)
    np.testing.assert_allclose(f.probabilities(), forest.predict_proba(x), rtol=1e-12, atol=1e-300)
    with pytest.raises(InputTypeError, match="LinearSVC has a decision_function but no predict_proba"):
        LogitFrame.from_estimator(LinearSVC().fit(x[:, :3], y), x[:, :3], y)
    with pytest.raises(InputTypeError, match="fitted scikit-learn classifier"):
        LogitFrame.from_estimator(RandomForestClassifier(), x, y)


# --------------------------------------------------------------------------- immutability


def _snapshot(f: LogitFrame) -> dict:
    return {
        "logits": f.logits.copy(),
        "labels": None if f.labels is None else f.labels.copy(),
        "ids": f.ids.copy(),
        "meta": f.meta,
        "temperature": f.temperature,
        "confidence": f.sample_scores().confidence.copy(),
        "payload": list(f.payload.data),
    }


def _assert_unchanged(f: LogitFrame, snap: dict) -> None:
    np.testing.assert_array_equal(f.logits, snap["logits"])
    np.testing.assert_array_equal(f.labels, snap["labels"])
    np.testing.assert_array_equal(f.ids, snap["ids"])
    pd.testing.assert_frame_equal(f.meta, snap["meta"])
    assert f.temperature == snap["temperature"]
    np.testing.assert_array_equal(f.sample_scores().confidence, snap["confidence"])
    assert list(f.payload.data) == snap["payload"]


def test_with_temperature_returns_a_new_frame(frame):
    snap = _snapshot(frame)
    hot = frame.with_temperature(2.0)
    assert hot is not frame and hot.temperature == 2.0
    # reference: scipy.special.softmax at T = 2
    p = special.softmax(np.asarray(frame.logits) / 2.0, axis=1)
    np.testing.assert_allclose(hot.sample_scores().confidence, p.max(axis=1), rtol=1e-12)
    np.testing.assert_allclose(hot.probabilities(), p, rtol=1e-12)
    _assert_unchanged(frame, snap)


def test_subset_returns_a_new_frame(frame):
    snap = _snapshot(frame)
    rows = np.array([5, 0, -1, 17])
    sub = frame.subset(rows)
    pos = [5, 0, 39, 17]
    np.testing.assert_array_equal(sub.logits, snap["logits"][pos])
    np.testing.assert_array_equal(sub.labels, snap["labels"][pos])
    np.testing.assert_array_equal(sub.ids, snap["ids"][pos])
    pd.testing.assert_frame_equal(sub.meta, snap["meta"].iloc[pos].reset_index(drop=True))
    assert list(sub.payload.data) == [snap["payload"][i] for i in pos]
    np.testing.assert_array_equal(sub.sample_scores().confidence, snap["confidence"][pos])
    mask = frame.scores()["correct"].to_numpy()
    assert frame.subset(mask).sample_scores().correct.all()
    _assert_unchanged(frame, snap)


def test_append_returns_a_new_frame(frame):
    snap = _snapshot(frame)
    other = frame.subset(np.arange(10))
    other = LogitFrame(
        np.asarray(other.logits) + 1.0, labels=other.labels, classes=TEAMS,
        ids=[f"U-{i}" for i in range(10)], meta=other.meta, texts=list(other.payload.data),
    )  # fmt: skip
    both = frame.append(other)
    assert both.n_samples == 50
    np.testing.assert_array_equal(both.logits, np.concatenate([snap["logits"], np.asarray(other.logits)]))
    np.testing.assert_array_equal(both.labels, np.concatenate([snap["labels"], other.labels]))
    assert list(both.ids[-2:]) == ["U-8", "U-9"]
    assert len(both.meta) == 50 and len(both.payload) == 50
    _assert_unchanged(frame, snap)
    with pytest.raises(DuplicateError, match="ids must be unique"):
        frame.append(frame)
    with pytest.raises(ClassNameError, match="same classes"):
        frame.append(LogitFrame(np.zeros((2, 3)), labels=[0, 1]))
    # a frame without labels appended to a labelled one: its rows are unlabelled rows of a partly labelled batch
    mixed = frame.append(LogitFrame(np.zeros((2, 3)), classes=TEAMS, ids=["x", "y"]))
    assert mixed.labels[-2:].tolist() == [-1, -1] and mixed.n_labelled == frame.n_samples


def test_meta_is_a_copy(frame):
    m = frame.meta
    m.loc[0, "channel"] = "phone note"
    assert frame.meta.loc[0, "channel"] == "email"


def test_scores_dataframe(frame):
    df = frame.scores()
    assert df.index.name == "id" and list(df.index[:2]) == ["T-000", "T-001"]
    assert list(df.columns[:4]) == ["predicted", "predicted_class", "label", "label_class"]
    z = np.asarray(frame.logits)
    p = special.softmax(z, axis=1)
    np.testing.assert_allclose(df["confidence"], p.max(axis=1), rtol=1e-12)  # scipy
    np.testing.assert_allclose(df["true_probability"], p[np.arange(40), frame.labels], rtol=1e-12)
    assert list(df["predicted_class"]) == [TEAMS[i] for i in z.argmax(axis=1)]
    assert frame.sample_scores() is frame.sample_scores()  # cached per temperature


# --------------------------------------------------------------------------- bad input


def test_bad_input_errors(rng):
    z = rng.normal(size=(6, 3))
    with pytest.raises(ClassNameError, match=r"not among the 3 classes: 'refunds' \(at rows 1, 4\)"):
        LogitFrame(z, labels=["billing", "refunds", "hardware", "billing", "refunds", "hardware"], classes=TEAMS)
    with pytest.raises(DuplicateError, match=r"class name 'billing' appears twice \(columns 0 and 2\)"):
        LogitFrame(z, classes=["billing", "hardware", "billing"])
    with pytest.raises(ClassNameError, match="2 class names given but the logits have 3 columns"):
        LogitFrame(z, classes=["billing", "hardware"])
    with pytest.raises(DuplicateError, match=r"ids must be unique; 1 ids repeat, first 'T-1' at rows 1, 3"):
        LogitFrame(z, ids=["T-0", "T-1", "T-2", "T-1", "T-4", "T-5"])
    with pytest.raises(DuplicateError, match="first 7 at rows 0, 5"):
        LogitFrame(z, ids=[7, 1, 2, 3, 4, 7])
    with pytest.raises(LabelError, match="length 5 but the logits have 6 rows"):
        LogitFrame(z, labels=[0, 1, 2, 0, 1])
    with pytest.raises(LabelError, match="length 5 but the logits have 6 rows"):
        LogitFrame(z, labels=["billing"] * 5, classes=TEAMS)
    with pytest.raises(LabelError, match=r"out of range at row 2 \(values \[3\]\)"):
        LogitFrame(z, labels=[0, 1, 3, 0, 1, 2])
    with pytest.raises(ShapeError, match=r"at least 2 classes.*binary=True"):
        LogitFrame(z[:, :1])
    with pytest.raises(ShapeError, match="no rows"):
        LogitFrame(np.zeros((0, 3)))
    with pytest.raises(ShapeError, match="2-D array"):
        LogitFrame(np.zeros((2, 3, 4)))
    bad = z.copy()
    bad[[1, 4], 0] = np.nan
    with pytest.raises(NonFiniteError, match="2 of 6 rows: rows 1, 4"):
        LogitFrame(bad)
    with pytest.raises(ShapeError, match="meta has 2 rows but the frame has 6"):
        LogitFrame(z, meta=pd.DataFrame({"a": [1, 2]}))
    with pytest.raises(InputTypeError, match="meta must be a pandas DataFrame"):
        LogitFrame(z, meta={"a": [1] * 6})
    with pytest.raises(ShapeError, match=r"images must have shape"):
        LogitFrame(z, images=np.zeros((6, 8)))
    with pytest.raises(ShapeError, match="images hold 5 samples but the frame has 6"):
        LogitFrame(z, images=np.zeros((5, 8, 8)))
    with pytest.raises(InputTypeError, match="texts must be strings; not so at row 2"):
        LogitFrame(z, texts=["a", "b", 3, "d", "e", "f"])
    with pytest.raises(InputTypeError, match="one payload at a time"):
        LogitFrame(z, texts=["a"] * 6, image_paths=["a.png"] * 6)
    with pytest.raises(ShapeError, match=r"row positions must lie in \[-6, 6\)"):
        LogitFrame(z).subset([0, 6])
    with pytest.raises(ShapeError, match="at least one row"):
        LogitFrame(z).subset(np.zeros(6, dtype=bool))
    with pytest.raises(LabelError, match="fit_temperature needs labels"):
        LogitFrame(z).fit_temperature()


def test_probability_errors():
    with pytest.raises(ProbabilityError, match=r"sum to 1.*first rows 0, 2"):
        LogitFrame.from_probabilities([[0.5, 0.6], [0.5, 0.5], [0.2, 0.2]])
    with pytest.raises(ProbabilityError, match="non-negative; negative values at row 1"):
        LogitFrame.from_probabilities([[0.5, 0.5], [1.5, -0.5]])
    with pytest.raises(NonFiniteError, match="row 0"):
        LogitFrame.from_probabilities([[np.nan, 0.5], [0.5, 0.5]])
