"""Numba kernels of the temperature sweep and of confident learning (see :mod:`._numba_kernels` for the rules).

Kept apart from :mod:`._numba_kernels` so that numba's on-disk cache of those kernels stays valid when
these change (numba keys its cache on the source file).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from ._numba_kernels import _OPTS, exp_nonpositive, maxnum


@numba.njit(inline="always", cache=True)
def _bin_below(edges, c):  # pragma: no cover - compiled
    """How many of the sorted, equal-width inner ``edges`` lie below ``c`` (``searchsorted(edges, c, "left")``)."""
    nb = edges.size
    g = min(nb, max(0, np.int64(c * (nb + 1))))  # the guess from the width, corrected by comparisons
    while g < nb and edges[g] < c:
        g += 1
    while g > 0 and edges[g - 1] >= c:
        g -= 1
    return g


#: Running products of the row sums are logged when they pass this (a row's sum is at most K).
_PRODUCT_LIMIT = 1e200


@numba.njit(**_OPTS)
def sweep_kernel(z, y, betas, seg_start, seg_delta, q, edges, n_chunks):  # pragma: no cover - compiled
    """Sums over rows of what a temperature sweep needs, at every inverse temperature at once.

    ``betas`` are grouped into segments (``seg_start``): within segment ``s`` every beta is
    ``q[t] * seg_delta[s]`` with whole, ascending ``q``. A row's ``e^(beta x)`` (``x = z - max z``) is
    then ``E^q`` with ``E = e^(delta x)``: one exponential per element and segment, the rest products
    of the powers ``E^(2^b)`` (relative error about ``q`` units in the last place). A segment of one
    beta with ``q = 1`` is the plain exponential. The log of each row's sum enters the NLL through a
    running product of the sums, logged when it grows large (one logarithm per many rows). Returns
    ``sums`` (m, 3): minus the log-probability of the label, the Brier score and the confidence; and
    ``bins`` (m, len(edges) + 1, 3): count, right and confidence per equal-width bin (``edges`` the
    inner bin edges, as :func:`logitscope.analysis.reliability_bins` places a confidence).
    """
    n, k = z.shape
    m = betas.size
    n_seg = seg_start.size - 1
    nb = edges.size + 1
    bits = 1
    for s in range(n_seg):
        prev = 0
        for t in range(seg_start[s], seg_start[s + 1]):
            d = q[t] - prev
            prev = q[t]
            while (1 << bits) <= d:
                bits += 1
    sums = np.zeros((n_chunks, m, 3))
    bins = np.zeros((n_chunks, m, nb, 3))
    per = (n + n_chunks - 1) // n_chunks
    for c in numba.prange(n_chunks):
        x = np.empty(k)
        pw = np.empty((bits, k))
        cur = np.empty(k)
        prod = np.ones(m)
        logs = np.zeros(m)
        lo = c * per
        hi = min(n, lo + per)
        for i in range(lo, hi):
            row = z[i]
            top = -np.inf
            for j in range(k):
                top = maxnum(top, np.float64(row[j]))
            a = np.int32(k)
            for j in range(k):
                a = min(a, np.int32(j) if np.float64(row[j]) == top else np.int32(k))
            yi = y[i]
            right = 1.0 if a == yi else 0.0
            dy = np.float64(row[yi]) - top
            for j in range(k):
                x[j] = np.float64(row[j]) - top
            for s in range(n_seg):
                delta = seg_delta[s]
                for j in range(k):
                    pw[0, j] = exp_nonpositive(x[j] * delta)
                prev = 0
                top_bit = 0
                for t in range(seg_start[s], seg_start[s + 1]):
                    d = q[t] - prev
                    while (1 << (top_bit + 1)) <= d:
                        top_bit += 1
                        for j in range(k):
                            pw[top_bit, j] = pw[top_bit - 1, j] * pw[top_bit - 1, j]
                    if prev == 0:
                        for j in range(k):
                            cur[j] = 1.0
                    prev = q[t]
                    # every set bit but the highest multiplies on its own; the highest one with the sums
                    b = 0
                    while d > 1:
                        if d & 1:
                            for j in range(k):
                                cur[j] *= pw[b, j]
                        d >>= 1
                        b += 1
                    ssum = 0.0
                    usum = 0.0
                    for j in range(k):
                        e = cur[j] * pw[b, j]
                        cur[j] = e
                        ssum += e
                        usum += e * e
                    conf = 1.0 / ssum
                    p = prod[t] * ssum
                    if p > _PRODUCT_LIMIT:
                        logs[t] += math.log(p)
                        p = 1.0
                    prod[t] = p
                    sums[c, t, 0] -= dy * betas[t]
                    sums[c, t, 1] += usum * conf * conf - 2.0 * cur[yi] * conf + 1.0
                    sums[c, t, 2] += conf
                    bb = _bin_below(edges, conf)
                    bins[c, t, bb, 0] += 1.0
                    bins[c, t, bb, 1] += right
                    bins[c, t, bb, 2] += conf
        for t in range(m):
            sums[c, t, 0] += logs[t] + math.log(prod[t])
    return sums.sum(axis=0), bins.sum(axis=0)


@numba.njit(**_OPTS)
def confident_kernel(z, beta, thresholds, assigned, n_chunks):  # pragma: no cover - compiled
    """Confident learning's assignment: per row the class ``j`` of largest ``p_j`` among those with
    ``p_j >= t_j - 1e-12`` (the first on ties), or -1 (``thresholds`` hold +inf for absent classes)."""
    n, k = z.shape
    per = (n + n_chunks - 1) // n_chunks
    for c in numba.prange(n_chunks):
        e = np.empty(k)
        for i in range(c * per, min(n, (c + 1) * per)):
            row = z[i]
            top = -np.inf
            for j in range(k):
                top = maxnum(top, np.float64(row[j]))
            s = 0.0
            for j in range(k):
                v = exp_nonpositive((np.float64(row[j]) - top) * beta)
                e[j] = v
                s += v
            best = -1.0
            at = -1
            for j in range(k):
                p = e[j] / s
                if p >= thresholds[j] - 1e-12 and p > best:
                    best = p
                    at = j
            assigned[i] = at


@numba.njit(**_OPTS)
def runner_up_kernel(z, rows, out):  # pragma: no cover - compiled
    """Per given row, the index of the largest logit once the first arg-max is set aside (first on ties)."""
    k = z.shape[1]
    for r in numba.prange(rows.size):
        row = z[rows[r]]
        a = 0
        top = np.float64(row[0])
        for j in range(1, k):
            v = np.float64(row[j])
            if v > top:
                top = v
                a = j
        b = -1
        second = -np.inf
        for j in range(k):
            v = np.float64(row[j])
            if j != a and (b < 0 or v > second):
                second = v
                b = j
        out[r] = b
