"""Numba kernels of the risk-coverage curve and of equal-width reliability bins.

Kept apart from :mod:`._numba_kernels` and :mod:`._numba_sweep` so that numba's on-disk cache of those
kernels stays valid when these change (numba keys its cache on the source file). Both kernels run
sequentially and without fast-math flags: they count exactly and add in row order, so they give the very
numbers of the numpy code they replace (:func:`numpy.searchsorted`, :func:`numpy.bincount`,
:func:`numpy.cumsum`).
"""

from __future__ import annotations

import numba
import numpy as np

from ._numba_sweep import _bin_below


@numba.njit(cache=True, nogil=True)
def curve_runs(c, errors):  # pragma: no cover - compiled
    """Runs of equal confidence in ``c`` (sorted descending) and the errors accepted with each.

    ``errors`` are the confidences of the wrong samples, sorted descending (each is one of ``c``).
    Returns ``(threshold, n_accepted, n_errors)``, one entry per run: its confidence, the number of
    samples at least as confident and the number of errors among them (a merge of the two sorted
    arrays). A first pass counts the runs, so the arrays are made at their size.
    """
    n = c.size
    m = errors.size
    runs = 0
    for i in range(n):
        runs += i + 1 == n or c[i + 1] != c[i]
    threshold = np.empty(runs)
    n_accepted = np.empty(runs, dtype=np.int64)
    n_errors = np.empty(runs, dtype=np.int64)
    r = 0
    j = 0
    for i in range(n):
        if i + 1 < n and c[i + 1] == c[i]:
            continue
        t = c[i]
        while j < m and errors[j] >= t:
            j += 1
        threshold[r] = t
        n_accepted[r] = i + 1
        n_errors[r] = j
        r += 1
    return threshold, n_accepted, n_errors


@numba.njit(cache=True, nogil=True)
def uniform_bins(conf, ok, edges, bin_of):  # pragma: no cover - compiled
    """Place each confidence in its equal-width bin and sum per bin, in row order.

    ``edges`` are the sorted inner bin edges; row ``i`` goes to bin ``searchsorted(edges, conf[i], "left")``,
    written to ``bin_of[i]``. Returns ``(count, right, confidence)``: per bin the number of rows, of right
    rows and the sum of their confidences (added in row order, as :func:`numpy.bincount` adds weights).
    """
    nb = edges.size + 1
    count = np.zeros(nb, dtype=np.int64)
    right = np.zeros(nb)
    total = np.zeros(nb)
    for i in range(conf.size):
        c = conf[i]
        b = _bin_below(edges, c)
        bin_of[i] = b
        count[b] += 1
        right[b] += 1.0 if ok[i] else 0.0
        total[b] += c
    return count, right, total


@numba.njit(cache=True, nogil=True)
def aurc_terms(n_accepted, n_errors, n_total):  # pragma: no cover - compiled
    """Each run's term of the AURC, ``(n_accepted[r] - n_accepted[r - 1]) / n_total * n_errors[r] / n_accepted[r]``,
    in one pass (the operations of the numpy expression, in its order)."""
    out = np.empty(n_accepted.size)
    total = np.float64(n_total)
    prev = 0
    for r in range(n_accepted.size):
        a = n_accepted[r]
        out[r] = np.float64(a - prev) / total * np.float64(n_errors[r]) / np.float64(a)
        prev = a
    return out
