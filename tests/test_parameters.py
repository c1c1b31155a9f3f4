"""One accepted range per parameter (logitscope.parameters), used by the analysis layer.

The ranges are the project's own declarations; the checks here are that each function accepts
exactly its range (both ends), refuses the rest with a ParameterError naming the range, and gives
the right numbers inside it (against pandas / a brute-force loop) for the values the issue found
silently changed (n_bins = 50 and 2, target accuracy 0.3).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from logitscope import LogitFrame
from logitscope.analysis import (
    binomial_interval,
    class_mix_check,
    default_temperature_grid,
    evaluate_threshold,
    fit_temperature,
    largest_confusions,
    random_split,
    rank_doubtful_labels,
    reliability_bins,
    sample_scores,
    threshold_for_accuracy,
    threshold_for_cost,
    top_k_accuracy,
)
from logitscope.analysis import temperature as temperature_module
from logitscope.errors import InputTypeError, ParameterError
from logitscope.parameters import RANGES, ParameterRange, check, get_range


@pytest.mark.parametrize("name", sorted(RANGES))
def test_every_range_is_consistent(name):
    r = RANGES[name]
    assert r.name == name
    upper = 7 if r.max is None else None
    lo, hi = r.bounds(upper)
    assert lo < hi
    if r.default is not None:
        assert r.contains(r.default, upper) and check(r.default, name, upper) == r.default
    c_lo, c_hi, step = r.control_bounds(upper)
    assert step > 0
    ends = (10**c_lo, 10**c_hi) if r.log else (c_lo, c_hi)
    # a control's closed ends are accepted values
    assert check(ends[0] if r.kind == "float" else int(ends[0]), name, upper) is not None
    assert check(ends[1] if r.kind == "float" else int(ends[1]), name, upper) is not None
    # the ends of the range itself: accepted when closed, refused when open
    for end, is_open in ((lo, r.min_open), (hi, r.max_open)):
        value = int(end) if r.kind == "int" else float(end)
        if is_open:
            with pytest.raises(ParameterError, match=re_escape(r.interval(upper))):
                check(value, name, upper)
        else:
            assert check(value, name, upper) == value
    below = lo - 1 if r.kind == "int" else lo - 1e-9 * max(1.0, abs(lo))
    above = hi + 1 if r.kind == "int" else hi * (1 + 1e-9) + 1e-12
    for bad in (int(below) if r.kind == "int" else below, int(above) if r.kind == "int" else above, math.nan):
        with pytest.raises(ParameterError, match=f"{re_escape(r.label)} must .*{re_escape(r.interval(upper))}"):
            check(bad, name, upper)


def re_escape(text: str) -> str:
    import re

    return re.escape(text)


def test_kinds_and_types():
    assert check(np.int64(15), "n_bins") == 15 and isinstance(check(np.int64(15), "n_bins"), int)
    assert check(np.float32(0.5), "level") == 0.5
    assert check(np.array(2.0), "temperature") == 2.0  # a 0-d array, as np.load returns
    with pytest.raises(ParameterError, match=r"n_bins must be an integer in \[1, 100\]"):
        check(2.5, "n_bins")
    for bad in (True, np.bool_(False), "15", None):
        with pytest.raises(InputTypeError, match="n_bins must be an integer"):
            check(bad, "n_bins")
    with pytest.raises(ParameterError, match="no parameter named 'bins'"):
        get_range("bins")
    with pytest.raises(ParameterError, match="needs its upper end"):
        check(2, "k")


def test_control_bounds_for_sliders():
    assert RANGES["n_bins"].control_bounds() == (1, 100, 1)
    assert RANGES["temperature"].control_bounds() == (-3.0, 3.0, 0.01)  # FloatLogSlider exponents
    lo, hi, step = RANGES["level"].control_bounds()
    assert lo == pytest.approx(0.001) and hi == pytest.approx(0.999) and step == 0.001
    assert RANGES["k"].control_bounds(upper=10) == (1, 10, 1)
    custom = ParameterRange("x", "x", "float", 0.0, 2.0, 0.5, 1.0, min_open=True)
    assert custom.control_bounds() == (0.5, 2.0, 0.5)


def _pandas_ece(conf: np.ndarray, ok: np.ndarray, n_bins: int) -> float:
    """ECE with equal-width bins (b / B, (b + 1) / B] via pandas.cut (Guo et al. 2017, Eq. 3)."""
    cut = pd.cut(conf, np.linspace(0, 1, n_bins + 1), include_lowest=True, labels=False)
    df = pd.DataFrame({"bin": cut, "conf": conf, "ok": ok.astype(float)})
    g = df.groupby("bin").agg(n=("ok", "size"), acc=("ok", "mean"), conf=("conf", "mean"))
    return float(np.sum(g["n"] / conf.size * np.abs(g["acc"] - g["conf"])))


@pytest.mark.parametrize("n_bins", [1, 2, 50, 100])
def test_n_bins_is_honoured_across_its_range(make_logits, n_bins):
    # ReliabilityDiagram(n_bins=50) used to show 40 bins and n_bins=2 three: the analysis takes both as given
    z, y = make_logits(n=3000, k=5, scale=3.0, true_temperature=1.5)
    s = sample_scores(z, y)
    rb = reliability_bins(s.confidence, s.correct, n_bins=n_bins)
    assert rb.count.size == n_bins
    assert rb.ece == pytest.approx(_pandas_ece(s.confidence, s.correct, n_bins), rel=1e-12)  # reference: pandas


def test_out_of_range_values_are_refused_by_the_analysis(make_logits):
    z, y = make_logits(n=200, k=4)
    s = sample_scores(z, y)
    cases = [
        (lambda: reliability_bins(s.confidence, s.correct, n_bins=101), r"n_bins must lie in \[1, 100\]"),
        (lambda: sample_scores(z, temperature=1e-4), r"temperature must lie in \[0\.001, 1000\]"),
        (lambda: sample_scores(z, temperature=2e3), r"temperature must lie in \[0\.001, 1000\]"),
        (lambda: top_k_accuracy(z, y, k=5), r"k must lie in \[1, 4\] for 4 classes"),
        (lambda: binomial_interval(3, 5, level=0.0), r"level must lie in \(0, 1\)"),
        (lambda: threshold_for_accuracy(s.confidence, s.correct, 0.0), r"target accuracy must lie in \(0, 1\]"),
        (lambda: threshold_for_accuracy(s.confidence, s.correct, 0.9, level=1.0), r"level must lie in \(0, 1\)"),
        (lambda: threshold_for_cost(s.confidence, s.correct, 1.0, -0.1), r"review cost must lie in \[0, 1e\+09\]"),
        (lambda: evaluate_threshold(s.confidence, s.correct, -0.1), r"threshold must lie in \[0, 1\]"),
        (lambda: random_split(100, 1.0), r"held_out_fraction must lie in \(0, 1\)"),
        (lambda: class_mix_check([3, 4], reference_counts=[4, 3], alpha=0.0), r"alpha must lie in \(0, 0\.5\]"),
        (lambda: class_mix_check([3, 4], reference_counts=[4, 3], n_draws=10), r"n_draws must lie in \[100, 1e\+07\]"),
        (lambda: largest_confusions(np.eye(3), n=0), r"n_pairs must lie in \[1, 1000\]"),
        (lambda: rank_doubtful_labels(z, y).top(0), r"n_candidates must lie in \[1, 100000\]"),
        (lambda: default_temperature_grid(1), r"n_temperatures must lie in \[2, 1001\]"),
        (lambda: LogitFrame(z, temperature=0.0), r"temperature must lie in \[0\.001, 1000\]"),
    ]
    for call, message in cases:
        with pytest.raises(ParameterError, match=message):
            call()


def test_target_accuracy_below_one_half_is_honoured(make_logits):
    # ThresholdPicker(target_accuracy=0.3) used to become 0.5; the rule takes 0.3 as given.
    # Reference: the lowest distinct confidence whose accepted samples reach the target, by brute force.
    z, y = make_logits(n=600, k=8, scale=1.0, true_temperature=3.0)  # a weak model: accuracy near 0.3
    s = sample_scores(z, y)
    conf, ok = s.confidence, s.correct
    for target in (0.3, 0.35):
        c = threshold_for_accuracy(conf, ok, target)
        feasible = [t for t in np.unique(conf) if ok[conf >= t].mean() >= target]
        assert c.threshold == min(feasible)
        assert c.accuracy >= target


def test_the_fit_stays_in_the_temperature_range():
    assert (temperature_module.T_MIN, temperature_module.T_MAX) == RANGES["temperature"].bounds()
    z = np.array([[3.0, 0.0], [0.0, 3.0]])
    with pytest.warns(RuntimeWarning, match="bound"):
        fit = fit_temperature(z, [0, 1])  # separable: the fit stops at the lower end of the range
    assert RANGES["temperature"].contains(fit.temperature) and fit.temperature == pytest.approx(1e-3)
