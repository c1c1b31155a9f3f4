"""Calibration errors against torchmetrics and independent re-implementations of the papers' formulas."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special

from logitscope.analysis import (
    classwise_calibration_error,
    expected_calibration_error,
    maximum_calibration_error,
    reliability_bins,
    sample_scores,
)
from logitscope.errors import LabelError, ParameterError, ShapeError


def _torchmetrics_ce(z: np.ndarray, y: np.ndarray, t: float, norm: str) -> float:
    torch = pytest.importorskip("torch")
    tm = pytest.importorskip("torchmetrics.functional.classification")
    probs = special.softmax(z / t, axis=1)  # float64 probabilities from scipy
    p = torch.from_numpy(probs)
    # torchmetrics casts confidences to float32 and bins them as [b/B, (b+1)/B) with a bin of its own
    # for exactly 1.0, where Guo et al. use (b/B, (b+1)/B]. The two agree unless a confidence sits on
    # an edge: continuous random logits put none there, and none may round to 1.0 in float32.
    assert np.all(probs.max(axis=1).astype(np.float32) < 1.0)
    value = tm.multiclass_calibration_error(p, torch.from_numpy(y), num_classes=z.shape[1], n_bins=15, norm=norm)
    return float(value)


@pytest.mark.parametrize("t", [0.7, 1.0, 2.0])
def test_ece_and_mce_match_torchmetrics(make_logits, backend, t):
    z, y = make_logits(n=2000, k=5, scale=3.0, true_temperature=1.6)
    # Guo et al. (2017) ECE with 15 equal-width bins: torchmetrics norm="l1"; MCE: norm="max"
    # (tolerance: torchmetrics accumulates in float32)
    assert expected_calibration_error(z, y, temperature=t, n_bins=15) == pytest.approx(
        _torchmetrics_ce(z, y, t, "l1"), abs=1e-6
    )
    assert maximum_calibration_error(z, y, temperature=t, n_bins=15) == pytest.approx(
        _torchmetrics_ce(z, y, t, "max"), abs=1e-6
    )


def test_equal_width_bins_are_closed_on_the_right():
    # Guo et al. (2017): bin b holds confidences in (b/15, (b+1)/15]; the edges themselves
    edges = np.linspace(0.0, 1.0, 16)
    conf = np.r_[0.0, edges[1:], edges[1:-1] + 1e-9]
    rb = reliability_bins(conf, np.ones(conf.size, dtype=bool), n_bins=15)
    expected = np.r_[0, np.arange(15), np.arange(1, 15)]  # 0 joins the first bin
    np.testing.assert_array_equal(rb.bin_of, expected)
    np.testing.assert_allclose(rb.lower, edges[:-1])
    np.testing.assert_allclose(rb.upper, edges[1:])


def test_reliability_bins_against_a_direct_loop(rng):
    conf = rng.uniform(0.2, 1.0, 700)
    ok = rng.random(700) < conf**2  # over-confident on purpose
    rb = reliability_bins(conf, ok, n_bins=10)
    # direct loop over the bins (b/10, (b+1)/10] of Guo et al. (2017)
    n = conf.size
    ece = 0.0
    gaps = []
    for b in range(10):
        lo, hi = b / 10, (b + 1) / 10
        m = (conf > lo) & (conf <= hi)
        assert rb.count[b] == m.sum()
        if m.any():
            acc, mc = ok[m].mean(), conf[m].mean()
            assert rb.accuracy[b] == pytest.approx(acc) and rb.confidence[b] == pytest.approx(mc)
            ece += m.sum() / n * abs(acc - mc)
            gaps.append(abs(acc - mc))
        else:
            assert np.isnan(rb.accuracy[b]) and np.isnan(rb.confidence[b])
    assert rb.count.sum() == n
    assert rb.ece == pytest.approx(ece, abs=1e-12)
    assert rb.mce == pytest.approx(max(gaps), abs=1e-12)
    assert np.all(rb.gap[rb.count > 0] < 0.05)  # accuracy conf^2 < conf: every used bin over-confident
    # bin_of points each sample at its bin
    for b in range(10):
        assert np.all((conf[rb.bin_of == b] > b / 10) & (conf[rb.bin_of == b] <= (b + 1) / 10))


def _equal_mass_ece_reference(conf: np.ndarray, ok: np.ndarray, n_bins: int) -> float:
    """Equal-mass ("adaptive") binning of Nixon et al. (2019), written here from the paper's formula:
    sort the confidences, cut them into n_bins groups of N / n_bins samples, and sum
    |B| / N * |acc(B) - conf(B)|. Independent of the library code (plain loop, N divisible by n_bins)."""
    order = sorted(range(conf.size), key=lambda i: conf[i])
    size = conf.size // n_bins
    total = 0.0
    for b in range(n_bins):
        members = order[b * size : (b + 1) * size]
        acc = sum(bool(ok[i]) for i in members) / size
        mc = sum(float(conf[i]) for i in members) / size
        total += size / conf.size * abs(acc - mc)
    return total


def test_equal_mass_ece_matches_the_papers_formula(make_logits, backend):
    z, y = make_logits(n=600, k=4, scale=2.5, true_temperature=2.0)  # 600 = 15 bins x 40
    s = sample_scores(z, y, backend=backend)
    ref = _equal_mass_ece_reference(s.confidence, s.correct, 15)
    assert expected_calibration_error(z, y, n_bins=15, strategy="quantile") == pytest.approx(ref, abs=1e-12)
    rb = reliability_bins(s.confidence, s.correct, n_bins=15, strategy="quantile")
    assert np.all(rb.count == 40)


def test_equal_mass_bins_with_a_remainder(rng):
    conf = rng.uniform(0, 1, 101)
    rb = reliability_bins(conf, rng.random(101) < 0.5, n_bins=10, strategy="quantile")
    assert rb.count.sum() == 101 and rb.count.max() - rb.count.min() == 1
    # bins are contiguous runs of the sorted confidences
    order = np.argsort(conf)
    assert np.all(np.diff(rb.bin_of[order]) >= 0)


def _classwise_ece_reference(p: np.ndarray, y: np.ndarray, n_bins: int) -> float:
    """Classwise ECE of Kull et al. (2019), written here from the paper's formula:
    (1/K) sum_j sum_b |B_jb| / N * |mean(1[y = j]) - mean(p_j)| over the samples whose p_j falls in
    bin b = (b/B, (b+1)/B] (0 in the first bin). Plain loops, independent of the library code."""
    n, k = p.shape
    total = 0.0
    for j in range(k):
        for b in range(n_bins):
            lo, hi = b / n_bins, (b + 1) / n_bins
            members = [i for i in range(n) if (lo < p[i, j] <= hi) or (b == 0 and p[i, j] == 0.0)]
            if not members:
                continue
            freq = sum(y[i] == j for i in members) / len(members)
            mp = sum(p[i, j] for i in members) / len(members)
            total += len(members) / n * abs(freq - mp)
    return total / k


@pytest.mark.parametrize("t", [1.0, 1.8])
def test_classwise_ece_matches_the_papers_formula(make_logits, t):
    z, y = make_logits(n=300, k=4, scale=2.0, true_temperature=1.8)
    ref = _classwise_ece_reference(special.softmax(z / t, axis=1), y, 15)
    assert classwise_calibration_error(z, y, temperature=t, n_bins=15) == pytest.approx(ref, abs=1e-12)


def test_calibration_input_errors(make_logits):
    z, y = make_logits(n=20, k=3)
    with pytest.raises(ParameterError, match=r"n_bins must lie in \[1, 100\]"):
        expected_calibration_error(z, y, n_bins=0)
    with pytest.raises(ParameterError, match=r"n_bins must be an integer in \[1, 100\]"):
        classwise_calibration_error(z, y, n_bins=2.5)
    with pytest.raises(ParameterError, match="strategy must be 'uniform' or 'quantile'"):
        expected_calibration_error(z, y, strategy="log")
    with pytest.raises(ParameterError, match=r"confidence values must lie in \[0, 1\]"):
        reliability_bins([0.5, 1.2], [True, False])
    with pytest.raises(ShapeError, match="1-D of one length"):
        reliability_bins([0.5, 0.6], [True])
    with pytest.raises(ShapeError, match="at least one sample"):
        reliability_bins([], [])
    with pytest.raises(LabelError, match="out of range"):
        expected_calibration_error(z, np.full(20, 3))
