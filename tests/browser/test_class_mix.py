"""ClassMixView in JupyterLab: the grouped bars render, a click on a class's bars selects its rows in the kernel."""

from __future__ import annotations

import json

import pytest

from .harness import cell, open_notebook, read_cell_text, run_all, run_cell, screenshot, wait_for_output, write_notebook

pytestmark = pytest.mark.browser

BUILD = """\
import json
import numpy as np
import logitscope
from logitscope.widgets import ClassMixView
frame = logitscope.load_demo("mailroom")
rng = np.random.default_rng(5)
w = np.where(np.isin(frame.labels, [1, 7]), 3.0, 1.0)
batch = frame.subset(rng.choice(frame.n_samples, 600, replace=False, p=w / w.sum())).with_labels(None)
view = ClassMixView(batch, frame)
view"""

STATE = """\
pred = batch.sample_scores().predicted
print(json.dumps({"selected": view.state.rows.tolist(), "ones": np.flatnonzero(pred == 1).tolist(),
                  "origin": view.state.origin}))"""


def test_class_bar_click_selects_rows(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    path = write_notebook(notebook_dir, "class_mix.ipynb", [BUILD, STATE])
    open_notebook(page, jupyter_server, path)
    run_all(page)
    wait_for_output(page, 0, ".logitscope-class-mix .bqplot .bargroup")
    # ten classes x (reference, batch) bars
    page.wait_for_function("() => document.querySelectorAll('.logitscope-class-mix .bargroup .bar').length >= 20")
    before = json.loads(read_cell_text(page, 1))
    assert before["selected"] == []
    # the second bar group is class "one" (x order = class order); click its batch bar
    group = cell(page, 0).locator(".logitscope-class-mix .bargroup").nth(1)
    group.locator(".bar").last.click()
    run_cell(page, 1)
    after = json.loads(read_cell_text(page, 1))
    screenshot(page, "class-mix-view")
    # reference: numpy over the predicted classes of the batch (argmax of its logits)
    assert after["selected"] == after["ones"] and len(after["ones"]) > 0
    assert after["origin"] == "class mix"
    text = cell(page, 0).inner_text()
    assert "Pearson chi-square" in text and "degrees of freedom" in text
    assert browser_log.errors() == []
    assert browser_log.external_requests() == []
