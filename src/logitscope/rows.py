"""Row selections as sorted unique positions: the one normal form every layer uses."""

from __future__ import annotations

from typing import Any

import numpy as np

from .errors import ParameterError, ShapeError

__all__ = ["as_rows", "rows_or_all"]


def as_rows(rows: Any, n_samples: int) -> np.ndarray:
    """Normalise a selection to sorted unique int64 row positions in ``[0, n_samples)``.

    Accepts positions, a boolean mask of length ``n_samples``, or None (nothing). The result is a new
    array, except that a read-only 1-D int64 array owning its data, sorted and unique, comes back as it is.

    Examples
    --------
    >>> as_rows([5, 1, 1], 10).tolist()
    [1, 5]
    >>> as_rows(np.array([True, False, True]), 3).tolist()
    [0, 2]
    """
    if rows is None:
        return np.zeros(0, dtype=np.int64)
    r = np.asarray(rows)
    if r.dtype == bool:
        if r.shape != (n_samples,):
            raise ShapeError(f"a boolean selection must have shape ({n_samples},), got {r.shape}")
        return np.flatnonzero(r).astype(np.int64)
    if r.size == 0:
        return np.zeros(0, dtype=np.int64)
    if r.dtype.kind not in "iu":
        if r.dtype.kind == "f" and np.all(r == np.round(r)):
            r = r.astype(np.int64)
        else:
            raise ShapeError(f"a selection must hold row positions (integers), got dtype {r.dtype}")
    # a copy, as the caller may reuse its array; a read-only int64 array that owns its data cannot change
    # and is kept as it is (the parts of a split shared by several findings)
    if not (r.dtype == np.int64 and r.ndim == 1 and r.base is None and not r.flags.writeable):
        r = np.array(r, dtype=np.int64).ravel()
    if r.size > 1 and not bool(np.all(r[1:] > r[:-1])):  # already sorted and unique: skip the sort
        r = np.unique(r)
    if r[0] < 0 or r[-1] >= n_samples:
        raise ShapeError(f"selected rows must lie in [0, {n_samples}); got {r[0]} .. {r[-1]}")
    return r


def rows_or_all(rows: Any, n_samples: int, what: str) -> np.ndarray:
    """Rows a view works on: ``as_rows(rows)``, or every row when ``rows`` is None; never empty.

    Examples
    --------
    >>> rows_or_all(None, 3, "a diagram").tolist()
    [0, 1, 2]
    """
    r = np.arange(n_samples, dtype=np.int64) if rows is None else as_rows(rows, n_samples)
    if r.size == 0:
        raise ParameterError(f"{what} needs at least one row")
    return r
