"""The calibration panel and the report, written for the same choices, show the same numbers.

Both render findings of the same choices (temperature, binning, rule, split); this test reads every
number the panel shows from its views and compares it with the report's ``data-value`` of the same
quantity. The numbers themselves are checked against sklearn / torchmetrics / scipy elsewhere
(tests/test_findings.py, tests/test_report.py); here the check is that the two renderings agree.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from logitscope import LogitFrame
from logitscope.analysis import random_split
from logitscope.findings import Binning
from logitscope.widgets.calibration_panel import CalibrationPanel
from test_report import read_report

pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning")


def _check_threshold(page, prefix: str, choice) -> None:  # type: ignore[no-untyped-def]
    assert page.value(f"{prefix}-value") == choice.threshold
    assert page.value(f"{prefix}-coverage") == choice.coverage
    assert page.value(f"{prefix}-accuracy") == choice.accuracy
    assert page.value(f"{prefix}-ci-low") == choice.interval[0]
    assert page.value(f"{prefix}-ci-high") == choice.interval[1]


@pytest.mark.parametrize("binning", [Binning(15, "uniform"), Binning(10, "quantile")])
def test_panel_and_report_agree_without_a_split(mailroom: LogitFrame, tmp_path: Path, binning: Binning) -> None:
    panel = CalibrationPanel(mailroom, report_path=str(tmp_path / "r.html"))
    panel.state.binning = binning
    panel.sweep.use_fitted()
    panel.picker.mode = "target accuracy"
    panel.picker.target_accuracy = 0.985
    panel.picker.per_class = True
    page = read_report(Path(panel.write_report()))
    d = panel.diagram.finding
    # the decision temperature differs from the frame's own: the report's "after" column is the panel's T
    assert page.value("decision-temperature") == panel.state.temperature == d.temperature
    for key in ("ece", "mce", "nll", "brier"):
        assert page.value(f"reliability-after-{key}") == getattr(d, key), key
        assert page.value(f"summary-{key}-after") == getattr(d, key), key
    for b in np.flatnonzero(d.bins.count):
        assert page.value(f"bins-after-{b}-count") == d.bins.count[b]
        assert page.value(f"bins-after-{b}-accuracy") == d.bins.accuracy[b]
    # the sweep: every temperature both show has the same NLL, ECE and Brier
    sw = panel.sweep.finding
    report_t = {page.value(i): i.removeprefix("sweep-t-") for i in page.ids("sweep-t-")}
    shared = [j for j, t in enumerate(sw.temperature) if float(t) in report_t]
    assert len(shared) >= 20
    for j in shared:
        i = report_t[float(sw.temperature[j])]
        for key in ("nll", "ece", "brier"):
            assert page.value(f"sweep-{key}-{i}") == getattr(sw, key)[j], (key, j)
    assert page.value("fitted-temperature") == sw.fitted.temperature
    # the threshold, its readouts, the per-class table and the own thresholds
    dec = panel.picker.decision
    _check_threshold(page, "threshold", dec.choice)
    for k, c in enumerate(dec.by_class):
        if c is not None:
            assert page.value(f"class-{k}-accepted") == c.n_accepted
            assert page.value(f"class-{k}-accuracy") == c.accuracy or np.isnan(c.accuracy)
    for k, o in enumerate(dec.own):
        if o is not None:
            assert page.value(f"own-{k}-coverage") == o.coverage
    assert page.value("own-all-coverage") == dec.own_combined.coverage


def test_panel_and_report_agree_with_a_split(mailroom: LogitFrame, tmp_path: Path) -> None:
    panel = CalibrationPanel(mailroom, report_path=str(tmp_path / "s.html"))
    panel.state.binning = Binning(12, "quantile")
    panel.set_split(random_split(mailroom.n_samples, 0.4, seed=7, stratify=mailroom.labels))
    panel.sweep.use_fitted()  # T fitted on the fit part
    panel.picker.mode = "costs"
    panel.picker.error_cost, panel.picker.review_cost = 15.0, 1.0
    page = read_report(Path(panel.write_report()))
    h = panel.held_out
    assert h is not None and page.value("split-fitted-temperature") == h.fitted.temperature
    assert page.value("split-fit-n") == h.n_fit and page.value("split-held-n") == h.n_held
    for key, _, _ in h.columns:
        for part, table in (("fit", h.fit), ("held", h.held)):
            for metric in ("nll", "ece", "brier"):
                assert page.value(f"split-{part}-{metric}-{key}") == getattr(table[key], metric), (part, key)
    # the diagrams of the two parts at the current T are the report's held-out columns at that T
    key = next(k for k, t, _ in h.columns if t == panel.state.temperature)
    assert panel.diagram.finding.ece == h.fit[key].ece and panel.held_diagram.finding.ece == h.held[key].ece
    assert panel.sweep.now.nll == h.fit[key].nll and panel.sweep.now_held.nll == h.held[key].nll
    # the threshold is chosen on the fit part in both, and judged on the held-out part in both
    _check_threshold(page, "threshold", panel.picker.decision.choice)
    assert page.value("threshold-cost") == panel.picker.decision.choice.expected_cost
    assert page.value("split-threshold") == panel.picker.threshold == h.decision_on_fit.threshold
    assert page.value("split-held-coverage") == h.judged_on_held.coverage
    assert page.value("split-held-accuracy") == h.judged_on_held.accuracy
