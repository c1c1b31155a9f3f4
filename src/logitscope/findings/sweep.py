"""The temperature finding: the fitted temperature and NLL, ECE and Brier score over a grid of T."""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from .. import analysis as an
from .calibration import _label_rows
from .choices import Binning

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["SweepFinding", "fitted_temperature", "sweep_finding", "sweep_grid"]

#: Points of the log-spaced grid before the marked temperatures are added.
GRID_POINTS = 41


#: Significant bits of each grid point's inverse temperature (see :func:`sweep_grid`).
GRID_BITS = 7


def _round_bits(x: np.ndarray, bits: int) -> np.ndarray:
    """``x`` (positive) rounded to ``bits`` significant bits."""
    mant, exp = np.frexp(x)
    return np.ldexp(np.round(mant * 2.0**bits), exp - bits)


def sweep_grid(marks: Sequence[float] = ()) -> np.ndarray:
    """The temperatures swept: 41 log-spaced points over 0.25..4, widened to hold every mark (within the
    accepted range of a temperature), plus the marks.

    Each grid point's ``1 / T`` is rounded to 7 significant bits (it moves by at most 0.4 %, the ends
    and ``T = 1`` not at all): the inverse temperatures are then whole multiples of a few powers of two,
    and the sweep evaluates them all with one exponential per logit (:mod:`logitscope.analysis._sweep`).
    The marks are kept exactly.

    Examples
    --------
    >>> g = sweep_grid([1.37])
    >>> float(g.min()), float(g.max()), bool(np.any(g == 1.37)), bool(np.any(g == 1.0)), g.size
    (0.25, 4.0, True, True, 42)
    """
    m = [float(t) for t in marks]
    t_lo, t_hi = an.temperature.T_MIN, an.temperature.T_MAX  # the accepted range of a temperature
    lo = max(t_lo, min([0.25, *(t / 2 for t in m)]))
    hi = min(t_hi, max([4.0, *(t * 2 for t in m)]))
    betas = _round_bits(1.0 / np.geomspace(lo, hi, GRID_POINTS), GRID_BITS)
    grid = np.clip([_round_trip(b) for b in betas.tolist()], t_lo, t_hi)
    return np.unique(np.r_[grid, m])


def _round_trip(beta: float) -> float:
    """``T = 1 / beta`` for ``beta`` or a 7-bit neighbour of it whose ``1 / T`` gives it back exactly."""
    _, exp = np.frexp(beta)
    step = float(np.ldexp(1.0, int(exp) - GRID_BITS))
    for k in (0, 1, -1, 2, -2):
        b = beta + k * step
        if 1.0 / (1.0 / b) == b:
            return 1.0 / b
    return 1.0 / beta


def fitted_temperature(frame: LogitFrame, rows: Any = None) -> an.TemperatureFit:
    """The temperature of minimum NLL on ``rows`` (default all labelled rows); a bound hit sets ``at_bound``.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> z = np.array([[4.0, 0.0], [4.0, 0.0], [0.0, 4.0], [4.0, 0.0]])
    >>> round(fitted_temperature(LogitFrame(z, labels=[0, 0, 1, 1])).temperature, 3)
    3.641
    """
    r = _label_rows(frame, rows, "fitting a temperature")
    with warnings.catch_warnings(), an.assume_valid():
        warnings.simplefilter("ignore", RuntimeWarning)  # a bound hit is carried in at_bound
        return an.fit_temperature(frame.logits, frame._labels_for_analysis(), rows=r)


@dataclass(frozen=True)
class SweepFinding:
    """NLL, ECE, Brier score and mean confidence of some rows over a grid of temperatures."""

    temperature: np.ndarray = field(repr=False)
    nll: np.ndarray = field(repr=False)
    ece: np.ndarray = field(repr=False)
    brier: np.ndarray = field(repr=False)
    mean_confidence: np.ndarray = field(repr=False)
    fitted: an.TemperatureFit | None
    binning: Binning
    n: int
    rows: np.ndarray | None = field(default=None, repr=False)

    def best(self, metric: str) -> int:
        """Index of the grid point where ``metric`` ("nll", "ece" or "brier") is least."""
        return int(np.argmin(getattr(self, metric)))

    def at(self, temperature: float) -> dict[str, float]:
        """The values at a grid temperature (the nearest grid point)."""
        i = int(np.argmin(np.abs(np.log(self.temperature) - np.log(float(temperature)))))
        return {
            "temperature": float(self.temperature[i]),
            "nll": float(self.nll[i]),
            "ece": float(self.ece[i]),
            "brier": float(self.brier[i]),
            "mean_confidence": float(self.mean_confidence[i]),
        }


def sweep_finding(
    frame: LogitFrame,
    rows: Any = None,
    binning: Binning | None = None,
    grid: Sequence[float] | np.ndarray | None = None,
    marks: Sequence[float] = (),
    fitted: an.TemperatureFit | None = None,
    fit: bool = True,
) -> SweepFinding:
    """Sweep the temperature over ``grid`` (default :func:`sweep_grid` of the marks and the fitted T).

    Parameters
    ----------
    frame : LogitFrame
        Needs labels.
    rows : array_like, optional
        The rows swept (and fitted on); default all.
    binning : Binning, optional
        The bins of the ECE; default ``Binning()``.
    grid : array_like, optional
        Temperatures; default :func:`sweep_grid` over ``marks`` and the fitted temperature.
    marks : sequence of float
        Temperatures that must lie on the grid (the current one, the frame's own).
    fitted : TemperatureFit, optional
        A fit already made on these rows.
    fit : bool, default True
        Fit the temperature on these rows when ``fitted`` is not given (False: ``fitted`` stays None).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> z = np.array([[4.0, 0.0], [4.0, 0.0], [0.0, 4.0], [4.0, 0.0]])
    >>> sw = sweep_finding(LogitFrame(z, labels=[0, 0, 1, 1]), marks=[1.0])
    >>> bool(sw.temperature[sw.best("nll")] > 1.0), round(sw.fitted.temperature, 3)
    (True, 3.641)
    """
    r = _label_rows(frame, rows, "a temperature sweep")
    b = Binning() if binning is None else binning
    fit_ = fitted_temperature(frame, r) if fitted is None and fit else fitted
    extra = [] if fit_ is None else [fit_.temperature]
    g = sweep_grid([*marks, *extra]) if grid is None else np.sort(np.asarray(grid, dtype=np.float64))
    with an.assume_valid():
        sw = an.temperature_sweep(frame.logits, frame._labels_for_analysis(), g, b.n_bins, b.strategy, rows=r)
    return SweepFinding(
        temperature=sw.temperature,
        nll=sw.nll,
        ece=sw.ece,
        brier=sw.brier,
        mean_confidence=sw.mean_confidence,
        fitted=fit_,
        binning=b,
        n=frame.n_samples if r is None else int(r.size),
        rows=r,
    )
