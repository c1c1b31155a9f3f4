"""Temperature scaling against scipy.optimize, finite differences and the optimality identity."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy import optimize, special, stats
from sklearn.metrics import log_loss

from logitscope.analysis import (
    brier,
    default_temperature_grid,
    expected_calibration_error,
    fit_temperature,
    mean_confidence,
    mean_entropy,
    temperature_moments,
    temperature_sweep,
)
from logitscope.errors import ParameterError


def _scipy_nll(z: np.ndarray, y: np.ndarray, t: float) -> float:
    return float(-np.mean(special.log_softmax(z / t, axis=1)[np.arange(y.size), y]))


def _scipy_fit(z: np.ndarray, y: np.ndarray) -> float:
    # reference: scipy.optimize.minimize_scalar, bounded, tight xatol
    res = optimize.minimize_scalar(
        lambda t: _scipy_nll(z, y, t), bounds=(0.05, 20.0), method="bounded", options={"xatol": 1e-10}
    )
    assert res.success
    return float(res.x)


@pytest.mark.parametrize("true_t", [0.5, 1.0, 2.5])
@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_fit_matches_scipy_minimize_scalar(make_logits, backend, true_t, dtype):
    z, y = make_logits(n=1500, k=6, scale=3.0, true_temperature=true_t, dtype=dtype)
    z64 = z.astype(np.float64)
    fit = fit_temperature(z, y)
    ref = _scipy_fit(z64, y)
    assert fit.converged and not fit.at_bound
    assert fit.temperature == pytest.approx(ref, rel=1e-4)
    # the labels were drawn at true_t, so the fit lands near it (a statistical check, loose)
    assert fit.temperature == pytest.approx(true_t, rel=0.15)
    assert fit.nll_before == pytest.approx(_scipy_nll(z64, y, 1.0), rel=1e-12)
    assert fit.nll_after == pytest.approx(_scipy_nll(z64, y, fit.temperature), rel=1e-12)
    assert fit.nll_after <= fit.nll_before


def test_mean_entropy_equals_nll_at_the_optimum(make_logits, backend):
    # With beta = 1/T, p = softmax(beta z) and A(beta) = logsumexp(beta z):
    #   log p_y   = beta z_y - A,                  so NLL(beta)  = mean(A - beta z_y)
    #   H(p)      = -sum_k p_k log p_k = A - beta E_p[z], so mean H = mean(A - beta E_p[z])
    #   dNLL/dbeta = mean(dA/dbeta - z_y) = mean(E_p[z] - z_y)   (dA/dbeta = E_p[z])
    # Hence NLL - mean H = beta * mean(E_p[z] - z_y) = beta * dNLL/dbeta, which is zero at an interior
    # optimum: at the fitted temperature the mean entropy equals the NLL.
    # The relation NLL - mean H = beta * dNLL/dbeta holds at every temperature (checked first with
    # scipy.stats.entropy and finite-difference-free moments), and at the optimum its right side is 0.
    z, y = make_logits(n=2000, k=5, scale=2.5, true_temperature=1.7)
    for t in (0.5, 1.0, 3.0):
        p = special.softmax(z / t, axis=1)
        gap = _scipy_nll(z, y, t) - np.mean(stats.entropy(p, axis=1))
        _, d1, _ = temperature_moments(z, y, 1.0 / t)
        assert gap == pytest.approx(d1 / t, rel=1e-9, abs=1e-12)
        assert abs(gap) > 1e-3  # away from the optimum the two differ, so the checks below can fail
    # at scipy's optimum the mean entropy equals the NLL (bounded Brent stops within about
    # sqrt(machine eps) * T of the minimiser, hence the tolerance)
    t_ref = _scipy_fit(z, y)
    assert mean_entropy(z, temperature=t_ref) == pytest.approx(_scipy_nll(z, y, t_ref), abs=1e-7)
    # at the fitted temperature, to within what the stopping rule promises: Newton stops once its next
    # step -g/h is below rtol * beta, so |beta g| <= rtol * beta^2 * h
    fit = fit_temperature(z, y, rtol=1e-5)
    beta = 1.0 / fit.temperature
    _, _, d2 = temperature_moments(z, y, beta)
    assert abs(mean_entropy(z, temperature=fit.temperature) - fit.nll_after) <= 1e-5 * beta**2 * d2 + 1e-12


@pytest.mark.parametrize("beta", [0.3, 1.0, 2.2])
def test_moments_match_finite_differences(make_logits, backend, beta):
    z, y = make_logits(n=400, k=7, scale=2.0)
    f, d1, d2 = temperature_moments(z, y, beta)

    def g(b: float) -> float:
        return _scipy_nll(z, y, 1.0 / b)  # NLL as a function of beta, via scipy log_softmax

    h = 1e-4
    assert f == pytest.approx(g(beta), rel=1e-12)
    # central differences, error O(h^2)
    assert d1 == pytest.approx((g(beta + h) - g(beta - h)) / (2 * h), rel=1e-6, abs=1e-8)
    assert d2 == pytest.approx((g(beta + h) - 2 * g(beta) + g(beta - h)) / h**2, rel=1e-4)
    assert d2 >= 0  # convex in beta


def test_separable_data_stop_at_the_bound(backend):
    z = np.array([[3.0, 0.0], [0.0, 3.0], [2.0, -1.0]])
    y = np.array([0, 1, 0])  # every sample right: NLL falls all the way to T -> 0
    with pytest.warns(RuntimeWarning, match="reached its bound"):
        fit = fit_temperature(z, y)
    assert fit.at_bound and fit.temperature == pytest.approx(1e-3)
    assert fit.nll_after <= fit.nll_before
    assert fit.nll_after == pytest.approx(_scipy_nll(z, y, fit.temperature), abs=1e-12)


def test_labels_unrelated_to_logits_push_t_up(make_logits, backend):
    # labels independent of the logits: the best temperature is large (near-uniform predictions)
    z, _ = make_logits(n=500, k=4, scale=2.0)
    y = np.random.default_rng(3).integers(0, 4, 500)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # it may stop at the upper bound T = 1000
        fit = fit_temperature(z, y)
    assert fit.nll_after <= fit.nll_before
    assert fit.temperature > 10.0
    # reference: scipy.optimize.minimize_scalar over the fit's own range of temperatures
    res = optimize.minimize_scalar(
        lambda t: _scipy_nll(z, y, t), bounds=(1e-3, 1e3), method="bounded", options={"xatol": 1e-8}
    )
    assert fit.nll_after <= res.fun + 1e-9


def test_sweep_matches_the_single_metrics(make_logits, backend):
    z, y = make_logits(n=600, k=5, true_temperature=1.5)
    grid = np.array([0.5, 1.0, 1.5, 3.0])
    sw = temperature_sweep(z, y, grid, n_bins=15)
    np.testing.assert_array_equal(sw.temperature, grid)
    for i, t in enumerate(grid):
        p = special.softmax(z / t, axis=1)
        # references: sklearn log_loss; Brier from a numpy one-hot; ECE as in test_calibration
        assert sw.nll[i] == pytest.approx(log_loss(y, p, labels=np.arange(5)), rel=1e-12)
        assert sw.brier[i] == pytest.approx(np.mean(np.sum((p - np.eye(5)[y]) ** 2, axis=1)), rel=1e-12)
        assert sw.mean_confidence[i] == pytest.approx(p.max(axis=1).mean(), rel=1e-12)
        assert sw.ece[i] == pytest.approx(expected_calibration_error(z, y, temperature=t), abs=1e-15)
        assert sw.brier[i] == pytest.approx(brier(z, y, temperature=t), abs=1e-15)
        assert sw.mean_confidence[i] == pytest.approx(mean_confidence(z, temperature=t), abs=1e-15)
    # the sweep's NLL is smallest near the fitted temperature (labels drawn at T = 1.5)
    assert int(np.argmin(sw.nll)) == 2


def test_default_grid():
    g = default_temperature_grid()
    assert g.size == 41 and g[0] == pytest.approx(0.25) and g[-1] == pytest.approx(4.0)
    assert g[20] == pytest.approx(1.0)  # log-spaced and symmetric: T = 1 in the middle
    np.testing.assert_allclose(np.diff(np.log(g)), np.log(16) / 40)


def test_sweep_input_errors(make_logits):
    z, y = make_logits(n=10, k=3)
    for bad in ([], [1.0, -2.0], [[1.0]], [np.nan]):
        with pytest.raises(ParameterError, match="positive finite"):
            temperature_sweep(z, y, bad)
    with pytest.raises(ParameterError, match="inverse temperature"):
        temperature_moments(z, y, 0.0)
