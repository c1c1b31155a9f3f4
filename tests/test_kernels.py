"""The compiled kernels: our vectorisable exponential and the block handling around numba."""

import numpy as np
import pytest

from logitscope.analysis import sample_scores, temperature_moments

kernels = pytest.importorskip("logitscope.analysis._numba_kernels")


def test_exp_nonpositive_is_within_two_ulp_of_numpy_exp():
    # reference: numpy.exp (the C library's correctly rounded-to-1-ulp exp) over the whole range we use
    rng = np.random.default_rng(0)
    x = np.concatenate([-rng.exponential(50.0, 200_000), -rng.uniform(0, 1e-6, 1000), [0.0, -0.5 * np.log(2), -707.9]])
    got = kernels.exp_nonpositive_array(x)
    ref = np.exp(x)
    ulp = np.abs(got - ref) / np.spacing(ref)
    assert ulp.max() <= 2.0


def test_exp_nonpositive_is_zero_below_minus_708():
    # e^-708 ~ 3.3e-308 (float64 underflow region); returning exactly 0 there keeps e * d finite and zero for
    # differences near the float64 range (a term clamped to e^-708 times d = -1e300 would add 3e-8 to an entropy)
    x = np.array([-708.5, -745.0, -800.0, -1e4, -1e300])
    assert np.all(kernels.exp_nonpositive_array(x) == 0.0)


@pytest.mark.parametrize("layout", ["C", "F", "strided"])
@pytest.mark.parametrize("dtype", [np.float16, np.float32, np.float64])
def test_numba_path_handles_layouts_and_dtypes_like_numpy_path(layout, dtype):
    rng = np.random.default_rng(1)
    base = (rng.normal(size=(700, 24)) * 5).astype(dtype)
    z = {"C": base, "F": np.asfortranarray(base), "strided": base[::2]}[layout]
    y = rng.integers(0, 24, z.shape[0])
    a = sample_scores(z, y, temperature=0.6, backend="numba").to_dict()
    b = sample_scores(z, y, temperature=0.6, backend="numpy").to_dict()
    for name in a:
        np.testing.assert_allclose(a[name].astype(float), b[name].astype(float), rtol=0, atol=1e-12, err_msg=name)
    ma = temperature_moments(z, y, 1.7, backend="numba")
    mb = temperature_moments(z, y, 1.7, backend="numpy")
    np.testing.assert_allclose(ma, mb, rtol=1e-12)


@pytest.mark.parametrize("backend", ["numba", "numpy"])
@pytest.mark.parametrize("k", [2, 5, 33])
def test_arg_max_and_runner_up_with_many_ties(backend, k):
    # small whole-number logits tie often, at the top and below it; reference: numpy.argmax (first index) and
    # the top two of np.sort of scipy.special.softmax (a tie at the top gives margin 0)
    from scipy import special

    rng = np.random.default_rng(k)
    z = rng.integers(-2, 3, size=(3000, k)).astype(np.float32)
    s = sample_scores(z, temperature=0.7, backend=backend)
    np.testing.assert_array_equal(s.predicted, np.argmax(z, axis=1))
    p = np.sort(special.softmax(z.astype(np.float64) / 0.7, axis=1), axis=1)
    np.testing.assert_allclose(s.margin, p[:, -1] - p[:, -2], rtol=1e-12, atol=1e-15)
    zs = np.sort(z.astype(np.float64), axis=1)
    np.testing.assert_allclose(s.logit_margin, (zs[:, -1] - zs[:, -2]) / 0.7, rtol=1e-12, atol=0)


@pytest.mark.parametrize("backend", ["numba", "numpy"])
@pytest.mark.parametrize("k", [2, 5, 33])
def test_label_rank_with_many_ties_is_scipy_ordinal_rank(backend, k):
    # reference: scipy.stats.rankdata(-z, method="ordinal"), which ranks tied logits in the order they occur
    # (the numpy.argmax convention), so rank 1 means "predicted"; labels at every column, ties at every rank
    from scipy import stats

    rng = np.random.default_rng(100 + k)
    z = rng.integers(-2, 3, size=(3000, k)).astype(np.float32)
    y = rng.integers(0, k, 3000)
    s = sample_scores(z, y, backend=backend)
    expected = stats.rankdata(-z.astype(np.float64), axis=1, method="ordinal")[np.arange(3000), y]
    np.testing.assert_array_equal(s.true_rank, expected)
    np.testing.assert_array_equal(s.correct, s.predicted == y)
