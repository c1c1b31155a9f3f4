"""Numba kernels behind :mod:`logitscope.analysis.scores`.

Importing this module fails when numba is missing; the callers then use the
numpy path, which computes the same quantities. Each row is read twice (a
max/argmax scan, then the exponentials), both in float64, rows in parallel.
"""

from __future__ import annotations

import math

import numba
import numpy as np

_OPTS = {"nogil": True, "cache": True, "parallel": True, "error_model": "numpy"}


@numba.njit(**_OPTS)
def scores_kernel(z, y, has_y, beta, pred, conf, ent, margin, lmargin, energy, logptrue, brier, rank):
    n, k = z.shape
    for i in numba.prange(n):
        m1 = -np.inf
        m2 = -np.inf
        a = 0
        for j in range(k):
            v = np.float64(z[i, j]) * beta
            if v > m1:
                m2 = m1
                m1 = v
                a = j
            elif v > m2:
                m2 = v
        s = 0.0
        t = 0.0
        u = 0.0
        for j in range(k):
            d = np.float64(z[i, j]) * beta - m1
            e = math.exp(d)
            s += e
            t += e * d
            u += e * e
        log_s = math.log(s)
        pred[i] = a
        conf[i] = 1.0 / s
        h = log_s - t / s
        ent[i] = h if h > 0.0 else 0.0
        margin[i] = (1.0 - math.exp(m2 - m1)) / s
        lmargin[i] = m1 - m2
        energy[i] = -(m1 + log_s) / beta
        if has_y:
            zy = np.float64(z[i, y[i]]) * beta
            lp = zy - m1 - log_s
            logptrue[i] = lp
            brier[i] = u / (s * s) - 2.0 * math.exp(lp) + 1.0
            c = 0
            for j in range(k):
                if np.float64(z[i, j]) * beta > zy:
                    c += 1
            rank[i] = 1 + c


@numba.njit(**_OPTS)
def moments_kernel(z, y, beta):  # pragma: no cover - compiled
    n, k = z.shape
    nll = 0.0
    d1 = 0.0
    d2 = 0.0
    for i in numba.prange(n):
        zm = -np.inf
        for j in range(k):
            v = np.float64(z[i, j])
            if v > zm:
                zm = v
        s = 0.0
        ez = 0.0
        ez2 = 0.0
        for j in range(k):
            c = np.float64(z[i, j]) - zm
            e = math.exp(beta * c)
            s += e
            ez += e * c
            ez2 += e * c * c
        ez /= s
        ez2 /= s
        zy = np.float64(z[i, y[i]])
        nll += beta * zm + math.log(s) - beta * zy
        d1 += ez + zm - zy
        var = ez2 - ez * ez
        d2 += var if var > 0.0 else 0.0
    return nll, d1, d2
