"""The finiteness check: stand-alone (find_nonfinite_rows, check_logits) and fused into the score passes.

Reference for "non-finite": numpy.isfinite (IEEE 754: NaN, +inf and -inf are the values whose exponent
bits are all set).
"""

import numpy as np
import pytest

from logitscope import LogitFrame
from logitscope.analysis import find_nonfinite_rows, sample_scores, temperature_moments
from logitscope.analysis._validation import assume_valid, check_logits
from logitscope.errors import NonFiniteError

DTYPES = [np.float16, np.float32, np.float64]


@pytest.fixture(params=["numba", "numpy"])
def check_backend(request, monkeypatch):
    """Run the stand-alone check through numba or through its numpy fallback."""
    if request.param == "numba":
        pytest.importorskip("numba")
    else:
        monkeypatch.setenv("LOGITSCOPE_BACKEND", "numpy")
    return request.param


def _poisoned(dtype, k, seed=0):
    rng = np.random.default_rng(seed)
    z = rng.normal(size=(64, k)).astype(dtype)
    rows = rng.choice(64, 9, replace=False)
    for r in rows:  # one bad value each, at the first, a middle or the last column
        z[r, rng.choice([0, k // 2, k - 1])] = rng.choice([np.nan, np.inf, -np.inf])
    return z


@pytest.mark.parametrize("dtype", DTYPES)
@pytest.mark.parametrize("k", [2, 3, 17, 64, 101])
def test_find_nonfinite_rows_matches_numpy_isfinite(check_backend, dtype, k):
    z = _poisoned(dtype, k, seed=k)
    expected = np.flatnonzero(~np.isfinite(z).all(axis=1))  # reference: numpy.isfinite
    for view in (z, np.asfortranarray(z), z[::3], z[:, ::-1]):
        ref = np.flatnonzero(~np.isfinite(view).all(axis=1))
        np.testing.assert_array_equal(find_nonfinite_rows(view), ref)
    np.testing.assert_array_equal(find_nonfinite_rows(z), expected)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_huge_finite_values_are_not_flagged(check_backend, dtype):
    # a row sum can overflow (3e38 * 4 in float32) though every value is finite: not a non-finite row
    big = np.finfo(dtype).max / 2
    z = np.full((5, 4), big, dtype=dtype)
    z[3, 1] = -np.inf
    np.testing.assert_array_equal(find_nonfinite_rows(z), [3])


@pytest.mark.parametrize("dtype", DTYPES)
def test_check_logits_copy_is_an_exact_owned_copy(check_backend, dtype):
    rng = np.random.default_rng(3)
    z = np.asfortranarray(rng.normal(size=(50, 7)).astype(dtype))
    out = check_logits(z, copy=True)
    assert out.dtype == z.dtype and out.flags.c_contiguous and out.flags.owndata
    assert not np.shares_memory(out, z)
    np.testing.assert_array_equal(out, z)  # bit-exact: negative zeros and subnormals too
    z[0, 0] = np.nan
    with pytest.raises(NonFiniteError, match=r"1 of 50 rows: row 0\b"):
        check_logits(z, copy=True)
    with assume_valid():  # the checks are skipped, the copy is still made
        assert np.isnan(check_logits(z, copy=True)[0, 0])


@pytest.mark.parametrize("backend", ["numba", "numpy"])
@pytest.mark.parametrize("dtype", DTYPES)
@pytest.mark.parametrize("k", [2, 3, 17, 101])
def test_score_passes_find_the_rows_themselves(backend, dtype, k):
    if backend == "numba":
        pytest.importorskip("numba")
    z = _poisoned(dtype, k, seed=100 + k)
    bad = np.flatnonzero(~np.isfinite(z).all(axis=1))  # reference: numpy.isfinite
    first = ", ".join(str(r) for r in bad[:5])
    pattern = rf"{bad.size} of 64 rows: rows {first} and {bad.size - 5} more"
    y = np.random.default_rng(k).integers(0, k, 64)
    with pytest.raises(NonFiniteError, match=pattern):
        sample_scores(z, y, backend=backend)
    with pytest.raises(NonFiniteError, match=pattern):
        sample_scores(z, temperature=0.25, backend=backend)
    with pytest.raises(NonFiniteError, match=pattern):
        temperature_moments(z, y, 2.0, backend=backend)
    clean = np.delete(z, bad, axis=0)
    s = sample_scores(clean, y[: clean.shape[0]], backend=backend)
    assert np.isfinite(s.entropy).all() and np.isfinite(s.confidence).all()


def test_frame_rejects_nonfinite_rows_when_built():
    z = np.zeros((6, 3), dtype=np.float32)
    z[4, 2] = np.inf
    with pytest.raises(NonFiniteError, match=r"1 of 6 rows: row 4\b"):
        LogitFrame(z)


# ------------------------------------------------------------------ the frame's own check, with and without a copy


@pytest.mark.parametrize("dtype", DTYPES)
@pytest.mark.parametrize("copy", [True, False])
def test_a_frame_names_the_nonfinite_rows_with_and_without_a_copy(check_backend, dtype, copy):
    z = _poisoned(dtype, 17, seed=3)
    bad = np.flatnonzero(~np.isfinite(z).all(axis=1))  # reference: numpy.isfinite
    with pytest.raises(NonFiniteError, match=f"in {bad.size} of 64 rows: rows? {bad[0]}"):
        LogitFrame(z, labels=np.zeros(64, dtype=int), copy=copy)


def test_a_copying_frame_keeps_its_numbers_when_the_caller_writes_on(check_backend):
    from scipy.special import softmax

    rng = np.random.default_rng(12)
    z = rng.normal(size=(500, 9)).astype(np.float32)
    y = rng.integers(0, 9, 500)
    y[::5] = -1  # a fifth unlabelled
    keep = z.copy()
    frame = LogitFrame(z, labels=y, temperature=0.8)
    z[:] = 0.0  # the caller reuses the buffer for the next batch
    np.testing.assert_array_equal(frame.logits, keep)
    s = frame.sample_scores()
    p = softmax(keep.astype(np.float64) / 0.8, axis=1)  # reference: scipy.special.softmax
    np.testing.assert_allclose(s.confidence, p.max(axis=1), rtol=1e-12)
    labelled = y >= 0
    np.testing.assert_allclose(s.true_probability[labelled], p[labelled, y[labelled]], rtol=1e-12)
    assert np.isnan(s.true_probability[~labelled]).all() and (s.true_rank[~labelled] == -1).all()
    assert not s.correct[~labelled].any()


@pytest.mark.parametrize("min_bytes", [0, 64 << 20])
def test_the_frame_names_the_same_rows_whether_its_scoring_pass_or_a_separate_check_finds_them(monkeypatch, min_bytes):
    # with room for its scores the frame finds non-finite rows in its first scoring pass; with none (a
    # cache budget of 0 bytes for these K = 2 float16 logits) the separate check does; the error is the same
    monkeypatch.setattr(LogitFrame, "_CACHE_MIN_BYTES", min_bytes)
    z = _poisoned(np.float16, 2, seed=5)
    bad = np.flatnonzero(~np.isfinite(z).all(axis=1))  # reference: numpy.isfinite
    with pytest.raises(NonFiniteError, match=f"in {bad.size} of 64 rows: rows {', '.join(map(str, bad[:3]))}"):
        LogitFrame(z, labels=np.zeros(64, dtype=int))
    clean = np.nan_to_num(z, nan=0.0, posinf=1.0, neginf=-1.0)
    frame = LogitFrame(clean, labels=np.zeros(64, dtype=int))
    p = np.exp(clean - clean.max(axis=1, keepdims=True).astype(np.float64))
    np.testing.assert_allclose(frame.sample_scores().confidence, (p / p.sum(axis=1, keepdims=True)).max(axis=1))


def test_a_frames_scores_are_read_only_so_a_caller_cannot_change_later_answers():
    from scipy.special import softmax

    rng = np.random.default_rng(4)
    z = rng.normal(size=(300, 5))
    y = rng.integers(0, 5, 300)
    y[::7] = -1  # partly labelled: the blanked columns are read-only too
    frame = LogitFrame(z, labels=y)
    s = frame.sample_scores()
    for name, arr in s.to_dict().items():
        with pytest.raises(ValueError, match="read-only"):
            arr[0] = 0
        assert not arr.flags.writeable, name
    p = softmax(z, axis=1)  # reference: scipy.special.softmax
    np.testing.assert_allclose(frame.sample_scores().confidence, p.max(axis=1), rtol=1e-12)
