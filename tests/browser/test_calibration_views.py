"""CalibrationPanel in JupyterLab: a bin click, a drag of the temperature and a brush reach Python.

After each browser action a later cell prints what the kernel saw, and the kernel checks it
against numpy (the rows of the clicked bin from ``ReliabilityBins.bin_of``, the rows whose
confidence lies in the brushed range) rather than against fixed numbers. Screenshots of the
views and of the report written by the panel's button go to test-artifacts/.
"""

from __future__ import annotations

import time
from pathlib import Path

import pytest

from .harness import (
    ARTIFACTS_DIR,
    cell,
    open_notebook,
    record_timing,
    run_cell,
    wait_for_cell_json,
    wait_for_output,
    write_notebook,
)

pytestmark = pytest.mark.browser

PANEL_CELL = """\
import json
import numpy as np
import logitscope
from logitscope.widgets.calibration_panel import CalibrationPanel
frame = logitscope.load_demo("mailroom")
panel = CalibrationPanel(frame, report_path="panel-report.html")
panel"""

BIN_CELL = """\
d = panel.diagram
b = d.selected_bin
# the last of 15 equal-width bins holds the confidences above 14/15 (numpy, independent of the view)
conf = frame.sample_scores(panel.state.temperature).confidence
ok = b is not None and np.array_equal(panel.state.rows, np.flatnonzero(conf > 14 / 15))
print(json.dumps({"bin": b, "rows": int(panel.state.rows.size),
                  "count": int(d.finding.bins.count[b]) if b is not None else -1,
                  "origin": panel.state.origin_name, "ok": bool(ok)}))"""

TEMPERATURE_CELL = """\
t = panel.state.temperature
print(json.dumps({"t": t, "marker": float(panel.sweep.marker.x[0]), "diagram_t": panel.diagram.finding.temperature,
                  "fitted": panel.sweep.fitted.temperature,
                  "picker_t": float(panel.picker.frame.sample_scores(t).temperature),
                  "nll": panel.diagram.finding.nll,
                  "nll_ref": float(-np.mean(frame.sample_scores(t).true_log_probability))}))"""

BRUSH_CELL = """\
p = panel.picker
sel = p.brush.selected
out = {"origin": panel.state.origin_name, "selected": None if sel is None else [float(v) for v in sel]}
if sel is not None and len(sel) == 2:
    lo, hi = p.confidence_range_of_coverage(*sel)
    conf = frame.sample_scores(panel.state.temperature).confidence
    expected = np.flatnonzero((conf >= lo) & (conf <= hi))
    out.update(rows=int(panel.state.rows.size), ok=bool(np.array_equal(panel.state.rows, expected)),
               around=bool(lo <= p.threshold <= hi or panel.state.rows.size > 0))
print(json.dumps(out))"""

REPORT_CELL = """\
import os
print(json.dumps({"exists": os.path.exists("panel-report.html"), "path": os.path.abspath("panel-report.html"),
                  "status": panel.report_status.value}))"""


def _plot_box(figure) -> dict:
    """Bounding box of a bqplot figure's SVG, scrolled into view first (mouse events need it on screen)."""
    svg = figure.locator("svg").first
    svg.scroll_into_view_if_needed()
    return svg.bounding_box()


