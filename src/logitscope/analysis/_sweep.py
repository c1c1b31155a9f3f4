"""Sums behind a temperature sweep, every temperature of the grid in one pass over the logits.

A sweep needs, at each temperature ``T = 1 / beta`` of a grid, the mean NLL,
the mean Brier score, the mean confidence and the equal-width reliability bins
(for the ECE). Per row these come from ``S(beta) = sum_k e^(beta x_k)`` and
``sum_k e^(2 beta x_k)`` with ``x = z - max z``. :func:`sweep_sums` reads each
row once and evaluates every temperature on it, and gives the sums over rows,
so two blocks of rows (or two chunks of a store) add up (:meth:`SweepSums.add`).

The exponentials dominate the cost. When the betas are whole multiples
``q * delta`` of one power of two ``delta`` (``q <= Q_MAX``), a row needs one
exponential per element, ``E = e^(delta x)``, and every ``e^(beta x) = E^q`` is a
product of the powers ``E^(2^b)``: a few multiplications instead of an
exponential per temperature. The relative error of ``E^q`` is about ``q``
units in the last place of ``E`` (below ``2.3e-13`` for ``q <= 1024``). Betas
that are not such multiples (a fitted temperature, say) get their own
exponential. :func:`logitscope.findings.sweep_grid` gives grids whose betas
have at most 7 significant bits, which fall into few such groups.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ._blocks import block_slices

__all__ = ["Q_MAX", "SweepPlan", "SweepSums", "numba_kernels", "plan_betas", "sweep_sums"]

#: Largest multiple ``q`` of a group's ``delta``: bounds the error of ``E^q`` (about ``q`` ulps).
Q_MAX = 1024


def numba_kernels() -> Any:
    """The compiled sweep and confident-learning kernels (:mod:`._numba_sweep`); call only when numba runs."""
    from . import _numba_sweep

    return _numba_sweep


@dataclass(frozen=True)
class SweepPlan:
    """Betas grouped for the kernel: ``betas[order]`` runs group by group (``start``), ``q`` ascending in each."""

    order: np.ndarray
    start: np.ndarray
    delta: np.ndarray
    q: np.ndarray


def _odd_part(beta: float) -> tuple[int, int]:
    """``beta = odd * 2**exponent`` with ``odd`` an odd whole number: ``(odd, exponent)``."""
    mant, exp = np.frexp(beta)
    num = int(mant * (1 << 53))
    exp = int(exp) - 53
    while num % 2 == 0:
        num //= 2
        exp += 1
    return num, exp


def plan_betas(betas: np.ndarray) -> SweepPlan:
    """Group ``betas`` into runs of whole multiples of a power of two (see the module docstring).

    Examples
    --------
    >>> p = plan_betas(np.array([0.25, 1.0, 1 / 1.37, 4.0]))
    >>> p.order.tolist(), p.start.tolist(), p.q.tolist()  # 0.25, 1 and 4 are 1, 4 and 16 quarters; 1/1.37 alone
    ([0, 1, 3, 2], [0, 3, 4], [1, 4, 16, 1])
    """
    b = np.asarray(betas, dtype=np.float64)
    friendly: list[tuple[float, int, int]] = []  # (beta, index, unit exponent)
    alone: list[int] = []
    for i, beta in enumerate(b.tolist()):
        odd, exp = _odd_part(beta)
        (friendly.append((beta, i, exp)) if odd <= Q_MAX else alone.append(i))
    friendly.sort()
    order: list[int] = []
    start: list[int] = [0]
    delta: list[float] = []
    q: list[int] = []
    group: list[tuple[float, int, int]] = []

    def close(members: list[tuple[float, int, int]]) -> None:
        unit = 2.0 ** min(e for _, _, e in members)
        delta.append(unit)
        for beta, i, _ in members:
            order.append(i)
            q.append(round(beta / unit))
        start.append(len(order))

    for item in friendly:
        trial = [*group, item]
        unit = 2.0 ** min(e for _, _, e in trial)
        if group and item[0] / unit > Q_MAX:
            close(group)
            group = [item]
        else:
            group = trial
    if group:
        close(group)
    for i in alone:
        order.append(i)
        q.append(1)
        delta.append(float(b[i]))
        start.append(len(order))
    return SweepPlan(
        np.asarray(order, dtype=np.int64), np.asarray(start, dtype=np.int64), np.asarray(delta), np.asarray(q, np.int64)
    )


@dataclass
class SweepSums:
    """Sums over rows at each beta (in the caller's order): minus the log-probability of the label, the Brier
    score, the confidence; and per equal-width bin the count, the right predictions and the confidence."""

    betas: np.ndarray
    n: int
    nll: np.ndarray
    brier: np.ndarray
    confidence: np.ndarray
    bin_count: np.ndarray
    bin_right: np.ndarray
    bin_confidence: np.ndarray

    def add(self, other: SweepSums) -> SweepSums:
        """The sums over both sets of rows (same betas and bins)."""
        return SweepSums(
            self.betas, self.n + other.n, self.nll + other.nll, self.brier + other.brier,
            self.confidence + other.confidence, self.bin_count + other.bin_count, self.bin_right + other.bin_right,
            self.bin_confidence + other.bin_confidence,
        )  # fmt: skip


def _numpy_block(zb: np.ndarray, yb: np.ndarray, plan: SweepPlan, betas_k: np.ndarray, edges: np.ndarray) -> tuple:
    """The kernel's arithmetic on one block, vectorised over rows (the numpy backend)."""
    x = np.asarray(zb, dtype=np.float64)
    r = np.arange(x.shape[0])
    top_idx = x.argmax(axis=1)
    top = x[r, top_idx]
    right = (top_idx == yb).astype(np.float64)
    x = x - top[:, None]
    dy = x[r, yb]
    m = betas_k.size
    nb = edges.size + 1
    sums = np.zeros((m, 3))
    bins = np.zeros((m, nb, 3))
    for s in range(plan.start.size - 1):
        powers = [np.exp(x * plan.delta[s])]
        cur = np.ones_like(x)
        prev = 0
        for t in range(int(plan.start[s]), int(plan.start[s + 1])):
            d = int(plan.q[t]) - prev
            while (1 << len(powers)) <= d:
                powers.append(powers[-1] * powers[-1])
            prev = int(plan.q[t])
            b = 0
            while d:
                if d & 1:
                    cur = cur * powers[b]
                d >>= 1
                b += 1
            ssum = cur.sum(axis=1)
            usum = np.einsum("ij,ij->i", cur, cur)
            conf = 1.0 / ssum
            lp = dy * betas_k[t] - np.log(ssum)
            sums[t] = (-lp.sum(), (usum * conf * conf - 2.0 * cur[r, yb] * conf + 1.0).sum(), conf.sum())
            bb = np.searchsorted(edges, conf, side="left")
            bins[t, :, 0] = np.bincount(bb, minlength=nb)
            bins[t, :, 1] = np.bincount(bb, weights=right, minlength=nb)
            bins[t, :, 2] = np.bincount(bb, weights=conf, minlength=nb)
    return sums, bins


def sweep_sums(
    z: np.ndarray, y: np.ndarray, betas: np.ndarray, n_bins: int, rows: np.ndarray | None = None, backend: str = "auto"
) -> SweepSums:
    """The sums of a sweep over ``rows`` (all when None) of valid logits ``z`` with labels ``y``.

    Examples
    --------
    >>> z = np.array([[2.0, 0.0], [0.0, 1.0]])
    >>> s = sweep_sums(z, np.array([0, 0]), np.array([1.0, 0.5]), 10)
    >>> s.n, s.bin_count.sum(axis=1).tolist()
    (2, [2.0, 2.0])
    """
    from .scores import _numba_blocks, _pick

    betas = np.asarray(betas, dtype=np.float64)
    plan = plan_betas(betas)
    betas_k = betas[plan.order]
    edges = np.linspace(0.0, 1.0, n_bins + 1)[1:-1]  # as reliability_bins places a confidence
    nb = edges.size + 1
    m = betas.size
    sums = np.zeros((m, 3))
    bins = np.zeros((m, nb, 3))
    n = z.shape[0] if rows is None else int(rows.size)
    use_numba = _pick(backend) == "numba"  # type: ignore[arg-type]
    per = max(1, (1 << 20) // max(1, z.shape[1]))  # rows gathered at a time (4 MB of float32)
    pieces: list[tuple[np.ndarray, np.ndarray]] = []
    if rows is None:
        if use_numba:
            pieces = [(zc, y[sl]) for sl, zc in _numba_blocks(z)]
        else:
            pieces = [(z[sl], y[sl]) for sl in block_slices(*z.shape)]
    for zc, yc in pieces if rows is None else ((z[rows[a : a + per]], y[rows[a : a + per]]) for a in range(0, n, per)):
        if use_numba:
            if zc.dtype == np.float16:
                zc = zc.astype(np.float32)
            zc = np.ascontiguousarray(zc)
            n_chunks = int(min(64, max(1, zc.shape[0] // 2048)))
            a, b = numba_kernels().sweep_kernel(zc, yc, betas_k, plan.start, plan.delta, plan.q, edges, n_chunks)
        else:
            a, b = _numpy_block(zc, yc, plan, betas_k, edges)
        sums += a
        bins += b
    back = np.empty_like(plan.order)
    back[plan.order] = np.arange(m)
    sums, bins = sums[back], bins[back]
    return SweepSums(
        betas, n, sums[:, 0], sums[:, 1], sums[:, 2], bins[:, :, 0], bins[:, :, 1], bins[:, :, 2]
    )  # fmt: skip
