"""Shared fixtures for the test suite.

Kept small and general: a seeded random generator, a maker of synthetic
logits with labels drawn from a known model, the ``backend`` fixture that
runs a test on each per-sample score backend (numba and numpy), and the
bundled mail-room demo frame.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable

import numpy as np
import pytest
from scipy import special

import logitscope
from logitscope import LogitFrame

_scores = importlib.import_module("logitscope.analysis.scores")

HAVE_NUMBA = "numba" in _scores.available_backends()

#: Both score backends; numba is skipped where it is not installed.
BACKENDS = [
    pytest.param("numba", marks=pytest.mark.skipif(not HAVE_NUMBA, reason="numba is not installed")),
    "numpy",
]


@pytest.fixture(params=BACKENDS)
def backend(request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch) -> str:
    """The name of a score backend; with "numpy" the analysis layer's "auto" choice is numpy too.

    Tests that call ``sample_scores`` pass the name explicitly; functions that
    call it internally (metrics, calibration, temperature ...) pick it up
    because "auto" takes the first available backend.
    """
    if request.param == "numpy":
        monkeypatch.setattr(_scores, "_numba", lambda: None)
    return request.param


@pytest.fixture(scope="session")
def mailroom() -> LogitFrame:
    """The bundled mail-room demo: sklearn's digits with out-of-fold logistic-regression logits.

    Frames are immutable, so one instance serves the whole session.
    """
    return logitscope.load_demo("mailroom")


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20240611)


LogitMaker = Callable[..., tuple[np.ndarray, np.ndarray]]


@pytest.fixture
def make_logits(rng: np.random.Generator) -> LogitMaker:
    """Return ``make(n, k, scale, true_temperature, dtype) -> (logits, labels)``.

    Logits are Gaussian times ``scale``; each label is drawn from
    ``softmax(z / true_temperature)``, so the model is calibrated exactly at
    ``true_temperature`` (over-confident at T = 1 when it is above 1).
    """

    def make(
        n: int = 600, k: int = 6, scale: float = 3.0, true_temperature: float = 1.0, dtype: type = np.float64
    ) -> tuple[np.ndarray, np.ndarray]:
        z = rng.normal(size=(n, k)) * scale
        p = special.softmax(z / true_temperature, axis=1)
        c = p.cumsum(axis=1)
        y = (c > rng.random((n, 1)) * c[:, -1:]).argmax(axis=1)  # inverse-CDF draw
        return z.astype(dtype), y.astype(np.int64)

    return make