def test_calibration_views_in_jupyterlab(jupyter_server, notebook_dir, browser_page, browser_log) -> None:
    page = browser_page
    path = write_notebook(
        notebook_dir, "calibration.ipynb", [PANEL_CELL, BIN_CELL, TEMPERATURE_CELL, BRUSH_CELL, REPORT_CELL]
    )
    open_notebook(page, jupyter_server, path)
    t0 = time.monotonic()
    run_cell(page, 0)
    wait_for_output(page, 0, ".logitscope-calibration .logitscope-threshold .bqplot")
    out = cell(page, 0).locator(".jp-Cell-outputArea")
    # wait until the dots of the diagram are drawn (one per non-empty bin, in the first figure)
    diagram_fig = out.locator(".logitscope-reliability").first.locator(".bqplot").first
    diagram_fig.locator("path.dot").first.wait_for(state="attached")
    record_timing("calibration panel rendered", time.monotonic() - t0)

    # 1. click the dot of the highest-confidence bin of the reliability diagram (0.93 .. 1.0)
    _plot_box(diagram_fig)
    last = diagram_fig.locator("path.dot").last
    dbox = last.bounding_box()
    assert dbox is not None
    page.mouse.click(dbox["x"] + dbox["width"] / 2, dbox["y"] + dbox["height"] / 2)
    got = wait_for_cell_json(page, 1, lambda g: g["bin"] is not None)
    assert got["ok"] and got["origin"] == "reliability diagram" and got["bin"] == 14, got
    assert got["rows"] == got["count"] > 0

    # 2. drag the temperature marker on the NLL curve to the right
    sweep_fig = out.locator(".logitscope-sweep .bqplot").first
    dot = sweep_fig.locator("path.dot").first
    dot.wait_for(state="attached")
    _plot_box(sweep_fig)
    dbox = dot.bounding_box()
    cx, cy = dbox["x"] + dbox["width"] / 2, dbox["y"] + dbox["height"] / 2
    page.mouse.move(cx, cy)
    page.mouse.down()
    page.mouse.move(cx + 70, cy, steps=8)
    page.mouse.up()
    got = wait_for_cell_json(page, 2, lambda g: g["t"] > 1.05 and g["diagram_t"] == pytest.approx(g["t"]))
    assert got["t"] > 1.05, got  # moved right on a log axis from T = 1
    assert got["marker"] == pytest.approx(got["t"]) and got["diagram_t"] == pytest.approx(got["t"])
    assert got["nll"] == pytest.approx(got["nll_ref"], rel=1e-12)

    # 3. the "use fitted T" button sets the fitted temperature everywhere
    out.locator(".logitscope-sweep button", has_text="use fitted T").first.click()
    got = wait_for_cell_json(page, 2, lambda g: g["t"] == pytest.approx(g["fitted"]))
    assert got["t"] == pytest.approx(got["fitted"]) and got["diagram_t"] == pytest.approx(got["fitted"]), got

    # 4. brush an interval of coverage on the threshold curve
    picker_fig = out.locator(".logitscope-threshold .bqplot").first
    pbox = _plot_box(picker_fig)
    # fig_margin left 60, right 14 (threshold.py); coverage 0.55 .. 0.80
    x0 = pbox["x"] + 60 + 0.55 * (pbox["width"] - 74)
    x1 = pbox["x"] + 60 + 0.80 * (pbox["width"] - 74)
    y = pbox["y"] + pbox["height"] / 2
    page.mouse.move(x0, y)
    page.mouse.down()
    page.mouse.move(x1, y, steps=8)
    page.mouse.up()
    got = wait_for_cell_json(page, 3, lambda g: g["selected"] is not None and g.get("rows", 0) > 0)
    assert got["origin"] == "threshold picker" and got["selected"] is not None, got
    assert got["selected"][0] == pytest.approx(0.55, abs=0.03) and got["selected"][1] == pytest.approx(0.80, abs=0.03)
    assert got["ok"] and got["rows"] > 0

    # screenshots of the two views (and the diagram showing the brushed rows in its count strip)
    ARTIFACTS_DIR.mkdir(parents=True, exist_ok=True)
    out.locator(".logitscope-reliability").first.scroll_into_view_if_needed()
    out.locator(".logitscope-reliability").first.screenshot(path=str(ARTIFACTS_DIR / "calibration-reliability.png"))
    out.locator(".logitscope-sweep").first.screenshot(path=str(ARTIFACTS_DIR / "calibration-sweep.png"))
    out.locator(".logitscope-threshold").first.screenshot(path=str(ARTIFACTS_DIR / "calibration-threshold.png"))

    # 5. a random split: two diagrams, the held-out numbers
    out.locator(".logitscope-calibration .widget-toggle-button", has_text="random split").first.click()
    held = out.locator(".logitscope-reliability").nth(1)
    held.locator("path.dot").first.wait_for(state="attached")
    page.wait_for_function("el => getComputedStyle(el).display !== 'none'", arg=held.element_handle(), timeout=30_000)
    diagrams = out.locator(".logitscope-diagrams").first
    diagrams.scroll_into_view_if_needed()
    diagrams.screenshot(path=str(ARTIFACTS_DIR / "calibration-split-diagrams.png"))

    # 6. the report button writes the report for these choices
    out.locator(".logitscope-calibration button", has_text="write report").first.click()
    got = wait_for_cell_json(page, 4, lambda g: g["exists"], timeout_ms=60_000)
    assert got["exists"] and "Wrote" in got["status"], got
    report = page.context.new_page()
    report.goto(Path(got["path"]).as_uri(), wait_until="load")
    report.screenshot(path=str(ARTIFACTS_DIR / "calibration-panel-report.png"), full_page=True)
    assert report.locator("#decision-temperature").inner_text().startswith("T = ")
    report.close()
    errors = browser_log.errors()
    assert errors == [], errors[:5]
    assert browser_log.external_requests() == []
