"""Numba kernels behind :mod:`logitscope.analysis.scores`.

Importing this module fails when numba is missing; the callers then use the
numpy path, which computes the same quantities. Rows run in parallel threads.
Each row is scanned in short loops that the compiler turns into SIMD code:
the maximum, then the exponential sums, then the arg-max and runner-up.

The exponential is our own :func:`exp_nonpositive` rather than ``math.exp``,
because LLVM vectorises a polynomial but not a call into the C library. It
uses the classic Cody-Waite reduction ``x = n ln 2 + r`` with ``|r| <= ln(2)/2``
and a degree-13 Taylor polynomial for ``e^r`` (truncation error below
``0.35^14 / 14! < 5e-18``), then scales by ``2^n`` built from the exponent
bits. Its relative error is about one unit in the last place (checked
against ``numpy.exp`` in the tests). Below -708 it returns 0 (``e^x`` is
below ``3.4e-308`` there), so a vanishing term stays zero even when it is
multiplied by a huge logit difference.
"""

from __future__ import annotations

import math
from typing import Literal, TypedDict

import numba
import numpy as np
from numba.core import types
from numba.extending import intrinsic

# reassociation lets the reductions vectorise; no-NaN / no-inf flags are NOT set (rows start at -inf)
_FAST = {"reassoc", "contract", "nsz"}


class _JitOptions(TypedDict):
    nogil: bool
    cache: bool
    parallel: bool
    error_model: Literal["python", "numpy"]
    fastmath: set[str]


_OPTS: _JitOptions = {"nogil": True, "cache": True, "parallel": True, "error_model": "numpy", "fastmath": _FAST}

_LOG2E = 1.4426950408889634
_LN2_HI = 6.93147180369123816490e-01  # high part of ln 2 (fdlibm)
_LN2_LO = 1.90821492927058770002e-10  # low part of ln 2 (fdlibm)


@intrinsic
def _bits_to_float64(typingctx, x):  # pragma: no cover - compiled
    sig = types.float64(types.int64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], context.get_value_type(types.float64))

    return sig, codegen


@numba.njit(inline="always", fastmath={"contract"}, cache=True)
def exp_nonpositive(x):  # pragma: no cover - compiled
    """``e^x`` for ``x <= 0`` to about 1 ulp, vectorisable (see the module docstring); 0 below -708."""
    keep = x >= -708.0
    x = max(x, -708.0)
    n = math.floor(x * _LOG2E + 0.5)
    r = x - n * _LN2_HI - n * _LN2_LO
    p = 1.0 / 6227020800.0
    p = p * r + 1.0 / 479001600.0
    p = p * r + 1.0 / 39916800.0
    p = p * r + 1.0 / 3628800.0
    p = p * r + 1.0 / 362880.0
    p = p * r + 1.0 / 40320.0
    p = p * r + 1.0 / 5040.0
    p = p * r + 1.0 / 720.0
    p = p * r + 1.0 / 120.0
    p = p * r + 1.0 / 24.0
    p = p * r + 1.0 / 6.0
    p = p * r + 0.5
    p = p * r + 1.0
    p = p * r + 1.0
    e = p * _bits_to_float64((np.int64(n) + 1023) << 52)
    return e if keep else 0.0


@numba.njit(cache=True)
def exp_nonpositive_array(x):  # pragma: no cover - compiled
    """:func:`exp_nonpositive` over a 1-D array (for tests)."""
    out = np.empty_like(x)
    for i in range(x.size):
        out[i] = exp_nonpositive(x[i])
    return out


@numba.njit(**_OPTS)
def scores_kernel(z, y, has_y, beta, pred, conf, ent, margin, lmargin, energy, logptrue, brier, rank):
    n, k = z.shape
    for i in numba.prange(n):
        row = z[i]
        top = -np.inf
        for j in range(k):
            top = max(top, np.float64(row[j]))
        s = 0.0
        t = 0.0
        u = 0.0
        for j in range(k):
            d = (np.float64(row[j]) - top) * beta
            e = exp_nonpositive(d)
            s += e
            t += e * d
            u += e * e
        a = 0
        while a < k - 1 and np.float64(row[a]) != top:
            a += 1
        runner = -np.inf
        for j in range(k):
            runner = max(runner, np.float64(row[j]) if j != a else -np.inf)
        log_s = math.log(s)
        pred[i] = a
        conf[i] = 1.0 / s
        h = log_s - t / s
        ent[i] = h if h > 0.0 else 0.0
        g = (runner - top) * beta
        margin[i] = (1.0 - math.exp(g)) / s
        lmargin[i] = -g
        energy[i] = -(top * beta + log_s) / beta
        if has_y:
            yi = y[i]
            zy = np.float64(row[yi])
            above = 0
            for j in range(yi):  # ties: an equal logit at a lower index ranks above the label (as argmax)
                above += np.float64(row[j]) >= zy
            for j in range(yi + 1, k):
                above += np.float64(row[j]) > zy
            lp = (zy - top) * beta - log_s
            logptrue[i] = lp
            brier[i] = u / (s * s) - 2.0 * math.exp(lp) + 1.0
            rank[i] = 1 + above


@numba.njit(**_OPTS)
def moments_kernel(z, y, beta):  # pragma: no cover - compiled
    n, k = z.shape
    nll = 0.0
    d1 = 0.0
    d2 = 0.0
    for i in numba.prange(n):
        row = z[i]
        zm = -np.inf
        for j in range(k):
            zm = max(zm, np.float64(row[j]))
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
        zy = np.float64(row[y[i]])
        nll += beta * (zm - zy) + math.log(s)
        d1 += ez + (zm - zy)  # zm - zy first: exact when the label is the top class
        var = ez2 - ez * ez
        d2 += var if var > 0.0 else 0.0
    return nll, d1, d2


@numba.njit(**_OPTS)
def prior_em_kernel(z, beta, shift, n_chunks):  # pragma: no cover - compiled
    """Column sums over rows of ``softmax(beta z + shift)``: one step of the prior EM (Saerens et al. 2002).

    Rows are split into ``n_chunks`` parallel chunks, each with its own row of the (n_chunks, K)
    accumulator, summed at the end; ``shift`` may hold ``-inf`` (a prior that reached 0).
    """
    n, k = z.shape
    acc = np.zeros((n_chunks, k))
    per = (n + n_chunks - 1) // n_chunks
    for c in numba.prange(n_chunks):
        buf = np.empty(k)
        lo = c * per
        hi = min(n, lo + per)
        for i in range(lo, hi):
            row = z[i]
            m = -np.inf
            for j in range(k):
                v = beta * np.float64(row[j]) + shift[j]
                buf[j] = v
                m = max(m, v)
            s = 0.0
            for j in range(k):
                e = exp_nonpositive(buf[j] - m)
                buf[j] = e
                s += e
            inv = 1.0 / s
            for j in range(k):
                acc[c, j] += buf[j] * inv
    return acc.sum(axis=0)
