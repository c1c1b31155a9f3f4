"""Every control takes its bounds from the declared parameter ranges and never clamps a value the API accepts.

The reference is :mod:`logitscope.parameters` (``RANGES[...].control_bounds()`` and
``Binning.N_BINS_RANGE``): each control's ends must be those of the range, a value the API
accepts must be shown as it is (not moved to a slider end), and a value outside the range must
be refused with a message, never quietly replaced. Numbers behind the controls are checked
against scipy / numpy where they are computed.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import special

from logitscope import LogitFrame, ParameterError
from logitscope.findings import Binning
from logitscope.parameters import RANGES
from logitscope.widgets import (
    CalibrationPanel,
    ConfusionHeatmap,
    DoubtfulLabelPicker,
    ReliabilityDiagram,
    SharedState,
    TemperatureDial,
    TemperatureSweepView,
    ThresholdPicker,
)


@pytest.fixture(scope="module")
def parcels() -> LogitFrame:
    """2,000 samples x 12 classes of seeded synthetic logits."""
    rng = np.random.default_rng(12)
    y = rng.integers(0, 12, 2000)
    z = rng.normal(size=(2000, 12)).astype(np.float32)
    z[np.arange(2000), y] += 2.0
    return LogitFrame(z, labels=y)


def _bounds(name: str) -> tuple[float, float]:
    lo, hi, _ = RANGES[name].control_bounds()
    return lo, hi


def test_dial_spans_the_temperature_range_and_shows_any_accepted_value(mailroom):
    dial = TemperatureDial(mailroom)
    assert (dial.slider.min, dial.slider.max) == _bounds("temperature")  # log10 exponents: 1e-3 .. 1e3
    for t in (0.001, 0.37, 999.0):
        dial.state.temperature = t
        assert dial.slider.value == pytest.approx(t) and dial.box.value == t
    # the number box takes any accepted temperature exactly, and refuses one outside the range with a message
    dial.box.value = 0.0123
    assert dial.state.temperature == 0.0123
    dial.box.value = 5000.0
    assert dial.state.temperature == 0.0123 and "must lie in [0.001, 1000]" in dial.readout.value
    # a narrower slider widens when the shared temperature goes beyond it (never rests at an end)
    narrow = TemperatureDial(mailroom, t_min=0.5, t_max=2.0)
    narrow.state.temperature = 40.0
    assert narrow.slider.value == pytest.approx(40.0) and 10**narrow.slider.max >= 40.0
    with pytest.raises(ParameterError, match=r"temperature must lie in \[0.001, 1000\] \(t_min\)"):
        TemperatureDial(mailroom, t_min=1e-5)
    with pytest.raises(ParameterError):
        dial.state.temperature = 2000.0  # the shared state holds the same range


def test_sweep_slider_spans_the_temperature_range(mailroom):
    sweep = TemperatureSweepView(mailroom)
    assert (sweep.slider.min, sweep.slider.max) == _bounds("temperature")
    sweep.state.temperature = 600.0  # beyond the swept grid: the grid widens, the slider shows the value
    assert sweep.slider.value == pytest.approx(600.0)
    assert sweep.finding is not None and sweep.finding.temperature.max() >= 600.0
    with pytest.raises(ParameterError, match="temperature must lie"):
        sweep.set_temperature(0.0)


def test_threshold_controls_take_their_ranges(mailroom):
    picker = ThresholdPicker(mailroom, mode="target accuracy", target_accuracy=0.3)
    assert (picker.slider.min, picker.slider.max) == _bounds("threshold")
    assert picker.target_accuracy == 0.3  # accepted, so kept (it used to become 0.5)
    # a threshold below 1/K is accepted by the API and shown as it is (the slider used to start at 1/K)
    picker.set_threshold(0.04)
    assert picker.slider.value == pytest.approx(0.04) and picker.threshold == 0.04
    # the target box is a plain number box: an accepted value is taken exactly, an outside one refused
    picker.mode = "target accuracy"
    picker._target.value = 0.0005  # what typing sends
    assert picker.target_accuracy == 0.0005
    picker._target.value = 0.0
    assert picker.target_accuracy == 0.0005 and "target accuracy must lie in (0, 1]" in picker.error.value
    picker._target.value = 0.9
    assert picker.target_accuracy == 0.9 and picker.error.value == ""
    # costs: any number of their range, refused with a message outside it
    picker.mode = "costs"
    picker._error_cost.value = 2.5e8
    assert picker.error_cost == 2.5e8
    picker._review_cost.value = -1.0
    assert picker.review_cost == 1.0 and "review cost must lie in [0, 1e+09], got -1.0" in picker.error.value
    picker._error_cost.value = 2e9
    assert picker.error_cost == 2.5e8 and "error cost must lie in [0, 1e+09]" in picker.error.value
    # any interval level of the range: offered in the menu when not among 90/95/99 %
    odd = ThresholdPicker(mailroom, mode="target accuracy", level=0.8)
    assert odd.level == 0.8 and odd.choice is not None and odd.choice.level == 0.8
    assert ("80%", 0.8) in odd._level.options
    odd.level = 0.975
    assert ("97.5%", 0.975) in odd._level.options and odd.choice.level == 0.975
    with pytest.raises(ParameterError, match="level must lie in"):
        ThresholdPicker(mailroom, level=1.0)


def test_threshold_readout_interval_is_the_wilson_interval(mailroom):
    # the level offered beyond the menu reaches the numbers: Wilson score interval (Wilson 1927) by formula
    picker = ThresholdPicker(mailroom, mode="target accuracy", target_accuracy=0.95, level=0.8)
    c = picker.choice
    assert c is not None
    n, k = c.n_accepted, round(c.accuracy * c.n_accepted)
    z = special.ndtri(0.5 + 0.8 / 2)  # scipy's inverse normal CDF
    p = k / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z / (1 + z * z / n) * np.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    assert c.interval[0] == pytest.approx(centre - half, rel=1e-9)
    assert c.interval[1] == pytest.approx(centre + half, rel=1e-9)


def test_bins_slider_and_fraction_slider_take_their_ranges(mailroom):
    diagram = ReliabilityDiagram(mailroom, n_bins=50)
    assert (diagram._bins_slider.min, diagram._bins_slider.max) == Binning.N_BINS_RANGE == _bounds("n_bins")
    assert diagram.binning.n_bins == 50 and diagram._bins_slider.value == 50  # 50 stays 50
    assert diagram.finding is not None and diagram.finding.bins.count.size == 50
    panel = CalibrationPanel(mailroom)
    lo, hi, step = RANGES["held_out_fraction"].control_bounds()
    assert (panel._fraction.min, panel._fraction.max, panel._fraction.step) == (lo, hi, step)
    assert panel._fraction.readout is False  # no typed value to clamp; the share is shown beside it
    assert panel._fraction_text.value == "50%"
    # a fraction the slider cannot show is still taken from Python, as the range allows
    panel.use_random_split(0.02, seed=3)
    assert panel.split is not None and "2% held out" in panel.split.description
    assert 0 < len(panel.split.held_out) < 0.05 * mailroom.n_samples


def test_picker_count_box_refuses_instead_of_clamping(mailroom):
    picker = DoubtfulLabelPicker(mailroom)
    lo, hi, _ = RANGES["n_candidates"].control_bounds()
    assert (picker.n_min, picker.n_max) == (lo, hi)
    assert picker.set_count("100000") and picker.n == 100_000
    assert not picker.set_count("0") and picker.n == 100_000 and "n_candidates must lie in [1, 100000]" in picker.status
    assert not picker.set_count("2.5") and picker.n == 100_000
    assert not picker.set_count("") and picker.n == 100_000
    assert picker.set_count(12) and picker.n == 12


def test_confusion_k_beyond_the_menu_is_offered_not_clamped(parcels):
    view = ConfusionHeatmap(parcels, k=7)
    assert view.k == 7 and ("top 7", 7) in view._k_menu.options
    view.k = 12  # every class: within the top 12 of 12 classes
    assert view.k == 12 and view._k_menu.value == 12
    with pytest.raises(ParameterError, match=r"k must lie in \[1, 12\]"):
        ConfusionHeatmap(parcels, k=13)
    with pytest.raises(ParameterError, match=r"max_classes must lie in \[2, 1000\]"):
        ConfusionHeatmap(parcels, max_classes=1)
    with pytest.raises(ParameterError, match=r"n_pairs must lie in \[1, 1000\]"):
        ConfusionHeatmap(parcels, n_pairs=0)


def test_shared_state_refuses_temperatures_outside_the_range():
    state = SharedState(3)
    state.temperature = 1e-3
    state.temperature = 1e3
    for bad in (0.0, 1e4, float("nan")):
        with pytest.raises(ParameterError):
            state.temperature = bad
    assert state.temperature == 1e3
    dial = TemperatureDial(LogitFrame(np.zeros((3, 2))))
    dial.box.value = float("inf")
    assert dial.state.temperature == 1.0 and "not set" in dial.readout.value
