"""Numba kernels behind :mod:`logitscope.analysis.scores`.

Importing this module fails when numba is missing; the callers then use the
numpy path, which computes the same quantities. Rows run in parallel threads.
Each row is scanned in short loops that the compiler turns into SIMD code:
the maximum, then the exponential sums, then the arg-max with the count of
ties at the top, then the runner-up (the comparisons in the input's own dtype,
the sums in float64). Every loop must stay vectorisable, so:

- maxima use LLVM's ``maxnum`` (:func:`maxnum`); numba's ``max`` compiles to a
  compare-and-branch that the vectoriser gives up on;
- the exponential is our own :func:`exp_nonpositive` rather than ``math.exp``,
  because LLVM vectorises a polynomial but not a call into the C library, and
  its rounding uses ``np.floor`` (a float) rather than ``math.floor`` (an
  integer: converting four doubles to int64 has no AVX2 instruction and
  splits the vector into scalars).

:func:`exp_nonpositive` uses the classic Cody-Waite reduction ``x = n ln 2 + r``
with ``|r| <= ln(2)/2`` and the degree-13 Taylor polynomial for ``e^r``
(truncation error below ``0.35^14 / 14! < 5e-18``), evaluated as
``1 + (r + r^2 q(r))`` with ``q`` by Estrin's scheme (pairs of terms combined
with ``r^2``, ``r^4``, ``r^8``: a dependency chain of 5 multiply-adds instead of
13), then scales by ``2^n`` built from the exponent bits. Its relative error
is about one unit in the last place (checked against ``numpy.exp`` in the
tests). Below -708 it returns 0 (``e^x`` is below ``3.4e-308`` there), so a
vanishing term stays zero even when it is multiplied by a huge logit difference.

Finiteness comes free with the scores: a row holding NaN or an infinity makes
its sum ``t = sum_k e_k d_k`` NaN (``0 * inf`` and ``0 * nan`` are NaN, and the
fast-math flags used here keep NaN semantics), and the kernels return how many
rows did. :func:`nonfinite_rows` is the cheap stand-alone check.
"""

from __future__ import annotations

import math
from typing import Literal, TypedDict

import numba
import numpy as np
from llvmlite import ir
from numba.core import cgutils, types
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
_ROUND_SHIFT = 6755399441055744.0  # 1.5 * 2^52: adding it to a whole number n puts n in the low mantissa bits


@intrinsic
def _bits_to_float64(typingctx, x):  # pragma: no cover - compiled
    sig = types.float64(types.int64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], context.get_value_type(types.float64))

    return sig, codegen


@intrinsic
def _float64_to_bits(typingctx, x):  # pragma: no cover - compiled
    sig = types.int64(types.float64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], context.get_value_type(types.int64))

    return sig, codegen


@intrinsic
def maxnum(typingctx, a, b):  # pragma: no cover - compiled
    """LLVM's ``maxnum``: the larger of two floats of one type (a NaN loses), vectorisable in reductions."""
    if a != b or not isinstance(a, types.Float):
        return None
    sig = a(a, b)

    def codegen(context, builder, signature, args):
        lt = context.get_value_type(signature.return_type)
        name = "llvm.maxnum.f32" if signature.return_type == types.float32 else "llvm.maxnum.f64"
        fn = cgutils.get_or_insert_function(builder.module, ir.FunctionType(lt, [lt, lt]), name)
        return builder.call(fn, args)

    return sig, codegen


@numba.njit(inline="always", fastmath={"contract"}, cache=True)
def exp_nonpositive(x):  # pragma: no cover - compiled
    """``e^x`` for ``x <= 0`` to about 1 ulp, vectorisable (see the module docstring); 0 below -708."""
    keep = x >= -708.0
    x = max(x, -708.0)
    n = np.floor(x * _LOG2E + 0.5)  # a float: see the module docstring
    r = x - n * _LN2_HI - n * _LN2_LO
    # e^r - 1 - r = r^2 (1/2! + r/3! + ... + r^11/13!), the bracket by Estrin's scheme
    r2 = r * r
    a0 = 1.0 / 2.0 + r * (1.0 / 6.0)
    a1 = 1.0 / 24.0 + r * (1.0 / 120.0)
    a2 = 1.0 / 720.0 + r * (1.0 / 5040.0)
    a3 = 1.0 / 40320.0 + r * (1.0 / 362880.0)
    a4 = 1.0 / 3628800.0 + r * (1.0 / 39916800.0)
    a5 = 1.0 / 479001600.0 + r * (1.0 / 6227020800.0)
    r4 = r2 * r2
    b0 = a0 + r2 * a1
    b1 = a2 + r2 * a3
    b2 = a4 + r2 * a5
    r8 = r4 * r4
    q = (b0 + r4 * b1) + r8 * b2
    p = 1.0 + (r + r2 * q)
    # 2^n from the bits of n + 1.5 * 2^52, whose low bits hold n (no float-to-int conversion)
    e = p * _bits_to_float64((_float64_to_bits(n + _ROUND_SHIFT) + 1023) << 52)
    return e if keep else 0.0


