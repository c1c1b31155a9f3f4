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
from logitscope.errors import InputTypeError, ParameterError, ShapeError


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


# --------------------------------------------------------------------------- flat NLL (issue 7, item 6)


@pytest.mark.parametrize("dtype", [np.float16, np.float32, np.float64])
@pytest.mark.parametrize("kind", ["constant matrix", "constant rows"])
def test_flat_nll_fits_t_1_without_a_warning(rng, backend, dtype, kind):
    # Every row constant: softmax(z / T) is uniform at every T, so the NLL is log K whatever T
    # (scipy.special.log_softmax below). No temperature is better: the fit returns T = 1, no warning.
    n, k = 300, 5
    z = np.zeros((n, k)) if kind == "constant matrix" else np.repeat(rng.normal(size=(n, 1)) * 50, k, axis=1)
    z = z.astype(dtype)
    y = rng.integers(0, k, n)
    for t in (1e-3, 1.0, 1e3):
        assert _scipy_nll(z.astype(np.float64), y, t) == pytest.approx(np.log(k), rel=1e-12)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # before the fix: T = 1000 with a bound warning
        fit = fit_temperature(z, y)
    assert fit.temperature == 1.0 and fit.flat and fit.converged and not fit.at_bound
    assert fit.nll_before == fit.nll_after == pytest.approx(np.log(k), rel=1e-12)
    assert fit.passes == 1 and fit.newton_steps == 0


def test_not_flat_when_one_row_varies(rng, backend):
    z = np.zeros((200, 4))
    z[0] = [2.0, 0.0, 0.0, 0.0]
    y = np.r_[1, rng.integers(0, 4, 199)]  # the one informative row is wrong: a larger T helps
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        fit = fit_temperature(z, y)
    assert not fit.flat and fit.temperature > 1.0
    res = optimize.minimize_scalar(lambda t: _scipy_nll(z, y, t), bounds=(1e-3, 1e3), method="bounded")
    assert fit.nll_after <= res.fun + 1e-9  # reference: scipy.optimize.minimize_scalar


# --------------------------------------------------------------------------- rows without copies (item 6 of the brief)


def test_fit_on_rows_matches_the_fit_on_the_copied_rows(make_logits, backend):
    z, y = make_logits(n=3000, k=6, scale=3.0, true_temperature=1.8, dtype=np.float32)
    rows = np.sort(np.random.default_rng(4).choice(3000, 1100, replace=False))
    fit = fit_temperature(z, y, rows=rows)
    ref = _scipy_fit(z[rows].astype(np.float64), y[rows])  # reference: scipy on an explicit copy of the rows
    assert fit.temperature == pytest.approx(ref, rel=1e-4)
    assert fit.n_rows == 1100
    assert fit.nll_after == pytest.approx(_scipy_nll(z[rows].astype(np.float64), y[rows], fit.temperature), rel=1e-10)
    mask = np.zeros(3000, dtype=bool)
    mask[rows] = True
    assert fit_temperature(z, y, rows=mask).temperature == pytest.approx(fit.temperature, rel=1e-12)
    # the gathered blocks give the numbers of the direct fit on the copy
    assert fit_temperature(z[rows], y[rows]).temperature == pytest.approx(fit.temperature, rel=1e-9)


def test_sweep_on_rows_matches_the_sweep_on_the_copied_rows(make_logits, backend):
    z, y = make_logits(n=2000, k=5, true_temperature=1.5)
    rows = np.arange(1, 2000, 3)
    grid = np.array([0.5, 1.0, 2.0])
    sw = temperature_sweep(z, y, grid, rows=rows)
    for i, t in enumerate(grid):
        p = special.softmax(z[rows] / t, axis=1)
        # references: sklearn log_loss and a numpy one-hot Brier on an explicit copy of the rows
        assert sw.nll[i] == pytest.approx(log_loss(y[rows], p, labels=np.arange(5)), rel=1e-12)
        assert sw.brier[i] == pytest.approx(np.mean(np.sum((p - np.eye(5)[y[rows]]) ** 2, axis=1)), rel=1e-12)
        assert sw.ece[i] == pytest.approx(expected_calibration_error(z[rows], y[rows], temperature=t), abs=1e-15)


def test_rows_are_gathered_a_block_at_a_time(rng):
    import tracemalloc

    z = rng.normal(size=(1_000_000, 20)).astype(np.float32) * 3  # 80 MB
    y = rng.integers(0, 20, z.shape[0])
    rows = np.arange(0, z.shape[0], 2)
    copy_bytes = rows.size * z.shape[1] * z.itemsize  # what z[rows] would allocate: 40 MB
    tracemalloc.start()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        fit_temperature(z, y, rows=rows, max_iter=2)
        temperature_sweep(z, y, [1.0], rows=rows)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    # the score arrays of the sweep are 1-D (a few times rows x 8 bytes); no block of the matrix beyond a gather
    assert peak < 0.75 * copy_bytes, (peak, copy_bytes)


def test_rows_input_errors(make_logits):
    z, y = make_logits(n=10, k=3)
    with pytest.raises(ShapeError, match=r"must lie in \[0, 10\)"):
        fit_temperature(z, y, rows=[0, 10])
    with pytest.raises(ShapeError, match="empty"):
        temperature_sweep(z, y, rows=np.array([], dtype=int))
    with pytest.raises(ShapeError, match=r"shape \(10,\)"):
        fit_temperature(z, y, rows=np.ones(4, dtype=bool))
    with pytest.raises(InputTypeError, match="integer positions"):
        fit_temperature(z, y, rows=[0.5, 1.5])


# --------------------------------------------------------------------------- passes (item 7)


@pytest.mark.parametrize("n", [5000, 300_000])  # without and with the warm start on a subsample
def test_passes_count_the_passes_over_the_data(monkeypatch, rng, n):
    # count the rows each evaluation of the NLL reads: full passes are evaluations over all n rows
    import logitscope.analysis.temperature as temperature_module

    seen: list[int] = []
    real = temperature_module.temperature_moments

    def counting(z, y, beta, *args, **kwargs):
        seen.append(int(np.asarray(z).shape[0]))
        return real(z, y, beta, *args, **kwargs)

    monkeypatch.setattr(temperature_module, "temperature_moments", counting)
    z = (rng.normal(size=(n, 4)) * 2.5).astype(np.float32)
    y = (z + rng.gumbel(size=z.shape) * 2.0).argmax(axis=1)  # labels drawn at T = 2: an interior optimum
    fit = fit_temperature(z, y)
    full = sum(1 for m in seen if m == n)
    assert fit.passes == full >= 2
    assert fit.newton_steps >= 1 and fit.newton_steps <= fit.passes - 1
    assert fit.iterations == fit.passes  # the old name keeps its old meaning
    if n > 8 * temperature_module.WARM_START_ROWS:
        assert fit.warm_start_rows == temperature_module.WARM_START_ROWS and fit.warm_start_steps >= 1
        assert sum(1 for m in seen if m == fit.warm_start_rows) >= fit.warm_start_steps
    else:
        assert fit.warm_start_rows == 0 and fit.warm_start_steps == 0
    # reference: scipy.optimize.minimize_scalar
    assert fit.temperature == pytest.approx(_scipy_fit(z.astype(np.float64), y), rel=1e-4)
