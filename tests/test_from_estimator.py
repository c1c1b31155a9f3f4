"""LogitFrame.from_estimator: the frame's probabilities are the estimator's own predict_proba, for every kind of model.

The reference is scikit-learn itself: ``estimator.predict_proba(X)``. The decision function is
taken as logits only where its softmax reproduces those probabilities on X; one-vs-rest models
(SGD with log loss on more than two classes, OneVsRestClassifier) normalise sigmoids instead, so
their decision function is no set of softmax logits and log(predict_proba) is used.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
import pandas as pd
import pytest

from logitscope import LogitFrame
from logitscope.errors import InputTypeError


def _data(name: str) -> tuple[np.ndarray, np.ndarray]:
    from sklearn.datasets import load_digits, load_iris, load_wine
    from sklearn.preprocessing import StandardScaler

    if name == "iris-binary":  # versicolor against virginica: the two classes that overlap
        x, y = load_iris(return_X_y=True)
        keep = y > 0
        return x[keep], y[keep]
    x, y = (load_wine if name == "wine" else load_digits)(return_X_y=True)
    return StandardScaler().fit_transform(x), y


def _model(kind: str) -> Any:  # any scikit-learn classifier
    from sklearn.calibration import CalibratedClassifierCV
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
    from sklearn.ensemble import HistGradientBoostingClassifier, RandomForestClassifier
    from sklearn.linear_model import LogisticRegression, SGDClassifier
    from sklearn.multiclass import OneVsRestClassifier
    from sklearn.neural_network import MLPClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.svm import LinearSVC

    return {
        "logistic multinomial": LogisticRegression(max_iter=2000),
        "logistic one-vs-rest": OneVsRestClassifier(LogisticRegression(max_iter=2000)),
        "SGD log loss": SGDClassifier(loss="log_loss", random_state=0),
        "LDA": LinearDiscriminantAnalysis(),
        "random forest": RandomForestClassifier(n_estimators=20, random_state=0),
        "hist gradient boosting": HistGradientBoostingClassifier(max_iter=20, random_state=0),
        "MLP": MLPClassifier(hidden_layer_sizes=(16,), max_iter=200, random_state=0),
        "calibrated linear SVC": CalibratedClassifierCV(LinearSVC(), cv=3),
        "pipeline scaler + logistic": make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
    }[kind]


KINDS = [
    "logistic multinomial",
    "logistic one-vs-rest",
    "SGD log loss",
    "LDA",
    "random forest",
    "hist gradient boosting",
    "MLP",
    "calibrated linear SVC",
    "pipeline scaler + logistic",
]
#: which models' decision function is a softmax logit, by what sklearn computes (softmax or sigmoid of it)
LOGIT_DECISION = {"logistic multinomial", "LDA", "hist gradient boosting", "pipeline scaler + logistic"}


@pytest.mark.parametrize("data", ["iris-binary", "wine"])
@pytest.mark.parametrize("kind", KINDS)
def test_probabilities_equal_predict_proba(kind: str, data: str) -> None:
    x, y = _data(data)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # convergence warnings of the small fits
        model = _model(kind).fit(x, y)
    f = LogitFrame.from_estimator(model, x, y)
    p = model.predict_proba(x)
    np.testing.assert_allclose(f.probabilities(), p, rtol=0, atol=1e-6)  # reference: sklearn's predict_proba
    np.testing.assert_array_equal(f.labels, np.searchsorted(model.classes_, y))
    # with two classes a one-vs-rest model is one sigmoid, sigmoid(z) = softmax([0, z]): its decision is a logit
    binary_ovr = kind in ("SGD log loss", "logistic one-vs-rest") and data == "iris-binary"
    assert f.source == ("logits" if kind in LOGIT_DECISION or binary_ovr else "probabilities")


def test_digits_one_vs_rest_sgd_falls_back_to_predict_proba() -> None:
    # the case that went wrong: ten classes, one-vs-rest sigmoids normalised; softmax(decision_function) differs
    from scipy.special import softmax

    x, y = _data("digits")
    model = _model("SGD log loss").fit(x, y)
    p = model.predict_proba(x)
    assert np.abs(softmax(model.decision_function(x), axis=1) - p).max() > 0.1  # scipy: not a softmax logit
    f = LogitFrame.from_estimator(model, x, y)
    assert f.source == "probabilities"
    np.testing.assert_allclose(f.probabilities(), p, rtol=0, atol=1e-6)


def test_estimator_without_either_method_and_decision_only() -> None:
    from sklearn.linear_model import RidgeClassifier

    class Voter:  # a fitted classifier that only predicts
        classes_ = np.array([0, 1])

        def predict(self, x: np.ndarray) -> np.ndarray:
            return np.zeros(len(x), dtype=int)

    x, y = _data("iris-binary")
    with pytest.raises(InputTypeError, match="Voter has neither predict_proba nor decision_function"):
        LogitFrame.from_estimator(Voter(), x)
    ridge = RidgeClassifier().fit(x, y)
    with pytest.raises(InputTypeError, match="no predict_proba, so whether its scores are logits cannot be checked"):
        LogitFrame.from_estimator(ridge, x, y)
    f = LogitFrame.from_estimator(ridge, x, y, method="decision_function")  # at the caller's word
    np.testing.assert_array_equal(f.logits[:, 1], ridge.decision_function(x))
    with pytest.raises(InputTypeError, match="method must be"):
        LogitFrame.from_estimator(ridge, x, method="softmax")  # type: ignore[arg-type]


def test_dataframe_rows_keep_their_index_as_ids() -> None:
    from sklearn.datasets import load_wine
    from sklearn.ensemble import RandomForestClassifier

    data = load_wine(as_frame=True)
    x = data.data.set_axis([f"bottle-{i:03d}" for i in range(len(data.data))])
    y = data.target.set_axis(x.index)
    model = RandomForestClassifier(n_estimators=10, random_state=0).fit(x, y)
    f = LogitFrame.from_estimator(model, x.iloc[10:20], y.iloc[10:20])
    assert f.ids.tolist() == x.index[10:20].tolist()
    assert f.scores().index.tolist() == x.index[10:20].tolist()
    g = LogitFrame.from_estimator(model, x.iloc[:3], ids=["a", "b", "c"])  # given ids win
    assert g.ids.tolist() == ["a", "b", "c"]
    np.testing.assert_allclose(g.probabilities(), model.predict_proba(x.iloc[:3]), atol=1e-6)
    assert isinstance(x, pd.DataFrame)