@numba.njit(cache=True)
def exp_nonpositive_array(x):  # pragma: no cover - compiled
    """:func:`exp_nonpositive` over a 1-D array (for tests)."""
    out = np.empty_like(x)
    for i in range(x.size):
        out[i] = exp_nonpositive(x[i])
    return out


@numba.njit(**_OPTS)
def scores_kernel(z, y, has_y, beta, pred, conf, ent, margin, lmargin, energy, logptrue, ptrue, brier, rank, neg_inf):
    """Every per-sample score of each row; returns the number of rows holding NaN or an infinity.

    ``neg_inf`` is minus infinity in the dtype of ``z``. The order statistics (maximum, arg-max, ties,
    runner-up, rank) compare the values in that dtype, twice as many to a vector for float32 as in
    float64, with the same answers (widening a float is exact and keeps the order); only the
    exponential sums run in float64.
    """
    n, k = z.shape
    nonfinite = 0
    for i in numba.prange(n):
        row = z[i]
        top_z = neg_inf
        for j in range(k):
            top_z = maxnum(top_z, row[j])
        top = np.float64(top_z)
        s = 0.0
        t = 0.0
        u = 0.0
        for j in range(k):
            d = (np.float64(row[j]) - top) * beta
            e = exp_nonpositive(d)
            s += e
            t += e * d
            u += e * e
        # first arg-max (as numpy.argmax) and how many columns share the top value
        a = np.int32(k)
        ties = np.int32(0)
        for j in range(k):
            at_top = row[j] == top_z
            a = min(a, np.int32(j) if at_top else np.int32(k))
            ties += np.int32(at_top)
        a = min(a, np.int32(k - 1))
        # runner-up: the top again when it is tied, else the largest value below it
        runner_z = neg_inf
        for j in range(k):
            x = row[j]
            runner_z = maxnum(runner_z, x if x < top_z else neg_inf)
        g = 0.0 if ties > 1 else (np.float64(runner_z) - top) * beta
        log_s = math.log(s)
        pred[i] = a
        conf[i] = 1.0 / s
        h = log_s - t / s
        ent[i] = h if h > 0.0 else 0.0
        margin[i] = (1.0 - math.exp(g)) / s
        lmargin[i] = -g
        energy[i] = -(top * beta + log_s) / beta
        if has_y:
            yi = y[i]
            zy_z = row[yi]
            zy = np.float64(zy_z)
            # one loop over the whole row (two loops split at the label vectorise worse); ties: an equal
            # logit at a lower index ranks above the label (as argmax), the label itself never counts
            above = np.int32(0)
            for j in range(k):
                x = row[j]
                above += np.int32((x > zy_z) | ((x == zy_z) & (j < yi)))
            lp = (zy - top) * beta - log_s
            py = math.exp(lp)
            logptrue[i] = lp
            ptrue[i] = py
            brier[i] = u / (s * s) - 2.0 * py + 1.0
            rank[i] = 1 + above
        nonfinite += t != t
    return nonfinite


@numba.njit(**_OPTS)
def moments_kernel(z, y, beta):  # pragma: no cover - compiled
    """Sums of the NLL and its first two derivatives in beta; NaN when a row holds NaN or an infinity."""
    n, k = z.shape
    nll = 0.0
    d1 = 0.0
    d2 = 0.0
    for i in numba.prange(n):
        row = z[i]
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


@numba.njit(**_OPTS)
def nonfinite_rows(bits, exponent, flags):  # pragma: no cover - compiled
    """Set ``flags[i]`` where row ``i`` holds NaN or an infinity; return their number.

    ``bits`` is the float matrix viewed as unsigned integers of its width and
    ``exponent`` the mask of its exponent field: NaN and infinities are the
    values with every exponent bit set. Integer tests vectorise without
    fast-math flags (under which ``acc + (x - x)`` may be simplified to ``acc``).
    """
    n, k = bits.shape
    count = 0
    for i in numba.prange(n):
        row = bits[i]
        hits = 0
        for j in range(k):
            hits += (row[j] & exponent) == exponent
        bad = hits > 0
        flags[i] = bad
        count += bad
    return count


@numba.njit(**_OPTS)
def copy_counting_nonfinite(bits, exponent, out):  # pragma: no cover - compiled
    """Copy ``bits`` into ``out`` row by row (exactly: as integers) and return the number of rows holding NaN or an
    infinity, tested as in :func:`nonfinite_rows`."""
    n, k = bits.shape
    count = 0
    for i in numba.prange(n):
        row = bits[i]
        dst = out[i]
        hits = 0
        for j in range(k):
            x = row[j]
            dst[j] = x
            hits += (x & exponent) == exponent
        count += hits > 0
    return count
