"""Property tests (hypothesis): invariants that hold for every logit matrix.

Each property follows from the definitions: softmax rows are probability vectors; entropy lies in
[0, log K] (Shannon 1948); margin = p_(1) - p_(2) in [0, 1]; dividing by T > 0 keeps the order of
the logits, so the arg-max; ECE is a weighted mean of |acc - conf| with both in [0, 1]; the rank of
the label lies in [1, K]; the fitted NLL is never above the NLL at T = 1, which is a candidate.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from scipy import special

from logitscope import LogitFrame
from logitscope.analysis import (
    available_backends,
    expected_calibration_error,
    fit_temperature,
    nll,
    sample_scores,
    softmax,
)

BACKENDS = available_backends()  # numba (when installed) and numpy
SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def logit_problems(draw, max_rows: int = 12, max_classes: int = 8, bound: float = 1e4):
    n = draw(st.integers(1, max_rows))
    k = draw(st.integers(2, max_classes))
    dtype = draw(st.sampled_from([np.float16, np.float32, np.float64]))
    b = min(bound, 6e4) if dtype == np.float16 else bound
    elements = st.floats(-b, b, allow_nan=False, allow_infinity=False, width=np.finfo(dtype).bits)
    z = draw(arrays(dtype, (n, k), elements=elements))
    y = draw(arrays(np.int64, n, elements=st.integers(0, k - 1)))
    return z, y


@SETTINGS
@given(problem=logit_problems(), t=st.floats(0.05, 20.0))
def test_probabilities_sum_to_one(problem, t):
    z, _ = problem
    p = softmax(z, temperature=t, dtype=np.float64)
    assert np.all(p >= 0) and np.all(p <= 1)
    np.testing.assert_allclose(p.sum(axis=1), 1.0, rtol=0, atol=1e-12)


@SETTINGS
@pytest.mark.parametrize("backend", BACKENDS)
@given(problem=logit_problems(), t=st.floats(0.05, 20.0))
def test_per_sample_ranges(backend, problem, t):
    z, y = problem
    k = z.shape[1]
    s = sample_scores(z, y, temperature=t, backend=backend)
    assert np.all(s.entropy >= 0) and np.all(s.entropy <= np.log(k) + 1e-12)
    assert np.all(s.margin >= -1e-15) and np.all(s.margin <= 1 + 1e-15)
    assert np.all(s.confidence >= 1.0 / k - 1e-12) and np.all(s.confidence <= 1.0 + 1e-15)
    assert np.all(s.true_rank >= 1) and np.all(s.true_rank <= k)
    assert np.all(s.brier >= -1e-12) and np.all(s.brier <= 2 + 1e-12)
    assert np.all(s.true_log_probability <= 1e-12)
    for v in s.to_dict().values():
        assert np.all(np.isfinite(v.astype(np.float64)))


@SETTINGS
@pytest.mark.parametrize("backend", BACKENDS)
@given(problem=logit_problems(bound=100.0), t=st.floats(0.05, 20.0))
def test_temperature_never_changes_the_argmax(backend, problem, t):
    z, _ = problem
    base = sample_scores(z, temperature=1.0, backend=backend).predicted
    assert np.array_equal(sample_scores(z, temperature=t, backend=backend).predicted, base)
    assert np.array_equal(base, np.argmax(z, axis=1))  # numpy.argmax: first index on ties


@SETTINGS
@given(problem=logit_problems(bound=100.0))
def test_backends_agree(problem):
    if len(BACKENDS) < 2:
        pytest.skip("numba is not installed")
    z, y = problem
    a = sample_scores(z, y, backend="numba").to_dict()
    b = sample_scores(z, y, backend="numpy").to_dict()
    for name in a:
        np.testing.assert_allclose(a[name], b[name], rtol=0, atol=1e-12, err_msg=name)


@SETTINGS
@given(problem=logit_problems(max_rows=30), t=st.floats(0.05, 20.0), n_bins=st.integers(1, 30))
def test_ece_in_unit_interval(problem, t, n_bins):
    z, y = problem
    for strategy in ("uniform", "quantile"):
        ece = expected_calibration_error(z, y, temperature=t, n_bins=n_bins, strategy=strategy)
        assert 0.0 <= ece <= 1.0


@SETTINGS
@given(problem=logit_problems(max_rows=30, bound=50.0))
def test_fitted_nll_not_above_nll_at_t1(problem):
    z, y = problem
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # separable or label-free data stop at a bound
        fit = fit_temperature(z, y)
    assert fit.nll_after <= fit.nll_before + 1e-12
    assert fit.nll_before == pytest.approx(nll(z, y), rel=1e-12, abs=1e-12)
    # and it is the NLL at the returned temperature (scipy.special.log_softmax as reference)
    z64 = z.astype(np.float64)
    ref = -np.mean(special.log_softmax(z64 / fit.temperature, axis=1)[np.arange(y.size), y])
    assert fit.nll_after == pytest.approx(ref, rel=1e-9, abs=1e-12)


@settings(max_examples=40, deadline=None)
@given(
    p=arrays(np.float64, st.tuples(st.integers(1, 10), st.integers(2, 6)), elements=st.floats(0.0, 1.0)).filter(
        lambda a: np.all(a.sum(axis=1) > 1e-3)
    )
)
def test_from_probabilities_round_trip(p):
    p = p / p.sum(axis=1, keepdims=True)
    f = LogitFrame.from_probabilities(p)
    np.testing.assert_allclose(f.probabilities(), p, rtol=1e-9, atol=1e-12)
