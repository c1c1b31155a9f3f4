"""Calibration views in Python: traits and callbacks (bin click -> rows, sweep T -> state, threshold readouts, brush).

Numbers are checked against scikit-learn (log_loss, brier_score_loss), torchmetrics
(multiclass_calibration_error), scipy (softmax, optimize.minimize_scalar, binomtest intervals),
pandas (cut for the bins) and the hand-worked threshold example of tests/test_report.py.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, special, stats
from sklearn.metrics import brier_score_loss, log_loss

import logitscope
from logitscope import LogitFrame, LogitscopeError, ParameterError
from logitscope.analysis import CAUTION
from logitscope.analysis.split import random_split
from logitscope.findings import Binning
from logitscope.widgets.calibration_panel import CalibrationPanel
from logitscope.widgets.reliability import ReliabilityDiagram
from logitscope.widgets.state import SharedState
from logitscope.widgets.sweep import TemperatureSweepView
from logitscope.widgets.threshold import ThresholdPicker
from test_report import HAND_CONF, HAND_RIGHT, hand_frame, read_report

pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning")


def _probs(frame: LogitFrame, t: float, rows: np.ndarray | None = None) -> np.ndarray:
    z = np.asarray(frame.logits, dtype=np.float64)
    if rows is not None:
        z = z[rows]
    return special.softmax(z / t, axis=1)  # scipy softmax is the reference


def _pandas_bin(conf: np.ndarray, n_bins: int = 15) -> np.ndarray:
    # Guo et al. (2017) bins (b/B, (b+1)/B]: pandas.cut with right-closed intervals
    return pd.cut(conf, np.linspace(0, 1, n_bins + 1), include_lowest=True, labels=False).astype(int)


def _scipy_temperature(z: np.ndarray, y: np.ndarray) -> float:
    # scipy.optimize on sklearn's log_loss
    res = optimize.minimize_scalar(
        lambda lt: log_loss(y, special.softmax(z / math.exp(lt), axis=1), labels=range(z.shape[1])),
        bounds=(-5, 5),
        method="bounded",
        options={"xatol": 1e-9},
    )
    return math.exp(res.x)


def _click(mark_owner: ReliabilityDiagram, dot_index: int) -> None:
    """What bqplot sends when dot ``dot_index`` of the diagram (one per non-empty bin) is clicked."""
    mark_owner._on_click(mark_owner.dots, {"event": "element_click", "data": {"index": dot_index}})


# --------------------------------------------------------------------------- reliability diagram


def test_diagram_bins_and_numbers_match_pandas_sklearn_torchmetrics(mailroom: LogitFrame) -> None:
    torch = pytest.importorskip("torch")
    tm = pytest.importorskip("torchmetrics.functional.classification")
    view = ReliabilityDiagram(mailroom)
    for t in (1.0, 0.7):
        view.state.temperature = t
        p = _probs(mailroom, t)
        conf, ok = p.max(axis=1), p.argmax(axis=1) == mailroom.labels
        ref_bin = _pandas_bin(conf)
        bins = view.finding.bins
        assert np.array_equal(bins.bin_of, ref_bin)  # pandas.cut
        assert np.array_equal(bins.count, np.bincount(ref_bin, minlength=15))
        # drawn dots: one per non-empty bin, at (mean confidence, accuracy) (pandas groupby mean)
        acc = pd.Series(ok.astype(float)).groupby(ref_bin).mean()
        mean_conf = pd.Series(conf).groupby(ref_bin).mean()
        assert np.allclose(np.asarray(view.dots.y), acc.to_numpy())
        assert np.allclose(np.asarray(view.dots.x), mean_conf.to_numpy())
        assert np.asarray(view.count_bars.y)[:, 1].tolist() == np.bincount(ref_bin)[acc.index].tolist()
        n = view.finding
        assert n.nll == pytest.approx(log_loss(mailroom.labels, p), rel=1e-7)  # sklearn
        assert n.brier == pytest.approx(brier_score_loss(mailroom.labels, p, labels=range(10)), rel=1e-7)
        ece = tm.multiclass_calibration_error(
            torch.from_numpy(p), torch.from_numpy(np.array(mailroom.labels)), num_classes=10, n_bins=15, norm="l1"
        )
        assert n.ece == pytest.approx(float(ece), abs=1e-5)  # torchmetrics
        assert f"{n.ece:.4f}" in view.numbers_html.value


def test_clicking_a_bin_selects_its_samples_and_a_second_click_clears(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    view = ReliabilityDiagram(mailroom, state)
    ref_bin = _pandas_bin(_probs(mailroom, 1.0).max(axis=1))
    drawn = np.unique(ref_bin)
    _click(view, 3)
    b = int(drawn[3])
    assert view.selected_bin == b
    assert np.array_equal(state.rows, np.flatnonzero(ref_bin == b))
    assert state.origin_name == "reliability diagram"
    assert view.selected_bars.visible is False  # no feedback of its own selection
    assert view.dots.colors[3] != view.dots.colors[0]  # the clicked bin is highlighted
    # the note names the bin by its confidence range (pandas.cut edges of Guo et al. 2017's bins)
    lo, hi = b / 15, (b + 1) / 15
    assert f"confidence {lo:.2f}–{hi:.2f} selected" in view.note.value
    _click(view, 3)
    assert state.rows.size == 0 and view.selected_bin is None
    with pytest.raises(ParameterError, match="bin must lie"):
        view.select_bin(99)


def test_another_views_selection_is_counted_per_bin(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    view = ReliabilityDiagram(mailroom, state)
    chosen = np.flatnonzero(mailroom.meta["desk"].to_numpy() == "night shift")
    state.select(chosen, origin="scatter")
    ref_bin = _pandas_bin(_probs(mailroom, 1.0).max(axis=1))
    per_bin = np.bincount(ref_bin[chosen], minlength=15)[np.unique(ref_bin)]
    assert view.selected_bars.visible is True
    assert np.asarray(view.selected_bars.y)[:, 1].tolist() == per_bin.tolist()
    assert f"{chosen.size:,} of these samples selected" in view.note.value
    _click(view, 0)  # a click replaces the other view's selection
    assert state.origin_name == "reliability diagram" and view.selected_bars.visible is False


def test_equal_mass_bins_and_a_row_subset(mailroom: LogitFrame) -> None:
    rows = random_split(mailroom.n_samples, 0.4, seed=2).held_out
    view = ReliabilityDiagram(mailroom, rows=rows, n_bins=10, strategy="quantile")
    assert view.finding.bins.count.sum() == rows.size
    assert view.finding.bins.count.max() - view.finding.bins.count.min() <= 1  # equal mass, up to one sample
    p = _probs(mailroom, 1.0, rows)
    assert view.finding.nll == pytest.approx(log_loss(mailroom.labels[rows], p), rel=1e-7)  # sklearn
    _click(view, 0)
    conf = p.max(axis=1)
    picked = view.state.rows
    assert np.all(np.isin(picked, rows))
    # the lowest-confidence bin holds the samples of the subset with the smallest confidences
    assert np.sort(conf)[: picked.size].max() == pytest.approx(_probs(mailroom, 1.0)[picked].max(axis=1).max())
    view.state.binning = Binning(10, "uniform")
    assert view._strategy_buttons.value == "equal width"
    view._bins_slider.value = 20
    assert view.binning.n_bins == 20 and view.finding.bins.count.size == 20


def test_two_diagrams_on_one_state_keep_their_own_selections(mailroom: LogitFrame) -> None:
    # issue: two views of one kind took each other's selection for their own ("bin None")
    state = SharedState(mailroom.n_samples)
    split = random_split(mailroom.n_samples, 0.5, seed=1)
    fit = ReliabilityDiagram(mailroom, state, rows=split.fit)
    held = ReliabilityDiagram(mailroom, state, rows=split.held_out)
    assert fit.origin != held.origin and fit.name == held.name == "reliability diagram"
    _click(fit, 2)
    assert fit.owns_selection and not held.owns_selection
    assert held.selected_bars.visible and "None" not in held.note.value
    assert "None" not in fit.note.value and "confidence" in fit.note.value
    _click(held, 1)
    assert held.owns_selection and fit.selected_bin is None and fit.selected_bars.visible


@pytest.mark.parametrize("n_bins", [1, 2, 50, 100])
def test_every_accepted_number_of_bins_is_kept(mailroom: LogitFrame, n_bins: int) -> None:
    # issue: n_bins=50 became 40 and n_bins=2 became 3 (the slider's bounds clamped them)
    view = ReliabilityDiagram(mailroom, n_bins=n_bins)
    assert view.binning.n_bins == n_bins == view.finding.bins.count.size == view._bins_slider.value
    assert (view._bins_slider.min, view._bins_slider.max) == Binning.N_BINS_RANGE


@pytest.mark.parametrize("n_bins", [0, 101, 2.5, True])
def test_a_number_of_bins_outside_the_range_is_refused(mailroom: LogitFrame, n_bins: object) -> None:
    with pytest.raises(ParameterError, match="n_bins must be an integer from 1 to 100"):
        ReliabilityDiagram(mailroom, n_bins=n_bins)  # type: ignore[arg-type]


def test_diagram_without_labels_says_so() -> None:
    frame = logitscope.load_demo("helpdesk").with_labels(None)
    view = ReliabilityDiagram(frame)
    assert view.finding is None and "needs labels" in view.note.value
    with pytest.raises(ParameterError, match="labels"):
        view.rows_of_bin(0)


# --------------------------------------------------------------------------- temperature sweep


def test_sweep_curves_and_fit_match_sklearn_and_scipy(mailroom: LogitFrame) -> None:
    view = TemperatureSweepView(mailroom)
    z, y = np.asarray(mailroom.logits, dtype=np.float64), mailroom.labels
    assert view.fitted.temperature == pytest.approx(_scipy_temperature(z, y), rel=1e-5)
    grid = np.asarray(view.curves["nll"].x)
    assert grid.size >= 41 and grid.min() <= 0.25 and grid.max() >= 4
    for i in (0, 10, 20, 40):
        p = _probs(mailroom, float(grid[i]))
        assert view.curves["nll"].y[i] == pytest.approx(log_loss(y, p), rel=1e-7)  # sklearn
        assert view.curves["brier"].y[i] == pytest.approx(brier_score_loss(y, p, labels=range(10)), rel=1e-7)
    # the fitted temperature is marked by the first rule of every plot
    for key in ("nll", "ece", "brier"):
        assert np.asarray(view._rules[key].x)[0, 0] == pytest.approx(view.fitted.temperature)


def test_dragging_the_marker_or_the_slider_sets_the_shared_temperature(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    sweep = TemperatureSweepView(mailroom, state)
    diagram = ReliabilityDiagram(mailroom, state)
    # what bqplot sends at the end of a drag of the marker
    sweep._on_drag_end(sweep.marker, {"event": "drag_end", "point": {"x": 1.7, "y": 0.4}, "index": 0})
    assert state.temperature == 1.7
    # the linked diagram follows (sklearn log_loss at the new temperature)
    assert diagram.finding.nll == pytest.approx(log_loss(mailroom.labels, _probs(mailroom, 1.7)), rel=1e-7)
    # the dot's own label follows the drag (its tooltip kept the first value)
    assert sweep.marker_label.text == ["T 1.700"]
    # the marker moved to the NLL curve at that temperature, the slider with it
    assert sweep.marker.x[0] == pytest.approx(1.7)
    assert sweep.marker.y[0] == pytest.approx(log_loss(mailroom.labels, _probs(mailroom, 1.7)), rel=1e-7)
    assert sweep.slider.value == pytest.approx(1.7, rel=1e-2)
    sweep.marker.x = [0.6]  # the marker's x synced back from the browser
    assert state.temperature == pytest.approx(0.6)
    sweep.slider.value = 2.5
    assert state.temperature == pytest.approx(2.5)
    state.temperature = 0.9  # from another view: marker, slider and readout follow
    assert sweep.marker.x[0] == pytest.approx(0.9) and sweep.slider.value == pytest.approx(0.9, rel=1e-2)
    nll = log_loss(mailroom.labels, _probs(mailroom, 0.9))
    assert f"NLL {nll:.4f}" in sweep.readout.value
    assert sweep.use_fitted() == state.temperature == sweep.fitted.temperature
    state.temperature = 12.0  # outside the grid: the grid widens to keep T in view
    assert max(sweep.curves["nll"].x) >= 12.0
    with pytest.raises(ParameterError, match=r"temperature must lie in \[0.001, 1000\]"):
        sweep.set_temperature(-1)


def test_sweep_fits_on_the_fit_part_and_draws_the_held_out_part(mailroom: LogitFrame) -> None:
    split = random_split(mailroom.n_samples, 0.5, seed=3, stratify=mailroom.labels)
    view = TemperatureSweepView(mailroom, rows=split.fit, compare_rows=split.held_out)
    z, y = np.asarray(mailroom.logits, dtype=np.float64), mailroom.labels
    assert view.fitted.temperature == pytest.approx(_scipy_temperature(z[split.fit], y[split.fit]), rel=1e-5)
    assert view.compare_curves["nll"].visible
    t = float(view.compare_curves["nll"].x[7])
    p = _probs(mailroom, t, split.held_out)
    assert view.compare_curves["nll"].y[7] == pytest.approx(log_loss(y[split.held_out], p), rel=1e-7)
    assert "held out:" in view.readout.value


def test_sweep_draws_the_nll_of_another_views_selection(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    view = TemperatureSweepView(mailroom, state)
    rows = np.arange(0, mailroom.n_samples, 7)
    state.select(rows, origin="scatter")
    assert view.selection_curve.visible
    t = float(view.selection_curve.x[30])
    assert view.selection_curve.y[30] == pytest.approx(
        log_loss(mailroom.labels[rows], _probs(mailroom, t, rows), labels=range(10)), rel=1e-7
    )
    state.clear("scatter")
    assert not view.selection_curve.visible


# --------------------------------------------------------------------------- threshold picker


@pytest.mark.parametrize(
    ("options", "threshold", "review"),
    [
        # the hand-worked example of tests/test_report.py (ten samples, worked in the comment there)
        ({"mode": "target accuracy", "target_accuracy": 0.8}, 0.80, 4),
        ({"mode": "target accuracy", "target_accuracy": 0.9}, 0.93, 7),
        ({"mode": "target accuracy", "target_accuracy": 0.75}, 0.65, 2),
        ({"mode": "costs", "error_cost": 5.0, "review_cost": 1.0}, 0.93, 7),
        ({"mode": "costs", "error_cost": 2.0, "review_cost": 1.0}, 0.65, 2),
    ],
)
def test_picker_rules_on_the_hand_worked_example(options: dict, threshold: float, review: int) -> None:
    picker = ThresholdPicker(hand_frame(), **options)
    assert picker.threshold == pytest.approx(threshold)
    assert picker.state.threshold == pytest.approx(threshold)
    assert picker.choice.n_review == review
    assert picker.choice.coverage == pytest.approx((10 - review) / 10)
    assert f"{100 * (10 - review) / 10:.2f}%" in picker.readout.value


def test_picker_intervals_match_scipy_binomtest() -> None:
    picker = ThresholdPicker(hand_frame(), mode="target accuracy", target_accuracy=0.8)
    # 5 of 6 right: scipy's Wilson interval (by hand in tests/test_report.py: [0.4365, 0.9699])
    ci = stats.binomtest(5, 6).proportion_ci(confidence_level=0.95, method="wilson")
    assert picker.choice.interval == pytest.approx((ci.low, ci.high))
    assert "Wilson score" in picker.readout.value and f"{ci.low:.4f}" in picker.readout.value
    picker._interval.value = "clopper-pearson"  # the dropdown
    picker._level.value = 0.99
    ci = stats.binomtest(5, 6).proportion_ci(confidence_level=0.99, method="exact")  # Clopper-Pearson
    assert picker.choice.interval == pytest.approx((ci.low, ci.high))
    assert "Clopper-Pearson" in picker.readout.value and "99%" in picker.readout.value


def test_picker_readouts_by_predicted_class_and_per_class_thresholds(mailroom: LogitFrame) -> None:
    picker = ThresholdPicker(mailroom, mode="target accuracy", target_accuracy=0.98)
    p = _probs(mailroom, 1.0)
    conf, pred = p.max(axis=1), p.argmax(axis=1)
    ok = pred == mailroom.labels
    # the rule by brute force over every distinct confidence
    t = min(c for c in np.unique(conf) if ok[conf >= c].mean() >= 0.98)
    assert picker.threshold == pytest.approx(t, rel=1e-9)
    for k, c in enumerate(picker.decision.by_class):
        m = pred == k
        acc = m & (conf >= t)
        assert c.n_accepted == acc.sum() and c.n_review == (m & (conf < t)).sum()
        ci = stats.binomtest(int(ok[acc].sum()), int(acc.sum())).proportion_ci(method="wilson")
        assert c.interval == pytest.approx((ci.low, ci.high))
        assert mailroom.classes[k] in picker.class_table.value
    picker._per_class.value = True
    own = np.array([c.threshold for c in picker.decision.own])
    ref_own = np.empty(10)
    for k in range(10):
        m = pred == k
        ref_own[k] = min(c for c in np.unique(conf[m]) if ok[m][conf[m] >= c].mean() >= 0.98)
        assert own[k] == pytest.approx(ref_own[k], rel=1e-9)
    # (compare with the reference thresholds: a sample sitting exactly on one may differ in the last bit)
    accepted = conf >= ref_own[pred]
    assert picker.decision.own_combined.coverage == pytest.approx(accepted.mean())
    assert picker.decision.own_combined.accuracy == pytest.approx(ok[accepted].mean())
    assert "own threshold" in picker.class_table.value and "per-class thresholds" in picker.readout.value


def test_picker_by_hand_follows_and_writes_the_shared_threshold() -> None:
    frame = hand_frame()
    state = SharedState(frame.n_samples)
    picker = ThresholdPicker(frame, state, mode="target accuracy", target_accuracy=0.8)
    picker.slider.value = 0.895  # the slider synced with the vertical rule
    assert picker.mode == "by hand" and state.threshold == pytest.approx(0.895)
    # confidence >= 0.895 accepts the first four samples: 3 of 4 right (hand-worked table)
    assert picker.choice.n_accepted == 4 and picker.choice.accuracy == pytest.approx(0.75)
    assert list(picker.rule_line.x) == pytest.approx([0.4, 0.4])
    state.threshold = 0.7  # from outside
    assert picker.threshold == pytest.approx(0.7) and picker.choice.n_accepted == 7
    picker.y_kind = "risk"
    assert np.allclose(np.asarray(picker.line.y)[1:], picker.curve.risk)
    assert CAUTION in picker.caution.value.replace("&#x27;", "'")


def test_picker_reapplies_its_rule_when_the_temperature_moves(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    picker = ThresholdPicker(mailroom, state, mode="target accuracy", target_accuracy=0.98)
    state.temperature = 0.7
    p = _probs(mailroom, 0.7)
    conf, ok = p.max(axis=1), p.argmax(axis=1) == mailroom.labels
    assert picker.threshold == pytest.approx(min(c for c in np.unique(conf) if ok[conf >= c].mean() >= 0.98))
    assert state.threshold == pytest.approx(picker.threshold)


def test_brushing_the_curve_selects_the_samples_in_the_brushed_confidence_range(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    picker = ThresholdPicker(mailroom, state, mode="target accuracy", target_accuracy=0.98)
    conf = _probs(mailroom, 1.0).max(axis=1)
    c0, c1 = picker.choice.coverage - 0.05, picker.choice.coverage + 0.05
    # what the browser sends when the brush is released: its two ends in coverage units
    picker.brush.brushing = False
    picker.brush.selected = np.array([c0, c1])
    # reference: the distinct confidences whose coverage (share with confidence >= c) lies in [c0, c1]
    distinct = np.unique(conf)
    coverage = np.array([(conf >= c).mean() for c in distinct])
    inside = distinct[(coverage >= c0) & (coverage <= c1)]
    expected = np.flatnonzero((conf >= inside.min()) & (conf <= inside.max()))
    assert np.array_equal(state.rows, expected) and state.origin_name == "threshold picker"
    assert inside.min() <= picker.threshold <= inside.max()  # samples just below and above the threshold
    assert "accepted" in picker.note.value and "sent for review" in picker.note.value
    picker.brush.selected = None  # brush cleared: selection cleared
    assert state.rows.size == 0


def test_another_views_selection_is_placed_on_the_curve(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    picker = ThresholdPicker(mailroom, state, mode="target accuracy", target_accuracy=0.98)
    rows = np.arange(40)
    state.select(rows, origin="gallery")
    conf = _probs(mailroom, 1.0).max(axis=1)
    assert picker.selected_points.visible
    # each selected sample sits at the coverage of its own confidence (share with confidence >= it)
    ref = np.array([(conf >= c).mean() for c in conf[rows]])
    assert np.allclose(np.sort(np.asarray(picker.selected_points.x)), np.sort(ref))
    above = int((conf[rows] >= picker.threshold).sum())
    assert f"{above:,} accepted" in picker.note.value


def test_picker_on_an_unreachable_target_and_without_labels() -> None:
    z = np.log(np.c_[HAND_CONF, 1 - HAND_CONF])
    picker = ThresholdPicker(LogitFrame(z, labels=np.ones(10, dtype=int)), mode="target accuracy")
    assert picker.choice.n_accepted == 0 and not picker.choice.feasible
    assert picker.state.threshold is None and "everything goes to review" in picker.readout.value
    frame = logitscope.load_demo("helpdesk").with_labels(None)
    blank = ThresholdPicker(frame)
    assert blank.choice is None and "needs labels" in blank.note.value
    with pytest.raises(ParameterError, match="mode"):
        ThresholdPicker(hand_frame(), mode="guess")


# --------------------------------------------------------------------------- the panel


def test_panel_random_split_fits_on_one_part_and_judges_on_the_other(mailroom: LogitFrame) -> None:
    panel = CalibrationPanel(mailroom)
    panel._fraction.value = 0.4
    panel._seed.value = 5
    panel.split_mode = "random split"
    split = random_split(mailroom.n_samples, 0.4, seed=5, stratify=mailroom.labels)
    assert np.array_equal(panel.split.fit, split.fit) and np.array_equal(panel.split.held_out, split.held_out)
    assert np.array_equal(panel.diagram.rows, split.fit) and np.array_equal(panel.held_diagram.rows, split.held_out)
    assert panel._diagrams.children == (panel.diagram, panel.held_diagram)
    z, y = np.asarray(mailroom.logits, dtype=np.float64), mailroom.labels
    t_fit = _scipy_temperature(z[split.fit], y[split.fit])
    assert panel.sweep.fitted.temperature == pytest.approx(t_fit, rel=1e-5)
    assert f"{t_fit:.4f}" in panel.split_note.value
    panel.sweep.use_fitted()
    panel.picker.mode = "target accuracy"
    panel.picker.target_accuracy = 0.98
    check = panel.held_out
    t = panel.state.temperature
    assert check.fitted.temperature == pytest.approx(t_fit, rel=1e-5)  # the T the check fits = the sweep's
    ph = _probs(mailroom, t, split.held_out)
    assert check.held["fitted"].nll == pytest.approx(log_loss(y[split.held_out], ph), rel=1e-7)  # sklearn
    # the threshold comes from the fit part (brute force) and is judged on the held-out part
    pf = _probs(mailroom, t, split.fit)
    cf, okf = pf.max(axis=1), pf.argmax(axis=1) == y[split.fit]
    thr = min(c for c in np.unique(cf) if okf[cf >= c].mean() >= 0.98)
    assert panel.picker.threshold == pytest.approx(thr, rel=1e-9)
    ch, okh = ph.max(axis=1), ph.argmax(axis=1) == y[split.held_out]
    acc = ch >= thr
    assert check.judged_on_held.coverage == pytest.approx(acc.mean())
    assert check.judged_on_held.accuracy == pytest.approx(okh[acc].mean())
    assert f"{100 * acc.mean():.2f}%" in panel.held_numbers.value
    panel.split_mode = "no split"
    assert panel.split is None and panel.diagram.rows.size == mailroom.n_samples
    assert panel._diagrams.children == (panel.diagram,) and panel.held_numbers.value == ""


def test_panel_split_by_a_metadata_column(mailroom: LogitFrame) -> None:
    panel = CalibrationPanel(mailroom)
    panel._column.value = "desk"
    panel._values.value = ("night shift",)
    panel.split_mode = "by a column"
    desk = mailroom.meta["desk"].to_numpy()
    assert np.array_equal(panel.split.fit, np.flatnonzero(desk == "night shift"))  # numpy comparison
    assert np.array_equal(panel.split.held_out, np.flatnonzero(desk != "night shift"))
    panel._values.value = tuple(sorted(set(desk)))  # every value: nothing left to hold out
    assert "nothing is left" in panel.split_note.value
    with pytest.raises(LogitscopeError, match="no metadata column"):
        panel.use_column_split("floor", ["2"])


def test_write_report_button_uses_the_current_choices(mailroom: LogitFrame, tmp_path: Path) -> None:
    panel = CalibrationPanel(mailroom, report_path=str(tmp_path / "team.html"))
    panel.sweep.use_fitted()
    panel.picker.mode = "costs"
    panel.picker.error_cost, panel.picker.review_cost = 20.0, 1.0
    panel.report_button.click()
    page = read_report(tmp_path / "team.html")
    assert page.value("decision-temperature") == panel.state.temperature
    assert page.text("decision-how") == "fitted: minimum NLL on all labelled rows"
    assert page.value("threshold-value") == pytest.approx(panel.picker.threshold)
    assert page.value("threshold-cost") == pytest.approx(panel.picker.choice.expected_cost)
    assert "Wrote" in panel.report_status.value
    # by hand: the report evaluates the same fixed threshold; the split goes to the held-out check
    panel.set_split(random_split(mailroom.n_samples, 0.3, seed=9))
    panel.picker.set_threshold(0.9)
    out = panel.write_report(tmp_path / "hand.html")
    page = read_report(Path(out))
    conf = _probs(mailroom, panel.state.temperature).max(axis=1)
    assert page.value("threshold-value") == pytest.approx(0.9)
    # with the panel's split the threshold is judged on its fit part, in the picker and in the report
    assert page.value("threshold-accepted") == np.sum(conf[panel.split.fit] >= 0.9) == panel.picker.choice.n_accepted
    # the held-out check: the same threshold judged on the held-out part, as the panel shows it
    assert page.value("split-held-n") == len(panel.split.held_out)
    # T fitted on all rows, while the split fits on its fit part: the report says what it is
    assert page.text("decision-how") == "set in the panel, equal to the temperature fitted on all labelled rows"
    assert page.value("split-held-coverage") == pytest.approx(np.mean(conf[panel.split.held_out] >= 0.9))
    assert page.value("split-held-coverage") == pytest.approx(panel.held_out.judged_on_held.coverage)
    panel.report_path.value = "  "
    with pytest.raises(LogitscopeError):
        panel.write_report()
    assert "file name" in panel.report_status.value


def test_panel_without_labels_still_writes_a_report(tmp_path: Path) -> None:
    frame = logitscope.load_demo("helpdesk").with_labels(None)
    panel = CalibrationPanel(frame)
    assert panel._split_mode.disabled and "need labels" in panel.children[0].value
    page = read_report(Path(panel.write_report(tmp_path / "u.html")))
    assert "needs-labels" in page.by_id
    assert panel.report_options()["choices"].rule is None


def test_hand_example_is_the_one_of_the_report_tests() -> None:
    # guards the shared example: confidences and right/wrong as in the worked comment
    p = _probs(hand_frame(), 1.0)
    assert np.allclose(p.max(axis=1), HAND_CONF)
    assert np.array_equal(p.argmax(axis=1) == hand_frame().labels, HAND_RIGHT)
