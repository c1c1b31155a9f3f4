"""The compiled paths behind a large report give the numbers of the plain definitions.

Each check compares a fast path with a definition written out here in numpy (brute force: every
threshold, every row) or with the numpy path it replaces, to the last bit where the report prints
full precision. Data: seeded help desk tickets routed to a few queues.
"""

from __future__ import annotations

import numpy as np
import pytest

from logitscope import LogitFrame
from logitscope.analysis import calibration, selective, temperature
from logitscope.analysis.label_errors import rank_doubtful_labels
from logitscope.findings import collect, resolve_choices
from logitscope.rows import as_rows

pytest.importorskip("numba")


def _tickets(n: int, k: int, seed: int = 3) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    y = rng.integers(0, k, n)
    z = (rng.standard_normal((n, k)) * 1.5).astype(np.float32)
    z[np.arange(n), y] += 2.0
    return z, y


def _coarse_confidences(n: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Confidences rounded to 3 decimals (many ties, as a float16 model gives) and whether each was right."""
    rng = np.random.default_rng(seed)
    conf = np.round(rng.uniform(0.3, 1.0, n), 3)
    ok = rng.random(n) < conf
    return conf, ok


def test_curve_matches_the_definition_at_every_threshold() -> None:
    conf, ok = _coarse_confidences(5000)
    rc = selective.risk_coverage_curve(conf, ok)
    # definition (Geifman and El-Yaniv 2017): a threshold t accepts conf >= t; ties stand or fall together
    distinct = np.unique(conf)[::-1]
    assert np.array_equal(rc.threshold, distinct)
    assert np.array_equal(rc.n_accepted, [(conf >= t).sum() for t in distinct])
    assert np.array_equal(rc.n_errors, [((conf >= t) & ~ok).sum() for t in distinct])


@pytest.mark.parametrize("n", [1, 2, 7, 4000])
def test_curve_kernel_equals_the_numpy_path(n: int, monkeypatch: pytest.MonkeyPatch) -> None:
    conf, ok = _coarse_confidences(n, seed=n)
    fast = selective.risk_coverage_curve(conf, ok)
    monkeypatch.setattr(selective, "_select_kernels", lambda: None)
    plain = selective.risk_coverage_curve(conf, ok)
    for name in ("threshold", "n_accepted", "n_errors"):
        a, b = getattr(fast, name), getattr(plain, name)
        assert a.dtype == b.dtype and np.array_equal(a, b)


def test_aurc_kernel_equals_the_numpy_expression_to_the_bit(monkeypatch: pytest.MonkeyPatch) -> None:
    conf, ok = _coarse_confidences(30000, seed=5)
    rc = selective.risk_coverage_curve(conf, ok)
    fast = selective.aurc_of_curve(rc)
    monkeypatch.setattr(selective, "_select_kernels", lambda: None)
    assert fast == selective.aurc_of_curve(rc)
    monkeypatch.undo()
    # the definition (Geifman, Uziel and El-Yaniv 2019) with ties accepted together: the mean over samples
    # of the risk at each sample's own confidence
    c, o = conf[:2000], ok[:2000]
    risk = [((c >= x) & ~o).sum() / (c >= x).sum() for x in c]
    assert selective.aurc_of_curve(selective.risk_coverage_curve(c, o)) == pytest.approx(np.mean(risk), rel=1e-12)


def test_uniform_bins_equal_the_numpy_path_to_the_bit(monkeypatch: pytest.MonkeyPatch) -> None:
    conf, ok = _coarse_confidences(20000)
    conf[:50] = 2 / 15  # on an inner edge: the lower bin, as (b / B, (b + 1) / B] (Guo et al. 2017)
    fast = calibration.reliability_bins(conf, ok, 15)
    monkeypatch.setattr(selective, "_select_kernels", lambda: None)
    plain = calibration.reliability_bins(conf, ok, 15)
    assert fast.bin_of.dtype == np.int8 and np.array_equal(fast.bin_of, plain.bin_of)
    assert np.array_equal(fast.count, plain.count)
    assert fast.accuracy.tobytes() == plain.accuracy.tobytes()
    assert fast.confidence.tobytes() == plain.confidence.tobytes()
    assert np.all(fast.bin_of[:50] == 1)
    # the bin of every row by its definition: the b with b / B < conf <= (b + 1) / B
    assert np.array_equal(fast.bin_of, np.ceil(conf * 15).astype(int) - 1)


def test_moments_on_rows_in_place_equal_the_gathered_copy_to_the_bit(monkeypatch: pytest.MonkeyPatch) -> None:
    z, y = _tickets(30000, 7)
    rows = np.flatnonzero(np.random.default_rng(1).random(30000) < 0.5)
    got = [temperature._moments_on(z, y, beta, rows) for beta in (0.5, 1.0, 1.7)]
    monkeypatch.setattr(temperature, "_rows_kernel", lambda z, y: None)
    ref = [temperature._moments_on(z, y, beta, rows) for beta in (0.5, 1.0, 1.7)]
    assert got == ref
    # and the fit on those rows is the fit on a copy of them
    fit = temperature.fit_temperature(z, y, rows=rows)
    assert fit.temperature == pytest.approx(temperature.fit_temperature(z[rows], y[rows]).temperature, rel=1e-9)


def test_confident_learning_ranking_is_unchanged_by_ranking_the_flagged_rows_only() -> None:
    z, y = _tickets(6000, 5)
    y[:300] = (y[:300] + 1) % 5  # some wrong labels
    ranked = rank_doubtful_labels(z, y, "confident_learning")
    margin = rank_doubtful_labels(z, y, "label_margin")  # every row, by the same label margin
    flagged = set(ranked.index.tolist())
    keep = np.array([i in flagged for i in margin.index])
    # the flagged rows in the label-margin order (a stable sort of the same margins) with the same margins
    assert np.array_equal(ranked.index, margin.index[keep])
    assert np.array_equal(ranked.score, margin.score[keep])
    assert np.all(ranked.suggested != y[ranked.index])


def test_a_large_frame_caches_one_temperature_and_a_small_one_four() -> None:
    z, y = _tickets(3000, 4)
    small = LogitFrame(z, labels=y)
    for t in (0.5, 1.0, 1.5, 2.0, 2.5):
        small.sample_scores(t)
    big = LogitFrame(z, labels=y)
    big._CACHE_MIN_BYTES = 0  # as a frame whose scores outweigh a quarter of its matrix
    for t in (0.5, 1.0):
        big.sample_scores(t)
    assert small._cache_slots() == 4 and big._cache_slots() == 1
    np.testing.assert_array_equal(big.sample_scores(0.5).confidence, small.sample_scores(0.5).confidence)


def test_read_only_rows_are_shared_and_writable_ones_copied() -> None:
    r = np.array([1, 4, 7], dtype=np.int64)
    assert as_rows(r, 10) is not r
    r.flags.writeable = False
    assert as_rows(r, 10) is r
    view = np.arange(10, dtype=np.int64)[::2]
    view.flags.writeable = False
    assert as_rows(view, 10) is not view  # a view of data someone else owns: copied


def test_report_findings_are_those_of_separate_calls() -> None:
    from logitscope.findings import calibration_summary, threshold_decision

    z, y = _tickets(4000, 6)
    frame = LogitFrame(z, labels=y)
    f = collect(frame, *resolve_choices(frame, fit_temperature=True, target_accuracy=0.9))
    fresh = LogitFrame(z, labels=y)
    t = f.choices.temperature
    assert f.decision.aurc == calibration_summary(fresh, t).aurc
    assert f.threshold.aurc == threshold_decision(fresh, f.choices.rule, t).aurc
    assert f.held_out is not None
    for key, tk, _ in f.held_out.columns:
        assert f.held_out.fit[key].to_dict() == calibration_summary(fresh, tk, f.split.fit).to_dict()
        assert f.held_out.held[key].to_dict() == calibration_summary(fresh, tk, f.split.held_out).to_dict()
