"""Softmax family and the fused per-sample scores, checked against scipy and torch."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special, stats

from logitscope.analysis import (
    SCORE_COLUMNS,
    available_backends,
    binary_to_two_column,
    check_logits,
    energy,
    log_softmax,
    logsumexp,
    sample_scores,
    softmax,
)
from logitscope.errors import (
    InputTypeError,
    LabelError,
    NonFiniteError,
    ParameterError,
    ShapeError,
)

HAVE_NUMBA = "numba" in available_backends()
TEMPERATURES = (0.3, 1.0, 2.5)
DTYPES = (np.float16, np.float32, np.float64)


def _tol(dtype: type) -> dict[str, float]:
    # the functions compute in float64 from the stored values; float32 output rounds
    return {"rtol": 1e-12, "atol": 1e-12} if dtype == np.float64 else {"rtol": 1e-6, "atol": 1e-7}


# --------------------------------------------------------------------------- softmax family


@pytest.mark.parametrize("dtype", DTYPES)
@pytest.mark.parametrize("t", TEMPERATURES)
def test_softmax_family_matches_scipy(make_logits, dtype, t):
    z, _ = make_logits(n=300, k=7, scale=4.0, dtype=dtype)
    z64 = z.astype(np.float64)  # the values actually stored, so the reference sees the same input
    # reference: scipy.special.softmax / log_softmax / logsumexp in float64
    np.testing.assert_allclose(softmax(z, t), special.softmax(z64 / t, axis=1), **_tol(dtype))
    np.testing.assert_allclose(log_softmax(z, t), special.log_softmax(z64 / t, axis=1), **_tol(dtype))
    np.testing.assert_allclose(logsumexp(z, t), special.logsumexp(z64 / t, axis=1), rtol=1e-12, atol=1e-12)
    # energy = -T logsumexp(z / T) (Liu et al. 2020), reference built from scipy.special.logsumexp
    np.testing.assert_allclose(energy(z, t), -t * special.logsumexp(z64 / t, axis=1), rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("dtype", DTYPES)
def test_softmax_output_dtype(dtype):
    z = np.zeros((2, 3), dtype=dtype)
    expected = np.float64 if dtype == np.float64 else np.float32
    assert softmax(z).dtype == expected
    assert log_softmax(z).dtype == expected
    assert logsumexp(z).dtype == np.float64


@pytest.mark.parametrize("t", TEMPERATURES)
def test_log_softmax_matches_torch(make_logits, t):
    torch = pytest.importorskip("torch")
    z, _ = make_logits(n=200, k=9, scale=5.0)
    # second reference: torch.log_softmax in float64 on CPU
    ref = torch.log_softmax(torch.from_numpy(z) / t, dim=1).numpy()
    np.testing.assert_allclose(log_softmax(z, t), ref, rtol=1e-12, atol=1e-12)
    # and torch.logsumexp for the log partition function
    np.testing.assert_allclose(logsumexp(z, t), torch.logsumexp(torch.from_numpy(z) / t, dim=1).numpy(), rtol=1e-12)


def test_block_boundaries_do_not_matter(rng):
    # more rows than one block (4096 x 128 elements / 3 columns) so the loop runs several blocks
    z = rng.normal(size=(200_000, 3)) * 3
    # reference: scipy.special.softmax on the whole matrix
    np.testing.assert_allclose(softmax(z), special.softmax(z, axis=1), rtol=1e-12, atol=1e-15)


def test_binary_to_two_column_is_sigmoid(rng):
    z = rng.normal(size=50) * 4
    two = binary_to_two_column(z)
    assert two.shape == (50, 2)
    # softmax([0, z])[1] = sigmoid(z): reference scipy.special.expit
    np.testing.assert_allclose(softmax(two)[:, 1], special.expit(z), rtol=1e-12)
    np.testing.assert_array_equal(binary_to_two_column(z[:, None]), two)
    with pytest.raises(ShapeError, match=r"shape \(N,\) or \(N, 1\)"):
        binary_to_two_column(np.zeros((3, 2)))


# --------------------------------------------------------------------------- fused per-sample scores


def _reference_scores(z: np.ndarray, y: np.ndarray, t: float) -> dict[str, np.ndarray]:
    """Every per-sample score composed from scipy / numpy in float64, the slow obvious way."""
    z64 = z.astype(np.float64)
    p = special.softmax(z64 / t, axis=1)
    logp = special.log_softmax(z64 / t, axis=1)
    ps = np.sort(p, axis=1)
    zs = np.sort(z64 / t, axis=1)
    rows = np.arange(z.shape[0])
    onehot = np.eye(z.shape[1])[y]
    return {
        "predicted": np.argmax(z64, axis=1),
        "confidence": p.max(axis=1),
        "entropy": stats.entropy(p, axis=1),  # scipy.stats.entropy, natural log
        "margin": ps[:, -1] - ps[:, -2],
        "logit_margin": zs[:, -1] - zs[:, -2],
        "energy": -t * special.logsumexp(z64 / t, axis=1),  # Liu et al. 2020
        "true_probability": p[rows, y],
        "true_log_probability": logp[rows, y],
        "brier": ((p - onehot) ** 2).sum(axis=1),  # Brier 1950, summed over classes
        # scipy.stats.rankdata(method="min") on -z: 1 + number of strictly larger logits
        "true_rank": stats.rankdata(-z64, axis=1, method="min")[rows, y].astype(np.int64),
        "correct": np.argmax(z64, axis=1) == y,
    }


@pytest.mark.parametrize("t", TEMPERATURES)
@pytest.mark.parametrize("dtype", DTYPES)
def test_sample_scores_match_scipy(make_logits, backend, dtype, t):
    z, y = make_logits(n=400, k=6, scale=3.0, dtype=dtype)
    s = sample_scores(z, y, temperature=t, backend=backend)
    ref = _reference_scores(z, y, t)
    assert s.temperature == t
    assert set(s.to_dict()) == set(SCORE_COLUMNS)
    for name in SCORE_COLUMNS:
        got = s.to_dict()[name]
        if name in ("predicted", "true_rank", "correct"):
            np.testing.assert_array_equal(got, ref[name], err_msg=name)
        else:
            assert got.dtype == np.float64, name
            np.testing.assert_allclose(got, ref[name], rtol=1e-10, atol=1e-12, err_msg=name)


def test_sample_scores_without_labels(make_logits, backend):
    z, _ = make_logits(n=50, k=4)
    s = sample_scores(z, backend=backend)
    assert s.true_probability is None and s.true_rank is None and s.correct is None and s.brier is None
    assert list(s.to_dict()) == ["predicted", "confidence", "entropy", "margin", "logit_margin", "energy"]
    assert len(s) == 50
    # reference: scipy.stats.entropy of scipy.special.softmax
    np.testing.assert_allclose(s.entropy, stats.entropy(special.softmax(z, axis=1), axis=1), rtol=1e-10)


@pytest.mark.skipif(not HAVE_NUMBA, reason="numba is not installed")
@pytest.mark.parametrize("t", TEMPERATURES)
@pytest.mark.parametrize("dtype", DTYPES)
def test_backends_give_the_same_numbers(make_logits, dtype, t):
    z, y = make_logits(n=3000, k=11, scale=6.0, dtype=dtype)
    a = sample_scores(z, y, temperature=t, backend="numba").to_dict()
    b = sample_scores(z, y, temperature=t, backend="numpy").to_dict()
    assert a.keys() == b.keys()
    for name in a:
        np.testing.assert_allclose(a[name], b[name], rtol=0, atol=1e-12, err_msg=name)


@pytest.mark.parametrize("dtype", DTYPES)
def test_huge_logits_are_finite_and_right(backend, dtype):
    z = np.array([[1e4, 0.0, -1e4], [-1e4, 1e4, 1e4]], dtype=dtype)
    y = np.array([0, 0])
    s = sample_scores(z, y, backend=backend)
    for name, v in s.to_dict().items():
        assert np.all(np.isfinite(v.astype(np.float64))), name
    # row 0: exp(-1e4) underflows, so p = (1, 0, 0) in float64 (scipy gives the same)
    assert s.confidence[0] == 1.0 and s.margin[0] == 1.0 and s.true_probability[0] == 1.0
    assert s.entropy[0] == pytest.approx(0.0, abs=1e-12) and s.brier[0] == pytest.approx(0.0, abs=1e-12)
    assert s.energy[0] == -1e4
    # row 1: two tied classes at 1e4, label at -1e4: p = (0, 1/2, 1/2), log p_y = -2e4 - log 2
    ref = _reference_scores(z, y, 1.0)  # scipy in float64
    np.testing.assert_allclose(s.true_log_probability, ref["true_log_probability"], rtol=1e-12)
    np.testing.assert_allclose(s.true_log_probability[1], -2e4 - np.log(2.0), rtol=1e-12)
    np.testing.assert_allclose(s.entropy, ref["entropy"], atol=1e-12)
    np.testing.assert_allclose(s.energy, ref["energy"], rtol=1e-12)
    np.testing.assert_allclose(s.brier, ref["brier"], atol=1e-12)
    assert s.predicted.tolist() == [0, 1] and s.true_rank.tolist() == [1, 3]
    assert s.margin[1] == 0.0 and s.logit_margin[1] == 0.0


def test_logits_near_the_float64_range(backend):
    # differences of 2e300 are still finite in float64; p = (1, 0, 0) exactly (scipy agrees)
    z = np.array([[1e300, 0.0, -1e300], [0.0, -1e300, 1e300]])
    y = np.array([0, 1])
    s = sample_scores(z, y, backend=backend)
    ref = _reference_scores(z, y, 1.0)  # scipy.special / scipy.stats in float64
    for name in ("confidence", "entropy", "margin", "brier", "true_log_probability", "energy"):
        np.testing.assert_allclose(s.to_dict()[name], ref[name], rtol=1e-12, atol=1e-12, err_msg=name)


@pytest.mark.parametrize("dtype", DTYPES)
def test_huge_random_logits_match_scipy(rng, backend, dtype):
    z = (rng.normal(size=(200, 5)) * 1e4).astype(dtype)
    y = rng.integers(0, 5, 200)
    s = sample_scores(z, y, temperature=1.0, backend=backend)
    ref = _reference_scores(z, y, 1.0)  # scipy on the same values in float64
    for name in ("confidence", "entropy", "margin", "energy", "true_log_probability", "brier"):
        np.testing.assert_allclose(s.to_dict()[name], ref[name], rtol=1e-10, atol=1e-12, err_msg=name)


def test_ties(backend):
    z = np.array([[1.0, 1.0, 0.0]])
    s = sample_scores(z, [1], backend=backend)
    # numpy.argmax convention: the first index on ties
    assert int(s.predicted[0]) == int(np.argmax(z[0])) == 0
    assert s.margin[0] == 0.0 and s.logit_margin[0] == 0.0
    # the label ties with the top class at a higher index: rank 2, as scipy.stats.rankdata(method="ordinal")
    # gives (ties ranked in the order they occur), so rank 1 means exactly "predicted"
    assert int(s.true_rank[0]) == int(stats.rankdata(-z[0], method="ordinal")[1]) == 2
    assert not s.correct[0]
    assert int(sample_scores(z, [0], backend=backend).true_rank[0]) == 1


def test_argmax_and_rank_survive_rounding_of_z_over_t(backend):
    # Two adjacent float64 logits whose quotients by T round to the same number (found by a search
    # with numpy): the prediction is argmax z whatever T (numpy.argmax), and so is the rank.
    x, t = 62.65404784005449, 5.508314224825282
    z = np.array([[x, np.nextafter(x, np.inf)]])
    assert z[0, 0] / t == z[0, 1] / t or z[0, 0] * (1 / t) == z[0, 1] * (1 / t)
    s = sample_scores(z, [1], temperature=t, backend=backend)
    assert int(s.predicted[0]) == int(np.argmax(z[0])) == 1
    assert bool(s.correct[0]) and int(s.true_rank[0]) == 1
    assert int(sample_scores(z, [0], temperature=t, backend=backend).true_rank[0]) == 2


def test_float16_is_accepted_without_copy(backend, rng):
    z = (rng.normal(size=(64, 5)) * 3).astype(np.float16)
    assert check_logits(z) is z  # kept as given, no float64 copy
    s = sample_scores(z, np.zeros(64, dtype=int), backend=backend)
    # reference: scipy.special.softmax on the float16 values widened to float64
    np.testing.assert_allclose(s.confidence, special.softmax(z.astype(np.float64), axis=1).max(axis=1), rtol=1e-12)


def test_integer_logits_become_float64():
    assert check_logits([[1, 2], [3, 4]]).dtype == np.float64


# --------------------------------------------------------------------------- bad input


def test_nonfinite_rows_are_named(backend):
    z = np.zeros((20, 3))
    bad = [2, 4, 5, 9, 11, 15, 17]
    z[bad[0], 1] = np.nan
    z[bad[1], 0] = np.inf
    z[bad[2:], 2] = -np.inf
    with pytest.raises(NonFiniteError, match=r"7 of 20 rows: rows 2, 4, 5, 9, 11 and 2 more"):
        sample_scores(z, backend=backend)
    one = np.zeros((3, 2))
    one[1, 0] = np.nan
    for fn in (softmax, log_softmax, logsumexp, energy):
        with pytest.raises(NonFiniteError, match=r"row 1\b"):
            fn(one)


@pytest.mark.parametrize(
    ("z", "pattern"),
    [
        (np.zeros(3), r"2-D array.*got shape \(3,\)"),
        (np.zeros((2, 3, 4)), r"2-D array.*got shape \(2, 3, 4\)"),
        (np.zeros((0, 3)), r"no rows"),
        (np.zeros((4, 1)), r"at least 2 classes.*binary=True"),
    ],
)
def test_bad_shapes(z, pattern):
    with pytest.raises(ShapeError, match=pattern):
        sample_scores(z)
    with pytest.raises(ShapeError, match=pattern):
        softmax(z)


def test_bad_labels(backend):
    z = np.zeros((4, 3))
    with pytest.raises(LabelError, match=r"out of range at rows 1, 3 \(values \[3, -1\]\)"):
        sample_scores(z, [0, 3, 2, -1], backend=backend)
    with pytest.raises(LabelError, match=r"length 3 but the logits have 4 rows"):
        sample_scores(z, [0, 1, 2], backend=backend)
    with pytest.raises(LabelError, match=r"whole numbers; not so at row 2"):
        sample_scores(z, [0.0, 1.0, 1.5, 2.0], backend=backend)
    with pytest.raises(LabelError, match=r"booleans"):
        sample_scores(z, [True, False, True, False], backend=backend)
    with pytest.raises(LabelError, match=r"class names through LogitFrame"):
        sample_scores(z, ["a", "b", "c", "a"], backend=backend)


def test_bad_temperature_and_backend():
    z = np.zeros((2, 2))
    for t in (0.0, -1.0, np.inf, np.nan):
        with pytest.raises(ParameterError, match=r"temperature must lie in \[0\.001, 1000\]"):
            sample_scores(z, temperature=t)
    with pytest.raises(InputTypeError, match="temperature must be a number"):
        softmax(z, temperature="warm")
    with pytest.raises(ParameterError, match="backend must be"):
        sample_scores(z, backend="fortran")
    with pytest.raises(InputTypeError, match="must hold numbers"):
        check_logits(np.array([["a", "b"]]))
