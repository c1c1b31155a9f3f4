"""Smoke tests of the browser harness itself: widgets render, a mouse brush reaches Python.

These run real JupyterLab / Notebook 7 pages in Debian's chromium; the numbers a widget sends
back are checked in the kernel against numpy (the brush's own data range), not against
hard-coded values.
"""

from __future__ import annotations

import json
import time

import pytest

from .harness import (
    NOTEBOOK7_KNOWN_ERRORS,
    cell,
    open_notebook,
    read_cell_text,
    record_timing,
    restart_kernel,
    run_all,
    run_cell,
    screenshot,
    wait_for_output,
    write_notebook,
)

pytestmark = pytest.mark.browser

N_POINTS = 20_000

SLIDER_CELL = """\
import ipywidgets as widgets
slider = widgets.IntSlider(value=5, min=0, max=10, description="bins")
slider"""

SCATTER_CELL = f"""\
import numpy as np
import bqplot as bq
rng = np.random.default_rng(7)
x = rng.normal(size={N_POINTS})
y = rng.normal(size={N_POINTS})
xs, ys = bq.LinearScale(), bq.LinearScale()
scatter = bq.Scatter(x=x, y=y, scales={{"x": xs, "y": ys}}, default_size=4)
brush = bq.interacts.BrushSelector(x_scale=xs, y_scale=ys, marks=[scatter])
events = []
scatter.observe(lambda change: events.append(0 if change["new"] is None else len(change["new"])), "selected")
fig = bq.Figure(
    marks=[scatter],
    axes=[bq.Axis(scale=xs), bq.Axis(scale=ys, orientation="vertical")],
    interaction=brush,
    layout=widgets.Layout(height="420px"),
)
fig"""

STATE_CELL = """\
import json
sel = scatter.selected
bx, by = brush.selected_x, brush.selected_y
if bx is None or by is None or len(bx) < 2:
    inside = None
else:
    inside = int(((x >= min(bx)) & (x <= max(bx)) & (y >= min(by)) & (y <= max(by))).sum())
print(json.dumps({"slider": slider.value, "selected": 0 if sel is None else len(sel),
                  "inside": inside, "events": len(events)}))"""


def test_brush_selection_reaches_kernel(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    path = write_notebook(
        notebook_dir, "brush.ipynb", ["%%md\n# Brush smoke test", SLIDER_CELL, SCATTER_CELL, STATE_CELL]
    )

    t_open = open_notebook(page, jupyter_server, path)
    record_timing("lab_open_notebook_s", t_open)

    t0 = time.monotonic()
    run_all(page)
    wait_for_output(page, 1, ".widget-slider")
    wait_for_output(page, 2, ".bqplot .plotarea_background")
    # every point drawn: bqplot draws one path.dot per point
    page.wait_for_function("n => document.querySelectorAll('.bqplot .dot').length >= n", arg=N_POINTS, timeout=120_000)
    t_render = time.monotonic() - t0
    record_timing("lab_first_render_20k_scatter_s", t_render)

    # State before any interaction: nothing selected, slider at its initial value.
    before = json.loads(read_cell_text(page, 3))
    assert before == {"slider": 5, "selected": 0, "inside": None, "events": 0}

    # Keyboard on the slider handle: ArrowRight moves it one step (ipywidgets uses noUiSlider).
    handle = cell(page, 1).locator(".noUi-handle").first
    handle.click()
    page.keyboard.press("ArrowRight")

    # Drag a brush over the middle of the plot area.
    box = cell(page, 2).locator(".plotarea_background").first.bounding_box()
    assert box is not None and box["width"] > 200 and box["height"] > 200
    x0, y0 = box["x"] + 0.30 * box["width"], box["y"] + 0.25 * box["height"]
    x1, y1 = box["x"] + 0.60 * box["width"], box["y"] + 0.70 * box["height"]
    t1 = time.monotonic()
    page.mouse.move(x0, y0)
    page.mouse.down()
    page.mouse.move(x1, y1, steps=5)
    page.mouse.up()
    run_cell(page, 3)
    state = json.loads(read_cell_text(page, 3))
    record_timing("lab_brush_round_trip_s", time.monotonic() - t1)
    screenshot(page, "smoke-lab-brush")

    assert state["slider"] == 6
    assert state["selected"] > 0
    assert state["events"] >= 1
    # The points bqplot's JS selected agree with numpy's count of points inside the brush's
    # data-space rectangle; a point or two on the edge may round differently between pixel and
    # data space, hence the small slack.
    assert state["inside"] is not None and state["inside"] > 100
    assert abs(state["selected"] - state["inside"]) <= max(2, state["inside"] // 1000)

    assert browser_log.errors() == []
    assert browser_log.external_requests() == []
    assert browser_log.failed_requests == []


def test_restart_kernel_clears_state(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    path = write_notebook(notebook_dir, "restart.ipynb", ["answer = 6 * 7", "print(answer + 1)"])
    open_notebook(page, jupyter_server, path)
    run_all(page)
    assert read_cell_text(page, 1) == "43"

    restart_kernel(page, jupyter_server)
    run_cell(page, 1)
    wait_for_output(page, 1, '[data-mime-type="application/vnd.jupyter.stderr"]')
    assert "NameError" in read_cell_text(page, 1)
    assert browser_log.errors() == []


def test_widget_renders_in_notebook7(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    path = write_notebook(
        notebook_dir,
        "nb7.ipynb",
        ['import ipywidgets as widgets\nwidgets.IntSlider(value=4, min=0, max=9, description="desk")'],
    )
    t_open = open_notebook(page, jupyter_server, path, app="notebook")
    record_timing("nb7_open_notebook_s", t_open)
    rel = jupyter_server.relpath(path)
    assert f"/notebooks/{rel}" in page.url, page.url

    run_cell(page, 0)
    wait_for_output(page, 0, ".widget-slider")
    assert cell(page, 0).locator(".widget-readout").first.inner_text().strip() == "4"
    assert cell(page, 0).locator(".widget-label").first.inner_text().strip() == "desk"
    screenshot(page, "smoke-notebook7-slider")

    assert browser_log.errors(ignore=NOTEBOOK7_KNOWN_ERRORS) == []
    assert browser_log.external_requests() == []
