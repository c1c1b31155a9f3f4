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
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ..errors import InputTypeError, ParameterError, ShapeError
from ..parameters import check as check_parameter
from ..parameters import get_range
from ._sweep import SweepSums, sweep_sums
from ._validation import assume_valid, check_labels, check_logits, checks_enabled
from .calibration import ReliabilityBins, Strategy, reliability_bins
from .scores import sample_scores, temperature_moments

__all__ = [
    "TemperatureFit",
    "TemperatureSweep",
    "default_temperature_grid",
    "fit_temperature",
    "newton_fit",
    "sweep_from_sums",
    "temperature_sweep",
]

#: The fitted temperature stays in the accepted range of a temperature (logitscope.parameters).
T_MIN, T_MAX = get_range("temperature").bounds()

#: Elements per gathered block of selected rows (4 MB of float32): enough work for the
#: parallel kernel, small beside the matrix.
GATHER_BUDGET = 1 << 20


@dataclass(frozen=True)
class TemperatureFit:
    """Result of :func:`fit_temperature`.

    Attributes
    ----------
    temperature : float
        The fitted temperature, in [1e-3, 1e3].
    nll_before, nll_after : float
        Mean NLL at ``T = 1`` and at the fitted temperature, on the rows fitted.
    converged : bool
        Newton's stopping rule was met (or the NLL is flat, see ``flat``).
    at_bound : bool
        The fit stopped at ``T = 1e-3`` or ``T = 1e3`` (a warning was issued).
    passes : int
        Full passes over the rows fitted, each one evaluation of the NLL and its
        two derivatives; the evaluation at ``T = 1`` for ``nll_before`` counts.
        This is what the fit costs (the number a report should quote).
    newton_steps : int
        Newton steps taken on all the rows fitted (a step whose line search
        needed several trial points is one step of several passes).
    warm_start_rows, warm_start_steps : int
        Rows of the seeded subsample the fit started on and the Newton steps
        taken there (0 and 0 without a warm start); those steps cost a small
        fraction of a pass each.
    n_rows : int
        Rows the fit used (all rows, or ``len(rows)``).
    flat : bool
        The NLL has zero slope and zero curvature at ``T = 1``: every row is
        constant (a constant matrix, in particular), or, numerically, every
        row's softmax at ``T = 1`` is all on its label with no variance
        left. No temperature fits better than ``T = 1``, which is returned.
    """

    temperature: float
    nll_before: float
    nll_after: float
    converged: bool
    at_bound: bool
    passes: int
    newton_steps: int
    warm_start_rows: int = 0
    warm_start_steps: int = 0
    n_rows: int = 0
    flat: bool = False

    @property
    def iterations(self) -> int:
        """Deprecated name of :attr:`passes` (it always counted passes, not Newton steps)."""
        return self.passes


Moments = tuple[float, float, float]

#: Rows of the random subsample that finds a starting point on large data.
WARM_START_ROWS = 32768


def _newton(
    evaluate: Callable[[float], Moments], beta: float, fgh: Moments, rtol: float, max_iter: int
) -> tuple[float, float, int, int, bool]:
    """Safeguarded Newton on the convex NLL(beta); returns (beta, nll, evaluations, steps, converged).

    Stops when the predicted Newton step is below ``rtol * beta`` and returns
    the last *evaluated* point, whose distance to the optimum is about that
    step. Where the slope and the curvature are both zero the point is a
    minimiser of the convex NLL (flat there) and is returned at once.
    """
    lo, hi = 1.0 / T_MAX, 1.0 / T_MIN
    f, g, h = fgh
    evaluations = 0
    for step_no in range(max_iter):
        if g == 0.0 and h <= 0.0:  # flat: no direction descends
            return beta, f, evaluations, step_no, True
        step = -g / h if h > 0 else math.copysign(beta, -g)
        new = min(hi, max(lo, beta + step))
        if abs(new - beta) <= rtol * beta:
            return beta, f, evaluations, step_no, True
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
            return beta, f, evaluations, step_no, True
        beta, f, g, h = new, f_new, g_new, h_new
    return beta, f, evaluations, max_iter, False


