"""Temperature scaling (Guo et al. 2017, "On Calibration of Modern Neural Networks").

One scalar ``T > 0`` divides every logit; it changes confidences but never
the predicted class. The fitted temperature minimises the mean negative
log-likelihood on labelled data. Writing ``beta = 1 / T`` (the inverse
temperature of the Boltzmann distribution), the NLL is convex in ``beta``
with

    d NLL / d beta   = mean(E_p[z] - z_y)
    d2 NLL / d beta2 = mean(Var_p[z]),

both read off the same pass over the logits, so a safeguarded Newton method
converges in a handful of passes.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ..errors import ParameterError
from ._validation import assume_valid, check_labels, check_logits
from .calibration import Strategy, reliability_bins
from .scores import sample_scores, temperature_moments

__all__ = ["TemperatureFit", "TemperatureSweep", "default_temperature_grid", "fit_temperature", "temperature_sweep"]

#: Temperatures outside this range are treated as degenerate fits.
T_MIN, T_MAX = 1e-3, 1e3


@dataclass(frozen=True)
class TemperatureFit:
    """Result of :func:`fit_temperature`."""

    temperature: float
    nll_before: float
    nll_after: float
    iterations: int
    converged: bool
    at_bound: bool


Moments = tuple[float, float, float]

#: Rows of the random subsample that finds a starting point on large data.
WARM_START_ROWS = 32768


def _newton(
    evaluate: Callable[[float], Moments], beta: float, fgh: Moments, rtol: float, max_iter: int
) -> tuple[float, float, int, bool]:
    """Safeguarded Newton on the convex NLL(beta); returns (beta, nll, evaluations, converged).

    Stops when the predicted Newton step is below ``rtol * beta`` and returns
    the last *evaluated* point, whose distance to the optimum is about that step.
    """
    lo, hi = 1.0 / T_MAX, 1.0 / T_MIN
    f, g, h = fgh
    evaluations = 0
    for _ in range(max_iter):
        step = -g / h if h > 0 else math.copysign(beta, -g)
        new = min(hi, max(lo, beta + step))
        if abs(new - beta) <= rtol * beta:
            return beta, f, evaluations, True
        f_new, g_new, h_new = evaluate(new)
        evaluations += 1
        # backtracking: by convexity a short enough step along -g descends
        for _ in range(40):
            if f_new <= f:
                break
            new = beta + (new - beta) / 2
            f_new, g_new, h_new = evaluate(new)
            evaluations += 1
        if f_new > f:  # no descent found: the current point is as good as it gets
            return beta, f, evaluations, True
        beta, f, g, h = new, f_new, g_new, h_new
    return beta, f, evaluations, False


def fit_temperature(
    logits: ArrayLike,
    labels: ArrayLike,
    rtol: float = 1e-5,
    max_iter: int = 50,
    seed: int = 0,
) -> TemperatureFit:
    """Find ``T = argmin_{T > 0} mean(-log softmax(z / T)_y)`` (Guo et al. 2017).

    Newton's method on ``beta = 1 / T`` with a backtracking line search. On
    more than ``8 * WARM_START_ROWS`` rows it first converges on a seeded
    random subsample, then corrects on all rows, which usually takes three
    passes over the data in all (one of them at ``T = 1`` for ``nll_before``).

    Parameters
    ----------
    logits : array_like of shape (N, K)
    labels : array_like of shape (N,)
    rtol : float
        Stop when the next Newton step would change ``1 / T`` by less than
        this fraction; the returned temperature is then within about
        ``rtol`` (relative) of the minimiser.
    max_iter : int
        Most Newton steps.
    seed : int
        Seed of the warm-start subsample.

    Returns
    -------
    TemperatureFit
        ``nll_after <= nll_before`` always: if no better temperature exists
        the fit returns ``T = 1``. When the data are separable (every sample
        right with a margin) the NLL keeps falling as ``T -> 0``, and the fit
        stops at the bound ``T = 1e-3`` with ``at_bound=True`` and a warning.
        ``iterations`` counts the passes over all rows.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.array([[4.0, 0.0], [4.0, 0.0], [0.0, 4.0], [4.0, 0.0]])
    >>> fit = fit_temperature(z, [0, 0, 1, 1])
    >>> round(fit.temperature, 4)  # p = 0.75 on every sample is optimal: T = 4 / log 3
    3.641
    """
    z = check_logits(logits)
    n, k = z.shape
    y = check_labels(labels, n, k)
    with assume_valid():

        def on_all(beta: float) -> Moments:
            return temperature_moments(z, y, beta)

        start = on_all(1.0)
        f0 = start[0]
        passes = 1
        beta, fgh = 1.0, start
        if n > 8 * WARM_START_ROWS:
            rows = np.sort(np.random.default_rng(seed).choice(n, WARM_START_ROWS, replace=False))
            zs, ys = z[rows], y[rows]
            sub = temperature_moments(zs, ys, 1.0)
            b_sub, _, _, _ = _newton(lambda b: temperature_moments(zs, ys, b), 1.0, sub, rtol / 10, max_iter)
            candidate = on_all(b_sub)
            passes += 1
            if candidate[0] <= f0:
                beta, fgh = b_sub, candidate
        beta, f, evaluations, converged = _newton(on_all, beta, fgh, rtol, max_iter)
        passes += evaluations
        if 1.0 < beta < 1.0 / T_MIN and f < math.log(2.0) / n:
            # A sample whose label is tied with or beaten by another class costs at least log 2 at every T,
            # so a mean NLL below log(2) / N means every label wins outright: the NLL then falls for all
            # T -> 0, but Newton can stall early where it and its derivatives underflow. The infimum is at
            # the bound. (The test costs no pass over the data.)
            beta, converged = 1.0 / T_MIN, True
            f = on_all(beta)[0]
            passes += 1
    t = 1.0 / beta
    at_bound = t <= T_MIN * (1 + 1e-9) or t >= T_MAX * (1 - 1e-9)
    if f > f0:  # the line search prevents it; the promise is kept explicitly
        t, f = 1.0, f0
    if at_bound:
        warnings.warn(
            f"the fitted temperature reached its bound T = {t:g}: the NLL keeps falling "
            "towards it (separable or constant data); treat it with care",
            RuntimeWarning,
            stacklevel=2,
        )
    return TemperatureFit(
        temperature=t, nll_before=f0, nll_after=f, iterations=passes, converged=converged, at_bound=at_bound
    )


def default_temperature_grid(n: int = 41, low: float = 0.25, high: float = 4.0) -> np.ndarray:
    """A log-spaced grid of temperatures that includes ``T = 1`` when ``n`` is odd.

    Examples
    --------
    >>> default_temperature_grid(5).round(3)
    array([0.25, 0.5 , 1.  , 2.  , 4.  ])
    """
    return np.geomspace(low, high, n)


@dataclass(frozen=True)
class TemperatureSweep:
    """NLL, Brier and ECE at each temperature of a grid."""

    temperature: np.ndarray
    nll: np.ndarray
    brier: np.ndarray
    ece: np.ndarray
    mean_confidence: np.ndarray


def temperature_sweep(
    logits: ArrayLike,
    labels: ArrayLike,
    temperatures: ArrayLike | None = None,
    n_bins: int = 15,
    strategy: Strategy = "uniform",
) -> TemperatureSweep:
    """Evaluate NLL, Brier score and ECE over a grid of temperatures.

    One fused pass over the logits per temperature.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.array([[4.0, 0.0], [4.0, 0.0], [0.0, 4.0], [4.0, 0.0]])
    >>> sw = temperature_sweep(z, [0, 0, 1, 1], [1.0, 3.641])
    >>> bool(sw.nll[1] < sw.nll[0])
    True
    """
    z = check_logits(logits)
    y = check_labels(labels, *z.shape)
    grid = default_temperature_grid() if temperatures is None else np.asarray(temperatures, dtype=np.float64)
    if grid.ndim != 1 or grid.size == 0 or np.any(~np.isfinite(grid)) or np.any(grid <= 0):
        raise ParameterError("temperatures must be a non-empty 1-D array of positive finite numbers")
    out = {name: np.empty(grid.size) for name in ("nll", "brier", "ece", "mean_confidence")}
    with assume_valid():
        for i, t in enumerate(grid):
            s = sample_scores(z, y, temperature=float(t))
            assert s.true_log_probability is not None and s.brier is not None and s.correct is not None  # labels given
            out["nll"][i] = -np.mean(s.true_log_probability)
            out["brier"][i] = np.mean(s.brier)
            out["mean_confidence"][i] = np.mean(s.confidence)
            out["ece"][i] = reliability_bins(s.confidence, s.correct, n_bins, strategy).ece
    return TemperatureSweep(temperature=grid, **out)
