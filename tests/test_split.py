"""Calibration split helper (logitscope.analysis.split)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.stats import binomtest
from sklearn.datasets import load_digits
from sklearn.model_selection import train_test_split

from logitscope.analysis.split import Split, hash_split, held_out_by_hash, random_split, split_by_values
from logitscope.errors import LogitscopeError, ParameterError, ShapeError


def _check_partition(split: Split, n: int) -> None:
    fit, held = split.fit, split.held_out
    assert fit.dtype == np.int64 and held.dtype == np.int64
    assert np.all(np.diff(fit) > 0) and np.all(np.diff(held) > 0)  # sorted, unique
    assert np.intersect1d(fit, held).size == 0
    assert np.array_equal(np.sort(np.r_[fit, held]), np.arange(n))


@pytest.mark.parametrize(("n", "frac"), [(2, 0.5), (10, 0.3), (1797, 0.5), (1797, 0.2), (7, 0.01), (7, 0.99)])
def test_random_split_is_a_partition_with_the_asked_share(n: int, frac: float) -> None:
    split = random_split(n, frac, seed=3)
    _check_partition(split, n)
    # the share held out is round(frac * n), clipped so both parts keep a row
    assert len(split.held_out) == min(n - 1, max(1, round(frac * n)))


def test_random_split_is_reproducible_and_seeded() -> None:
    a = random_split(500, 0.5, seed=11)
    b = random_split(500, 0.5, seed=11)
    c = random_split(500, 0.5, seed=12)
    assert np.array_equal(a.fit, b.fit) and np.array_equal(a.held_out, b.held_out)
    assert not np.array_equal(a.fit, c.fit)
    # same permutation as numpy's generator gives for this seed (numpy.random.default_rng is the reference)
    expected_held = np.sort(np.random.default_rng(11).permutation(500)[:250])
    assert np.array_equal(a.held_out, expected_held)


def test_stratified_split_matches_sklearn_class_shares() -> None:
    # reference: scikit-learn's stratified train_test_split on the digits labels sklearn ships
    y = load_digits().target
    split = random_split(y.size, 0.25, seed=0, stratify=y)
    _check_partition(split, y.size)
    _, y_test = train_test_split(y, test_size=0.25, random_state=0, stratify=y)
    ours = np.bincount(y[split.held_out], minlength=10)
    theirs = np.bincount(y_test, minlength=10)
    # sklearn distributes the rounding remainder differently; per class the counts agree within one row
    assert np.max(np.abs(ours - theirs)) <= 1
    assert abs(ours.sum() - theirs.sum()) <= 10


def test_stratified_split_tiny_groups_keep_both_parts() -> None:
    split = random_split(4, 0.5, seed=0, stratify=["a", "b", "c", "d"])
    _check_partition(split, 4)
    assert len(split.fit) >= 1 and len(split.held_out) >= 1


_M64 = (1 << 64) - 1


def _splitmix64(state: int) -> int:
    """SplitMix64's output for a state already advanced by the golden gamma (Steele, Lea and Flood 2014;
    the reference C code of Vigna's splitmix64.c), in Python's exact integers."""
    z = state & _M64
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & _M64
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & _M64
    return z ^ (z >> 31)


def test_splitmix64_reference_outputs() -> None:
    # from memory: the first outputs of splitmix64 seeded with 0 (states gamma, 2 gamma, 3 gamma)
    gamma = 0x9E3779B97F4A7C15
    assert [_splitmix64(i * gamma) for i in (1, 2, 3)] == [0xE220A8397B1DCDAF, 0x6E789E6AA1B965F4, 0x06C45D188009454F]


@pytest.mark.parametrize(("seed", "frac"), [(0, 0.5), (3, 0.2), (12345, 0.9)])
def test_held_out_by_hash_is_splitmix64_of_the_row(seed: int, frac: float) -> None:
    # reference: the published SplitMix64 finaliser above, row + (seed + 1) * gamma, held out below frac * 2**64
    gamma = 0x9E3779B97F4A7C15
    rows = [*range(0, 300), *range(2**33, 2**33 + 50)]
    want = [_splitmix64(r + (seed + 1) * gamma) < int(frac * 2**64) for r in rows]
    got = np.r_[held_out_by_hash(0, 300, frac, seed), held_out_by_hash(2**33, 2**33 + 50, frac, seed)]
    assert got.tolist() == want


def test_hash_split_is_a_partition_the_same_for_any_range_and_holds_the_share() -> None:
    n = 200_000
    split = hash_split(n, 0.3, seed=2)
    _check_partition(split, n)
    held = np.zeros(n, dtype=bool)
    held[split.held_out] = True
    for a, b in [(0, 17), (1000, 70_000), (199_990, n)]:  # any range split alone gives the same rows
        assert np.array_equal(held_out_by_hash(a, b, 0.3, seed=2), held[a:b])
    # each row independently held out with probability 0.3: a binomial count (scipy.stats.binomtest)
    assert binomtest(int(held.sum()), n, 0.3).pvalue > 1e-4
    assert "row hash" in split.description and "seed 2" in split.description


def test_split_by_values_matches_pandas_isin() -> None:
    # reference: pandas Series.isin
    desks = pd.Series(np.random.default_rng(5).choice(["north", "south", "night shift"], size=300))
    split = split_by_values(desks.to_numpy(), ["north", "night shift"])
    _check_partition(split, 300)
    assert np.array_equal(split.fit, np.flatnonzero(desks.isin(["north", "night shift"]).to_numpy()))
    assert "north" in split.description


def test_split_by_values_accepts_a_single_value_and_booleans() -> None:
    flags = np.array([True, False, False, True, False])
    fit, held, _ = split_by_values(flags, False)
    assert fit.tolist() == [1, 2, 4] and held.tolist() == [0, 3]
    fit, held, _ = split_by_values(["x", "y", "x"], "y")
    assert fit.tolist() == [1] and held.tolist() == [0, 2]


@pytest.mark.parametrize(
    ("call", "error", "words"),
    [
        (lambda: random_split(1), ParameterError, "at least 2 rows"),
        (lambda: random_split(10, 0.0), ParameterError, "held_out_fraction"),
        (lambda: random_split(10, 1.0), ParameterError, "held_out_fraction"),
        (lambda: random_split(10, stratify=[0, 1]), ShapeError, "stratify"),
        (lambda: split_by_values(["a", "b"], ["c"]), ParameterError, "not found"),
        (lambda: split_by_values(["a", "a"], ["a"]), ParameterError, "nothing is left"),
        (lambda: split_by_values(["a", "b"], []), ParameterError, "empty"),
        (lambda: split_by_values(["a"], ["a"]), ShapeError, "at least 2 rows"),
    ],
)
def test_bad_input_names_the_problem(call, error, words: str) -> None:
    with pytest.raises(error, match=words) as info:
        call()
    assert isinstance(info.value, LogitscopeError)