def _check_rows(rows: Any, n: int) -> np.ndarray | None:
    """``rows`` as int64 positions into ``n`` rows (a boolean mask of length ``n`` is accepted), or None."""
    if rows is None:
        return None
    r = np.asarray(rows)
    if r.dtype == bool:
        if r.shape != (n,):
            raise ShapeError(f"a boolean row mask must have shape ({n},), got {r.shape}")
        r = np.flatnonzero(r)
    elif r.dtype.kind not in "iu":
        raise InputTypeError(f"rows must be integer positions or a boolean mask, got dtype {r.dtype}")
    if r.ndim != 1:
        raise ShapeError(f"rows must be 1-D, got shape {r.shape}")
    if r.size == 0:
        raise ShapeError("rows is empty: at least one row is needed")
    r = r.astype(np.int64, copy=False)
    if r.min() < 0 or r.max() >= n:
        raise ShapeError(f"rows must lie in [0, {n}); got values from {r.min()} to {r.max()}")
    return r


def _gathered(z: np.ndarray, rows: np.ndarray) -> Iterator[tuple[slice, np.ndarray]]:
    """Blocks of the selected rows: (positions within ``rows``, those rows' indices), one block at a time."""
    per = max(1, GATHER_BUDGET // max(1, z.shape[1]))
    for start in range(0, rows.size, per):
        part = slice(start, min(rows.size, start + per))
        yield part, rows[part]


def _rows_kernel(z: np.ndarray, y: np.ndarray) -> Callable[..., Moments] | None:
    """The compiled moments kernel that reads selected rows in place, when numba runs and can read ``z`` as is."""
    from .scores import _numba, _pick

    if _pick("auto") != "numba" or _numba() is None:
        return None
    if z.dtype not in (np.float32, np.float64) or not z.flags.c_contiguous or y.dtype != np.int64:
        return None
    from . import _numba_rows

    kernel: Callable[..., Moments] = _numba_rows.moments_on_rows
    return kernel


def _block_moments(z: np.ndarray, y: np.ndarray, idx: np.ndarray, beta: float, kernel: Any) -> Moments:
    """:func:`temperature_moments` of the rows ``idx``: read in place by ``kernel``, else gathered (a copy)."""
    if kernel is not None:
        nll, d1, d2 = kernel(z, y, idx, beta)
        if np.isfinite(d1) or not checks_enabled():
            return nll / idx.size, d1 / idx.size, d2 / idx.size
    return temperature_moments(z[idx], y[idx], beta)  # a non-finite row: this one names it


def _moments_on(z: np.ndarray, y: np.ndarray, beta: float, rows: np.ndarray | None) -> Moments:
    """:func:`temperature_moments` on ``rows`` (all rows when None), one block of rows at a time.

    The blocks are those of a gathered copy (:func:`_gathered`), read in place where numba runs, so the sums
    are the same whichever way the rows are read.
    """
    if rows is None:
        return temperature_moments(z, y, beta)
    kernel = _rows_kernel(z, y)
    nll = d1 = d2 = 0.0
    for _, idx in _gathered(z, rows):
        a, b, c = _block_moments(z, y, idx, beta, kernel)
        nll, d1, d2 = nll + a * idx.size, d1 + b * idx.size, d2 + c * idx.size
    return nll / rows.size, d1 / rows.size, d2 / rows.size


def fit_temperature(
    logits: ArrayLike,
    labels: ArrayLike,
    rtol: float = 1e-5,
    max_iter: int = 50,
    seed: int = 0,
    rows: ArrayLike | None = None,
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
    rows : array_like of int or bool, optional
        Fit on these rows only (positions into ``logits`` and ``labels``, or a
        boolean mask), for example the fit part of a held-out split. The rows
        are gathered one block at a time, so the matrix is never copied.

    Returns
    -------
    TemperatureFit
        ``nll_after <= nll_before`` always: if no better temperature exists
        the fit returns ``T = 1``. Where the NLL is flat in ``T`` (every row
        constant, in particular a constant matrix, so that the slope and the
        curvature are zero at ``T = 1``) every temperature fits equally well:
        the fit returns ``T = 1`` with ``flat=True`` and no warning. When the
        data are separable (every sample right with a margin) the NLL keeps
        falling as ``T -> 0``, and the fit stops at the bound ``T = 1e-3``
        with ``at_bound=True`` and a warning. ``passes`` counts the passes
        over the rows fitted, ``newton_steps`` the Newton steps.

    Examples
    --------
    >>> import numpy as np
    >>> z = np.array([[4.0, 0.0], [4.0, 0.0], [0.0, 4.0], [4.0, 0.0]])
    >>> fit = fit_temperature(z, [0, 0, 1, 1])
    >>> round(fit.temperature, 4)  # p = 0.75 on every sample is optimal: T = 4 / log 3
    3.641
    >>> fit_temperature(np.zeros((3, 4)), [0, 1, 2]).temperature  # flat NLL: T = 1
    1.0
    """
    z = check_logits(logits)
    n, k = z.shape
    y = check_labels(labels, n, k)
    sel = _check_rows(rows, n)
    n_fit = n if sel is None else sel.size

    def on_all(beta: float) -> Moments:
        return _moments_on(z, y, beta, sel)

    def on_sample(rng: np.random.Generator) -> Callable[[float], Moments]:
        pool = np.arange(n) if sel is None else sel
        sub = np.sort(rng.choice(pool, WARM_START_ROWS, replace=False))
        zs, ys = z[sub], y[sub]
        return lambda b: temperature_moments(zs, ys, b)

    with assume_valid():
        return newton_fit(on_all, on_sample, n_fit, rtol, max_iter, seed)


def newton_fit(
    on_all: Callable[[float], Moments],
    on_sample: Callable[[np.random.Generator], Callable[[float], Moments]],
    n_fit: int,
    rtol: float = 1e-5,
    max_iter: int = 50,
    seed: int = 0,
) -> TemperatureFit:
    """The temperature fit of :func:`fit_temperature`, given how to evaluate the moments.

    ``on_all(beta)`` returns the mean NLL and its first two derivatives in
    ``beta = 1 / T`` over the ``n_fit`` rows (one pass over them); for more
    than ``8 * WARM_START_ROWS`` rows, ``on_sample(rng)`` returns the same
    for a seeded random subsample of ``WARM_START_ROWS`` of them, used for a
    warm start. The in-memory fit and the chunked fit
    (:mod:`logitscope.chunked`) both run this one iteration.
    """
    warm_rows = warm_steps = 0
    start = on_all(1.0)
    f0 = start[0]
    passes = 1
    beta, fgh = 1.0, start
    flat = start[1] == 0.0 and start[2] <= 0.0
    if n_fit > 8 * WARM_START_ROWS and not flat:
        on_sub = on_sample(np.random.default_rng(seed))
        b_sub, _, _, warm_steps, _ = _newton(on_sub, 1.0, on_sub(1.0), rtol / 10, max_iter)
        warm_rows = WARM_START_ROWS
        candidate = on_all(b_sub)
        passes += 1
        if candidate[0] <= f0:
            beta, fgh = b_sub, candidate
    beta, f, evaluations, steps, converged = _newton(on_all, beta, fgh, rtol, max_iter)
    passes += evaluations
    if 1.0 < beta < 1.0 / T_MIN and f < math.log(2.0) / n_fit:
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
        t, f, at_bound = 1.0, f0, False
    if at_bound:
        warnings.warn(
            f"the fitted temperature reached its bound T = {t:g}: the NLL keeps falling "
            "towards it (separable data, or labels the model ranks last); treat it with care",
            RuntimeWarning,
            stacklevel=3,
        )
    return TemperatureFit(
        temperature=t, nll_before=f0, nll_after=f, converged=converged, at_bound=at_bound, passes=passes,
        newton_steps=steps, warm_start_rows=warm_rows, warm_start_steps=warm_steps, n_rows=n_fit, flat=flat,
    )  # fmt: skip


def default_temperature_grid(n: int = 41, low: float = 0.25, high: float = 4.0) -> np.ndarray:
    """A log-spaced grid of temperatures that includes ``T = 1`` when ``n`` is odd and ``low * high = 1``.

    ``n`` lies in the range of ``n_temperatures``, ``low < high`` in the range of a temperature
    (:mod:`logitscope.parameters`).

    Examples
    --------
    >>> default_temperature_grid(5).round(3)
    array([0.25, 0.5 , 1.  , 2.  , 4.  ])
    """
    n = int(check_parameter(n, "n_temperatures"))
    low = float(check_parameter(low, "temperature"))
    high = float(check_parameter(high, "temperature"))
    if not low < high:
        raise ParameterError(f"the grid needs low < high, got low={low:g}, high={high:g}")
    return np.geomspace(low, high, n)


@dataclass(frozen=True)
class TemperatureSweep:
    """NLL, Brier and ECE at each temperature of a grid."""

    temperature: np.ndarray
    nll: np.ndarray
    brier: np.ndarray
    ece: np.ndarray
    mean_confidence: np.ndarray


def _scores_on(
    z: np.ndarray, y: np.ndarray, t: float, rows: np.ndarray | None
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """confidence, correct, log p_y and Brier per row at ``T = t``, on ``rows`` (all when None)."""
    if rows is None:
        s = sample_scores(z, y, temperature=t)
        assert s.true_log_probability is not None and s.brier is not None and s.correct is not None
        return s.confidence, s.correct, s.true_log_probability, s.brier
    conf = np.empty(rows.size)
    correct = np.empty(rows.size, dtype=bool)
    logp = np.empty(rows.size)
    brier = np.empty(rows.size)
    for part, idx in _gathered(z, rows):
        s = sample_scores(z[idx], y[idx], temperature=t)
        assert s.true_log_probability is not None and s.brier is not None and s.correct is not None
        conf[part], correct[part], logp[part], brier[part] = s.confidence, s.correct, s.true_log_probability, s.brier
    return conf, correct, logp, brier


def temperature_sweep(
    logits: ArrayLike,
    labels: ArrayLike,
    temperatures: ArrayLike | None = None,
    n_bins: int = 15,
    strategy: Strategy = "uniform",
    rows: ArrayLike | None = None,
) -> TemperatureSweep:
    """Evaluate NLL, Brier score and ECE over a grid of temperatures.

    With equal-width bins (``strategy="uniform"``) one pass over the logits
    evaluates every temperature (:mod:`logitscope.analysis._sweep`); with
    equal-mass bins, one fused pass per temperature. With ``rows`` (positions
    or a boolean mask) only those rows are evaluated, gathered one block at a
    time, so a held-out part is judged without copying the matrix.

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
    sel = _check_rows(rows, z.shape[0])
    grid = default_temperature_grid() if temperatures is None else np.asarray(temperatures, dtype=np.float64)
    t_range = get_range("temperature")
    if (
        grid.ndim != 1
        or grid.size == 0
        or np.any(~np.isfinite(grid))
        or not all(t_range.contains(float(t)) for t in grid)
    ):
        raise ParameterError(
            f"temperatures must be a non-empty 1-D array of positive finite numbers in {t_range.interval()}"
        )
    out = {name: np.empty(grid.size) for name in ("nll", "brier", "ece", "mean_confidence")}
    if strategy == "uniform":
        # every temperature in one pass over the rows (equal-width bins need no order of the confidences)
        return sweep_from_sums(grid, sweep_sums(z, y, 1.0 / grid, int(check_parameter(n_bins, "n_bins")), sel))
    with assume_valid():
        for i, t in enumerate(grid):
            conf, correct, logp, brier = _scores_on(z, y, float(t), sel)
            out["nll"][i] = -np.mean(logp)
            out["brier"][i] = np.mean(brier)
            out["mean_confidence"][i] = np.mean(conf)
            out["ece"][i] = reliability_bins(conf, correct, n_bins, strategy).ece
    return TemperatureSweep(temperature=grid, **out)


def sweep_from_sums(temperatures: np.ndarray, sums: SweepSums) -> TemperatureSweep:
    """The :class:`TemperatureSweep` of sums over rows (equal-width bins), as the per-temperature passes give it.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope.analysis._sweep import sweep_sums
    >>> z, y = np.array([[2.0, 0.0], [0.0, 1.0]]), np.array([0, 0])
    >>> sw = sweep_from_sums(np.array([1.0]), sweep_sums(z, y, np.array([1.0]), 10))
    >>> round(float(sw.mean_confidence[0]), 6)
    0.805928
    """
    n = sums.n
    m = sums.betas.size
    ece = np.empty(m)
    n_bins = sums.bin_count.shape[1]
    edges = np.linspace(0.0, 1.0, n_bins + 1)
    for i in range(m):
        count = sums.bin_count[i].astype(np.int64)
        with np.errstate(invalid="ignore", divide="ignore"):
            acc, conf = sums.bin_right[i] / count, sums.bin_confidence[i] / count
        bins = ReliabilityBins(edges[:-1], edges[1:], count, acc, conf, np.zeros(0, dtype=np.int64), "uniform")
        ece[i] = bins.ece
    return TemperatureSweep(
        temperature=np.asarray(temperatures, dtype=np.float64), nll=sums.nll / n, brier=sums.brier / n, ece=ece,
        mean_confidence=sums.confidence / n,
    )  # fmt: skip
