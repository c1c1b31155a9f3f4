"""The findings layer: each finding checked against outside references, and one number in one place.

References: scikit-learn (log_loss, brier_score_loss, top_k_accuracy_score, confusion_matrix),
torchmetrics (multiclass_calibration_error), scipy (special.softmax, optimize.minimize_scalar,
stats.binomtest intervals), and brute force over every distinct confidence for the thresholds.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import optimize, special, stats
from sklearn.metrics import brier_score_loss, log_loss, top_k_accuracy_score
from sklearn.metrics import confusion_matrix as sk_confusion_matrix

from logitscope import LogitFrame, ParameterError
from logitscope.analysis import CAUTION, random_split
from logitscope.findings import (
    Binning,
    ThresholdRule,
    calibration_summary,
    collect,
    confusion_summary,
    count_selection,
    held_out_check,
    resolve_choices,
    suspect_labels,
    sweep_finding,
    thin_indices,
    threshold_decision,
)
from logitscope.widgets.calibration_panel import CalibrationPanel
from logitscope.widgets.state import SharedState

pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning")


def _probs(frame: LogitFrame, t: float, rows: np.ndarray | None = None) -> np.ndarray:
    z = np.asarray(frame.logits, dtype=np.float64)
    return special.softmax((z if rows is None else z[rows]) / t, axis=1)  # scipy softmax is the reference


def _scipy_temperature(z: np.ndarray, y: np.ndarray) -> float:
    res = optimize.minimize_scalar(  # scipy.optimize on sklearn's log_loss
        lambda lt: log_loss(y, special.softmax(z / math.exp(lt), axis=1), labels=range(z.shape[1])),
        bounds=(-5, 5),
        method="bounded",
        options={"xatol": 1e-9},
    )
    return math.exp(res.x)


# --------------------------------------------------------------------------- calibration summary


@pytest.mark.parametrize("t", [1.0, 0.6, 2.5])
def test_calibration_summary_matches_sklearn_and_torchmetrics(mailroom: LogitFrame, t: float) -> None:
    torch = pytest.importorskip("torch")
    tm = pytest.importorskip("torchmetrics.functional.classification")
    c = calibration_summary(mailroom, t, binning=Binning(15))
    p, y = _probs(mailroom, t), np.asarray(mailroom.labels)
    assert c.n == mailroom.n_samples and c.temperature == t
    assert c.accuracy == pytest.approx(np.mean(p.argmax(1) == y))
    assert c.nll == pytest.approx(log_loss(y, p), rel=1e-9)  # sklearn
    assert c.brier == pytest.approx(brier_score_loss(y, p, labels=range(10)), rel=1e-9)  # sklearn
    for k, v in c.top_k.items():
        assert v == pytest.approx(top_k_accuracy_score(y, p, k=k, labels=range(10)))  # sklearn
    ece = tm.multiclass_calibration_error(torch.from_numpy(p), torch.from_numpy(y), num_classes=10, n_bins=15)
    assert c.ece == pytest.approx(float(ece), abs=1e-6)  # torchmetrics, l1 norm
    mce = tm.multiclass_calibration_error(
        torch.from_numpy(p), torch.from_numpy(y), num_classes=10, n_bins=15, norm="max"
    )
    assert c.mce == pytest.approx(float(mce), abs=1e-6)  # torchmetrics, max norm


def test_calibration_summary_of_rows_equals_the_summary_of_those_rows_alone(mailroom: LogitFrame) -> None:
    rows = random_split(mailroom.n_samples, 0.3, seed=4).held_out
    part = calibration_summary(mailroom, 1.3, rows, Binning(10, "quantile"))
    alone = calibration_summary(mailroom.subset(rows), 1.3, None, Binning(10, "quantile"))
    for key in ("accuracy", "nll", "brier", "ece", "mce", "aurc", "mean_confidence", "mean_entropy"):
        assert getattr(part, key) == pytest.approx(getattr(alone, key), rel=1e-12), key
    assert part.n == rows.size
    # bins map back to frame rows
    b = int(np.argmax(part.bins.count))
    conf = _probs(mailroom, 1.3, rows).max(axis=1)
    inside = rows[(conf >= part.bins.lower[b]) & (conf <= part.bins.upper[b])]
    assert set(part.rows_of_bin(b).tolist()) <= set(inside.tolist())
    assert part.rows_of_bin(b).size == part.bins.count[b]
    assert part.bin_label(b) == f"{part.bins.lower[b]:.2f}–{part.bins.upper[b]:.2f}"


@pytest.mark.parametrize("bad", [0, 101, -3, 2.0, "15", True])
def test_binning_accepts_one_range_only(bad: object) -> None:
    with pytest.raises(ParameterError, match="from 1 to 100"):
        Binning(bad)  # type: ignore[arg-type]
    with pytest.raises(ParameterError, match="strategy"):
        Binning(10, "log")  # type: ignore[arg-type]


# --------------------------------------------------------------------------- temperature


def test_sweep_points_are_the_calibration_summaries_at_those_temperatures(mailroom: LogitFrame) -> None:
    b = Binning(10, "quantile")
    sw = sweep_finding(mailroom, binning=b, marks=[1.0])
    y = np.asarray(mailroom.labels)
    z = np.asarray(mailroom.logits, dtype=np.float64)
    assert sw.fitted is not None
    assert sw.fitted.temperature == pytest.approx(_scipy_temperature(z, y), rel=1e-5)
    for i in (0, 12, int(np.flatnonzero(sw.temperature == 1.0)[0]), sw.temperature.size - 1):
        t = float(sw.temperature[i])
        c = calibration_summary(mailroom, t, None, b)
        assert sw.ece[i] == c.ece and sw.nll[i] == pytest.approx(c.nll, rel=1e-12)  # one number, one place
        assert sw.nll[i] == pytest.approx(log_loss(y, _probs(mailroom, t)), rel=1e-9)  # sklearn


def test_one_screen_shows_one_ece(mailroom: LogitFrame) -> None:
    # issue: 10 equal-mass bins gave 0.0937 in the diagram and 0.0954 in the sweep (15 equal-width bins)
    state = SharedState(mailroom.n_samples)
    panel = CalibrationPanel(mailroom, state)
    state.binning = Binning(10, "quantile")
    state.temperature = 1.0
    assert panel.diagram.finding.ece == panel.sweep.now.ece
    i = int(np.argmin(np.abs(panel.sweep.finding.temperature - 1.0)))
    assert panel.sweep.finding.temperature[i] == 1.0 and panel.sweep.finding.ece[i] == panel.diagram.finding.ece
    assert f"{panel.diagram.finding.ece:.4f}" in panel.diagram.numbers_html.value
    assert f"ECE {panel.sweep.now.ece:.4f}" in panel.sweep.readout.value


# --------------------------------------------------------------------------- threshold decision


def test_threshold_decision_by_brute_force_and_binomtest(mailroom: LogitFrame) -> None:
    rule = ThresholdRule("accuracy", target_accuracy=0.98, interval="clopper-pearson", level=0.99, per_class=True)
    d = threshold_decision(mailroom, rule, 0.8)
    p = _probs(mailroom, 0.8)
    conf, pred = p.max(1), p.argmax(1)
    ok = pred == mailroom.labels
    t = min(c for c in np.unique(conf) if ok[conf >= c].mean() >= 0.98)  # brute force over distinct confidences
    assert d.threshold == pytest.approx(t, rel=1e-12)
    acc = conf >= d.threshold
    ci = stats.binomtest(int(ok[acc].sum()), int(acc.sum())).proportion_ci(0.99, method="exact")  # Clopper-Pearson
    assert d.choice.interval == pytest.approx((ci.low, ci.high))
    assert d.caution == CAUTION
    table = d.class_table(mailroom.classes)
    for _, row in table.iterrows():
        m = pred == mailroom.classes.index(row["class"])
        assert row["accepted"] == int((m & acc).sum()) and row["review"] == int((m & ~acc).sum())
        own = min(c for c in np.unique(conf[m]) if ok[m][conf[m] >= c].mean() >= 0.98)
        assert row["own_threshold"] == pytest.approx(own, rel=1e-12)
    x, _ = d.curve_points()
    assert x.size <= 601 and d.choice.coverage in x  # thinned, chosen point kept


def test_cost_rule_baselines(mailroom: LogitFrame) -> None:
    d = threshold_decision(mailroom, ThresholdRule("cost", error_cost=20, review_cost=1))
    ok = _probs(mailroom, 1.0).argmax(1) == mailroom.labels
    assert d.accept_all_cost == pytest.approx(20 * np.mean(~ok))
    assert d.review_all_cost == 1.0
    assert d.choice.expected_cost <= min(d.accept_all_cost, d.review_all_cost) + 1e-12


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"kind": "accuracy", "target_accuracy": 0.0}, "target accuracy"),
        ({"kind": "accuracy", "target_accuracy": 1.2}, "target accuracy"),
        ({"kind": "cost", "error_cost": -1, "review_cost": 1}, "error cost"),
        ({"kind": "fixed", "threshold": float("nan")}, "threshold"),
        ({"kind": "fixed", "threshold": 0.5, "level": 1.0}, "level"),
        ({"kind": "fixed", "threshold": 0.5, "interval": "normal"}, "interval"),
    ],
)
def test_rule_options_outside_their_range_are_refused(kwargs: dict, match: str) -> None:
    with pytest.raises(ParameterError, match=match):
        ThresholdRule(**kwargs)


def test_thinning_keeps_ends_and_asked_points() -> None:
    idx = thin_indices(10_000, 600, keep=(1234,))
    assert idx[0] == 0 and idx[-1] == 9_999 and 1234 in idx and idx.size <= 601


# --------------------------------------------------------------------------- held-out check


def test_held_out_check_fits_on_one_part_and_judges_on_the_other(mailroom: LogitFrame) -> None:
    split = random_split(mailroom.n_samples, 0.5, seed=3, stratify=mailroom.labels)
    rule = ThresholdRule("accuracy", target_accuracy=0.97)
    h = held_out_check(mailroom, split, 1.4, rule, Binning(15))
    z, y = np.asarray(mailroom.logits, dtype=np.float64), np.asarray(mailroom.labels)
    t_fit = _scipy_temperature(z[split.fit], y[split.fit])
    assert h.fitted.temperature == pytest.approx(t_fit, rel=1e-5)
    assert [k for k, _, _ in h.columns] == ["given", "fitted", "decision"]
    ph = _probs(mailroom, h.fitted.temperature, split.held_out)
    assert h.held["fitted"].nll == pytest.approx(log_loss(y[split.held_out], ph), rel=1e-9)  # sklearn
    # the rule at the decision temperature on the fit part, brute force; judged on the held-out part
    pf, ph = _probs(mailroom, 1.4, split.fit), _probs(mailroom, 1.4, split.held_out)
    cf, okf = pf.max(1), pf.argmax(1) == y[split.fit]
    thr = min(c for c in np.unique(cf) if okf[cf >= c].mean() >= 0.97)
    assert h.decision_on_fit is not None and h.decision_on_fit.threshold == pytest.approx(thr, rel=1e-12)
    ch, okh = ph.max(1), ph.argmax(1) == y[split.held_out]
    assert h.judged_on_held is not None
    assert h.judged_on_held.coverage == pytest.approx(np.mean(ch >= h.decision_on_fit.threshold))
    assert h.judged_on_held.accuracy == pytest.approx(okh[ch >= h.decision_on_fit.threshold].mean())


# --------------------------------------------------------------------------- confusion and suspects


def test_confusion_summary_matches_sklearn(mailroom: LogitFrame) -> None:
    c = confusion_summary(mailroom, k=1, n_pairs=5)
    pred = _probs(mailroom, 1.0).argmax(1)
    ref = sk_confusion_matrix(mailroom.labels, pred, labels=range(10))  # sklearn
    assert np.array_equal(c.matrix, ref)
    off = ref.copy()
    np.fill_diagonal(off, 0)
    assert [p.count for p in c.pairs] == sorted(off.ravel().tolist(), reverse=True)[:5]
    assert c.n_wrong == int(off.sum())


def test_suspect_labels_probabilities_are_scipy_softmax(mailroom: LogitFrame) -> None:
    s = suspect_labels(mailroom, temperature=1.2, top=10)
    p = _probs(mailroom, 1.2, s.rows)
    idx = np.arange(s.rows.size)
    assert np.allclose(s.p_given, p[idx, mailroom.labels[s.rows]])
    assert np.allclose(s.p_suggested, p[idx, s.suggested])
    assert np.all(s.suggested != s.given) and s.n_flagged >= len(s)


def test_count_selection(mailroom: LogitFrame) -> None:
    rows = np.arange(0, mailroom.n_samples, 3)
    ok = _probs(mailroom, 1.0).argmax(1) == mailroom.labels
    c = count_selection(mailroom, rows)
    assert c.n == rows.size and c.n_wrong == int((~ok[rows]).sum())


# --------------------------------------------------------------------------- collected for a report


def test_collect_renders_the_same_findings_as_the_functions(mailroom: LogitFrame) -> None:
    choices, temps = resolve_choices(mailroom, fit_temperature=True, target_accuracy=0.98, n_bins=10)
    f = collect(mailroom, choices, temps)
    assert f.decision is not None and f.threshold is not None and f.held_out is not None
    again = calibration_summary(mailroom, choices.temperature, None, Binning(10))
    assert f.decision.ece == again.ece and f.decision.nll == again.nll
    assert f.threshold.threshold == threshold_decision(mailroom, choices.rule, choices.temperature).threshold
    assert temps.fitted is not None and choices.temperature == temps.fitted.temperature
    assert f.sweep is not None and f.sweep.fitted is temps.fitted


def test_resolve_choices_refuses_conflicts(mailroom: LogitFrame) -> None:
    with pytest.raises(ParameterError, match="either a temperature or"):
        resolve_choices(mailroom, temperature=2.0, fit_temperature=True)
    with pytest.raises(ParameterError, match="one threshold rule"):
        resolve_choices(mailroom, target_accuracy=0.9, threshold=0.5)
