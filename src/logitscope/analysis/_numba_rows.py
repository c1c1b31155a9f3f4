"""Numba kernels that read selected rows of the logit matrix in place (no gathered copy of them).

Kept apart from :mod:`._numba_kernels` so that numba's on-disk cache of those kernels stays valid when
these change (numba keys its cache on the source file). Each kernel here is its namesake there with row
``rows[i]`` read where that one reads row ``i``: on the same rows in the same order it adds the same terms
in the same order, so it returns the same sums to the last bit (checked in the tests).
"""

from __future__ import annotations

import math

import numba
import numpy as np

from ._numba_kernels import _OPTS, exp_nonpositive, maxnum


@numba.njit(**_OPTS)
def moments_on_rows(z, y, rows, beta):  # pragma: no cover - compiled
    """:func:`._numba_kernels.moments_kernel` on ``z[rows]`` and ``y[rows]``, read in place."""
    n = rows.size
    k = z.shape[1]
    nll = 0.0
    d1 = 0.0
    d2 = 0.0
    for i in numba.prange(n):
        r = rows[i]
        row = z[r]
        zm = -np.inf
        for j in range(k):
            zm = maxnum(zm, np.float64(row[j]))
        s = 0.0
        ez = 0.0
        ez2 = 0.0
        for j in range(k):
            c = np.float64(row[j]) - zm
            e = exp_nonpositive(beta * c)
            s += e
            ez += e * c
            ez2 += e * c * c
        ez /= s
        ez2 /= s
        zy = np.float64(row[y[r]])
        nll += beta * (zm - zy) + math.log(s)
        d1 += ez + (zm - zy)  # zm - zy first: exact when the label is the top class
        var = ez2 - ez * ez
        d2 += var if var > 0.0 else 0.0
    return nll, d1, d2
