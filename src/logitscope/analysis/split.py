"""Split rows into a part to fit calibration on and a held-out part to judge it on.

A temperature (or a threshold) fitted on some rows and judged on the same
rows looks better than it is. These helpers return two disjoint, sorted
arrays of row positions: ``fit`` (where the temperature and the threshold
are chosen) and ``held_out`` (where they are judged). Pure numpy.

- :func:`random_split`: a seeded random split, optionally stratified by a
  label column so every class keeps its share in both parts;
- :func:`split_by_values`: rows whose metadata value is among ``fit_values``
  form the fit part, the rest the held-out part (for example fit on one
  desk's mail, judge on the other desks');
- :func:`hash_split`: each row held out or not by a seeded hash of its
  position (:func:`held_out_by_hash`), so any range of rows can be split on
  its own: a batch read in chunks is split chunk by chunk exactly as in memory.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any, NamedTuple, cast

import numpy as np
from numpy.typing import ArrayLike

from ..errors import ParameterError, ShapeError
from ..parameters import check as check_parameter

__all__ = ["Split", "hash_split", "held_out_by_hash", "random_split", "split_by_values"]


class Split(NamedTuple):
    """Row positions of the fit part and of the held-out part (sorted, disjoint).

    Unpacks as a pair: ``fit, held_out = random_split(n)``.
    """

    fit: np.ndarray
    held_out: np.ndarray
    description: str = ""


def _check_n(n_samples: Any) -> int:
    if isinstance(n_samples, bool) or not isinstance(n_samples, int | np.integer) or n_samples < 2:
        raise ParameterError(f"a split needs at least 2 rows, got n_samples={n_samples!r}")
    return int(n_samples)


def random_split(
    n_samples: int,
    held_out_fraction: float = 0.5,
    seed: int = 0,
    stratify: ArrayLike | None = None,
) -> Split:
    """A seeded random split into a fit part and a held-out part.

    Parameters
    ----------
    n_samples : int
        Number of rows (at least 2).
    held_out_fraction : float, default 0.5
        Share of rows held out, in ``(0, 1)``. Both parts get at least one row.
    seed : int
        Seed of :func:`numpy.random.default_rng`; the same seed gives the same split.
    stratify : array_like of shape (n_samples,), optional
        Group labels (for example the true classes): each group is split on
        its own with the same fraction (rounded), so class shares match in
        both parts. A group of one row goes to the fit part.

    Returns
    -------
    Split
        ``fit`` and ``held_out`` row positions, sorted and disjoint, covering every row.

    Examples
    --------
    >>> fit, held_out, _ = random_split(10, 0.3, seed=1)
    >>> len(fit), len(held_out), sorted(np.r_[fit, held_out].tolist()) == list(range(10))
    (7, 3, True)
    """
    n = _check_n(n_samples)
    frac = float(check_parameter(held_out_fraction, "held_out_fraction"))
    rng = np.random.default_rng(seed)
    held = np.zeros(n, dtype=bool)
    if stratify is None:
        k = min(n - 1, max(1, round(frac * n)))
        held[rng.permutation(n)[:k]] = True
        how = f"random split, seed {seed}, {frac:.0%} held out"
    else:
        groups = np.asarray(stratify)
        if groups.shape != (n,):
            raise ShapeError(f"stratify must have shape ({n},), got {groups.shape}")
        _, codes = np.unique(groups, return_inverse=True)
        for g in range(int(codes.max()) + 1):
            rows = np.flatnonzero(codes == g)
            k = min(rows.size - 1, round(frac * rows.size))
            if k > 0:
                held[rng.permutation(rows)[:k]] = True
        if held.all() or not held.any():  # tiny groups everywhere: fall back to one row each side
            held[:] = False
            held[rng.integers(n)] = True
        how = f"random split stratified by label, seed {seed}, {frac:.0%} held out"
    return Split(np.flatnonzero(~held).astype(np.int64), np.flatnonzero(held).astype(np.int64), how)


def split_by_values(column: ArrayLike, fit_values: ArrayLike | Any) -> Split:
    """Fit on the rows whose ``column`` value is among ``fit_values``; hold out the rest.

    Parameters
    ----------
    column : array_like of shape (N,)
        A metadata column (strings, numbers, booleans).
    fit_values : value or sequence of values
        The values whose rows form the fit part.

    Returns
    -------
    Split

    Raises
    ------
    ParameterError
        When either part would be empty, or a value of ``fit_values`` never occurs.

    Examples
    --------
    >>> fit, held_out, how = split_by_values(["north", "south", "north", "east"], ["north"])
    >>> fit.tolist(), held_out.tolist()
    ([0, 2], [1, 3])
    """
    col = np.asarray(column, dtype=object)
    if col.ndim != 1 or col.size < 2:
        raise ShapeError(f"column must be 1-D with at least 2 rows, got shape {col.shape}")
    if isinstance(fit_values, str) or np.ndim(fit_values) == 0:
        values = [fit_values]
    else:
        values = list(cast(Iterable[Any], fit_values))  # np.ndim > 0: a sequence or an array
    if not values:
        raise ParameterError("fit_values is empty: name at least one value whose rows form the fit part")
    present = set(col.tolist())
    missing = [v for v in values if v not in present]
    if missing:
        raise ParameterError(f"fit_values not found in the column: {missing[:5]!r}")
    wanted = set(values)
    mask = np.fromiter((v in wanted for v in col.tolist()), dtype=bool, count=col.size)
    if mask.all():
        raise ParameterError("every row is in the fit part; nothing is left to hold out")
    shown = ", ".join(str(v) for v in values[:5]) + (" ..." if len(values) > 5 else "")
    return Split(
        np.flatnonzero(mask).astype(np.int64), np.flatnonzero(~mask).astype(np.int64), f"fit on rows with {shown}"
    )


_GOLDEN = np.uint64(0x9E3779B97F4A7C15)


def held_out_by_hash(start: int, stop: int, held_out_fraction: float = 0.5, seed: int = 0) -> np.ndarray:
    """For rows ``start .. stop - 1``: whether each is held out, by a seeded hash of its position.

    The hash is SplitMix64 (Steele, Lea and Flood 2014) of ``row + (seed + 1) * 0x9E3779B97F4A7C15``;
    a row is held out when the hash, as a fraction of ``2**64``, is below ``held_out_fraction``. It
    depends on the row's position alone, not on the rows around it.

    Examples
    --------
    >>> held_out_by_hash(0, 8).astype(int).tolist()
    [0, 0, 0, 1, 1, 1, 0, 1]
    >>> bool(np.all(held_out_by_hash(4, 8) == held_out_by_hash(0, 8)[4:]))
    True
    """
    frac = float(check_parameter(held_out_fraction, "held_out_fraction"))
    x = np.arange(int(start), int(stop), dtype=np.uint64)
    with np.errstate(over="ignore"):  # arithmetic modulo 2**64 is the point
        x += np.uint64((int(seed) + 1) % (1 << 64)) * _GOLDEN
        x ^= x >> np.uint64(30)
        x *= np.uint64(0xBF58476D1CE4E5B9)
        x ^= x >> np.uint64(27)
        x *= np.uint64(0x94D049BB133111EB)
        x ^= x >> np.uint64(31)
    return x < np.uint64(min(frac * 2.0**64, 2.0**64 - 2048))


def hash_split(n_samples: int, held_out_fraction: float = 0.5, seed: int = 0) -> Split:
    """A seeded split in which each row is held out by a hash of its position (:func:`held_out_by_hash`).

    About ``held_out_fraction`` of the rows are held out, each row independently of the others, so
    the split of rows ``a .. b`` is the same whether they are split alone or within the whole batch.
    This is the report's own split, in memory and chunk by chunk on a batch too large for memory.

    Examples
    --------
    >>> fit, held_out, how = hash_split(10)
    >>> held_out.tolist(), how
    ([3, 4, 5, 7], 'split by row hash, seed 0, 50% held out')
    """
    n = _check_n(n_samples)
    frac = float(check_parameter(held_out_fraction, "held_out_fraction"))
    held = np.concatenate([held_out_by_hash(a, min(n, a + (1 << 20)), frac, seed) for a in range(0, n, 1 << 20)])
    how = f"split by row hash, seed {seed}, {frac:.0%} held out"
    return Split(np.flatnonzero(~held).astype(np.int64), np.flatnonzero(held).astype(np.int64), how)
