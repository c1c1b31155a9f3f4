"""Checkpoints side by side in JupyterLab: clicks on the flip table, a class and a brush select in the gallery.

The kernel prints its references as JSON: each sample's flip-table cell from a per-sample loop over
numpy argmax predictions (B matched to A by id by hand), the confidences from scipy's softmax.
The page must show exactly those samples' ids in the gallery's tiles. Waits are on DOM conditions.
"""

from __future__ import annotations

import json

import pytest

from .harness import (
    axis_maps,
    cell,
    open_notebook,
    read_cell_text,
    run_cell,
    screenshot,
    wait_for_output,
    write_notebook,
)

pytestmark = pytest.mark.browser

SETUP = """\
import json
import numpy as np
from scipy import special
import logitscope
from logitscope import LogitFrame
a = logitscope.load_demo("mailroom")
rng = np.random.default_rng(4)
order = rng.permutation(a.n_samples)
z = np.asarray(a.logits, dtype=np.float64) + rng.normal(scale=1.0, size=a.logits.shape)
b = LogitFrame(z[order], labels=a.labels[order], classes=a.classes, ids=a.ids[order],
               images=a.payload.data[order])
# references: B matched to A by id by hand, each sample's cell by a loop over argmax predictions
pos = {s: i for i, s in enumerate(b.ids.tolist())}
zb = np.asarray(b.logits)[[pos[s] for s in a.ids.tolist()]]
def cell_of(i):
    pa, pb, y = int(np.argmax(a.logits[i])), int(np.argmax(zb[i])), int(a.labels[i])
    if pa == y and pb == y: return "right_both"
    if pb == y: return "fixed"
    if pa == y: return "broken"
    return "wrong_same" if pa == pb else "wrong_different"
cells = [cell_of(i) for i in range(a.n_samples)]
conf_a = special.softmax(np.asarray(a.logits, dtype=np.float64), axis=1).max(1)
conf_b = special.softmax(zb, axis=1).max(1)"""

PANEL = """\
panel = logitscope.compare(a, b, names=("epoch 4", "epoch 5"), page_size=24)
panel"""

STATE = """\
v = panel.view
inside = None
if v.brush_box is not None:
    (x0, x1), (y0, y1) = v.brush_box
    inside = np.flatnonzero((conf_a >= x0) & (conf_a <= x1) & (conf_b >= y0) & (conf_b <= y1)).tolist()
print(json.dumps({
    "selected": panel.selected.tolist(), "origin": panel.state.origin_name,
    "fixed": [i for i, c in enumerate(cells) if c == "fixed"],
    "fixed_ids": [str(a.ids[i]) for i, c in enumerate(cells) if c == "fixed"],
    "eight_changed_ids": [str(a.ids[i]) for i, c in enumerate(cells) if c in ("fixed", "broken") and a.labels[i] == 8],
    "inside": inside, "box": v.brush_box, "gallery": int(panel.gallery.n_shown),
}))"""

_TILE_IDS_JS = """([i, want]) => {
  const root = document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i];
  const ids = Array.from(root.querySelectorAll('.lsg-grid .lsg-tile .lsg-id')).map((e) => e.textContent);
  return ids.length === want.length && ids.every((x) => want.includes(x));
}"""


def _state(page, index: int) -> dict:  # type: ignore[no-untyped-def]
    run_cell(page, index)
    return json.loads(read_cell_text(page, index))


def _scope(page, index: int) -> str:  # type: ignore[no-untyped-def]
    return (cell(page, index).locator(".lsg-head .lsg-scope").first.text_content() or "").strip()


def _wait_scope_changes(page, index: int, old: str) -> None:  # type: ignore[no-untyped-def]
    page.wait_for_function(
        "([i, old]) => { const r = document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i];"
        " const e = r && r.querySelector('.lsg-head .lsg-scope'); return e && e.textContent.trim() !== old; }",
        arg=[index, old],
    )


def _wait_view(page, index: int) -> None:  # type: ignore[no-untyped-def]
    """Wait until the comparison view in cell ``index`` has its tables, its scatter image and the gallery."""
    wait_for_output(page, index, ".logitscope-comparison")
    page.wait_for_function(
        """(i) => {
             const root = document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i];
             if (!root) return false;
             const imgs = Array.from(root.querySelectorAll('.logitscope-comparison-scatter image'));
             return imgs.some((im) => (im.getAttribute('href') || '').startsWith('blob:'))
               && root.querySelectorAll('.logitscope-flip-table tbody tr').length === 5
               && root.querySelectorAll('.logitscope-class-change tbody tr').length === 10
               && root.querySelectorAll('.lsg-grid .lsg-tile').length > 0;
           }""",
        arg=index,
        timeout=120_000,
    )


def _scroll_to(page, index: int, selector: str) -> None:  # type: ignore[no-untyped-def]
    """Scroll the notebook so that ``selector`` in cell ``index`` starts at the top of the view."""
    cell(page, index).locator(selector).first.evaluate("(e) => e.scrollIntoView({block: 'start'})")


def _drag(page, x0: float, y0: float, x1: float, y1: float, steps: int = 10) -> None:  # type: ignore[no-untyped-def]
    page.mouse.move(x0, y0)
    page.mouse.down()
    for s in range(1, steps + 1):
        page.mouse.move(x0 + (x1 - x0) * s / steps, y0 + (y1 - y0) * s / steps)
    page.mouse.up()


def test_flip_cell_class_and_brush_select_in_the_gallery(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    path = write_notebook(notebook_dir, "compare.ipynb", [SETUP, PANEL, STATE])
    open_notebook(page, jupyter_server, path)
    run_cell(page, 0)
    run_cell(page, 1)
    _wait_view(page, 1)
    before = _state(page, 2)
    assert before["selected"] == [] and before["gallery"] == 1797
    assert 0 < len(before["fixed"]) <= 24  # one gallery page holds them all

    # 1. a click on the flip table's "fixed" row: exactly those samples' tiles in the gallery
    row = cell(page, 1).locator(".logitscope-flip-table tbody tr[data-key='fixed']").first
    row.scroll_into_view_if_needed()
    row.click()
    page.wait_for_function(_TILE_IDS_JS, arg=[1, before["fixed_ids"]])
    st = _state(page, 2)
    assert st["selected"] == st["fixed"] and st["origin"] == "checkpoint comparison"
    assert _scope(page, 1).startswith(f"{len(st['fixed']):,} selected")
    page.wait_for_function(
        "(i) => !!document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i]"
        ".querySelector('.logitscope-flip-table tr.lspt-active[data-key=\"fixed\"]')",
        arg=1,
    )
    _scroll_to(page, 1, ".logitscope-comparison")
    screenshot(page, "comparison-fixed-selected")
    # a tile click shows the sample in the card beside the gallery
    tile = cell(page, 1).locator(".lsg-grid .lsg-tile").first
    tile_id = (tile.locator(".lsg-id").text_content() or "").strip()
    tile.click()
    page.wait_for_function(
        "([i, id]) => { const r = document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i];"
        " return r.querySelector('.logitscope-comparison-panel').textContent.split(id).length > 2; }",
        arg=[1, tile_id],
    )
    _scroll_to(page, 1, ".logitscope-comparison-panel .lsg-root")
    screenshot(page, "comparison-gallery-card")

    # 2. a click on class "eight" in the per-class table: its fixed and broken samples
    scope = _scope(page, 1)
    klass = cell(page, 1).locator(".logitscope-class-change tbody tr[data-key='8'] td[data-column='class']").first
    klass.scroll_into_view_if_needed()
    klass.click()
    _wait_scope_changes(page, 1, scope)
    want = st["eight_changed_ids"]
    assert 0 < len(want) <= 24
    page.wait_for_function(_TILE_IDS_JS, arg=[1, want])
    _scroll_to(page, 1, ".logitscope-class-change")
    screenshot(page, "comparison-class-selected")

    # 3. a rectangle brush on the scatter: the rows inside its extents, by scipy's softmax
    area = cell(page, 1).locator(".logitscope-comparison-scatter .plotarea_background").first
    area.scroll_into_view_if_needed()
    box = area.bounding_box()
    assert box is not None and box["width"] > 250 and box["height"] > 250
    scope = _scope(page, 1)
    x, y, w, h = box["x"], box["y"], box["width"], box["height"]
    (c0, r0), (c1, r1) = (x + 0.45 * w, y + 0.15 * h), (x + 0.97 * w, y + 0.75 * h)
    _drag(page, c0, r0, c1, r1)
    _wait_scope_changes(page, 1, scope)
    # screen position of the data (before the page scrolls), through the axes' tick marks
    (ax_, bx_), (ay_, by_) = axis_maps(cell(page, 1).locator(".logitscope-comparison-scatter").first)
    _scroll_to(page, 1, ".logitscope-comparison")
    screenshot(page, "comparison-brushed")
    st = _state(page, 2)
    # the brush sent the extents of the dragged rectangle: its corners, read on the axes, within a pixel
    (bx0, bx1), (by0, by1) = st["box"]
    assert sorted([(c0 - bx_) / ax_, (c1 - bx_) / ax_]) == pytest.approx([bx0, bx1], abs=1.0 / abs(ax_))
    assert sorted([(r0 - by_) / ay_, (r1 - by_) / ay_]) == pytest.approx([by0, by1], abs=1.0 / abs(ay_))
    assert st["inside"] is not None and len(st["inside"]) > 5
    assert st["selected"] == st["inside"] and st["gallery"] == len(st["inside"])

    assert browser_log.errors() == []
    assert browser_log.external_requests() == []


DASH = """\
dash = logitscope.explore(a, relabel_path="marks.json", compare_to=b)
for s in range(3):  # three more epochs: the History tab can rank forgetting events
    zs = np.asarray(a.logits, dtype=np.float64) + np.random.default_rng(20 + s).normal(scale=2.0, size=a.logits.shape)
    dash.update(LogitFrame(zs, labels=a.labels, classes=a.classes, ids=a.ids, images=a.payload.data))
dash.show_update(0)
dash"""

DASH_STATE = """\
print(json.dumps({"selected": dash.selected.tolist(), "origin": dash.state.origin_name,
                  "gallery": int(dash.gallery.n_shown),
                  "top_ids": [str(i) for i in dash.forgetting_list.listed_ids]}))"""


def _tab(page, index: int, title: str):  # type: ignore[no-untyped-def]
    return cell(page, index).locator(".lm-TabBar-tab", has_text=title).first


def test_dashboard_compare_and_history_tabs(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    path = write_notebook(notebook_dir, "dash_compare.ipynb", [SETUP, DASH, DASH_STATE])
    open_notebook(page, jupyter_server, path)
    run_cell(page, 0)
    run_cell(page, 1)
    wait_for_output(page, 1, ".logitscope-dashboard .lsg-grid .lsg-tile")
    before = _state(page, 2)
    assert before["selected"] == []

    # the Compare tab: a click on the "fixed" row selects in the Explore tab's gallery
    _tab(page, 1, "Compare").click()
    row = cell(page, 1).locator(".logitscope-flip-table tbody tr[data-key='fixed']").first
    row.wait_for(state="visible")
    page.wait_for_function(
        "(i) => Array.from(document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i]"
        ".querySelectorAll('.logitscope-comparison-scatter image'))"
        ".some((im) => (im.getAttribute('href') || '').startsWith('blob:'))",
        arg=1,
    )
    screenshot(page, "dashboard-compare-tab")
    row.click()
    page.wait_for_function(
        "(i) => { const r = document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i];"
        " const e = r.querySelector('.lspt-active[data-key=\"fixed\"]'); return !!e; }",
        arg=1,
    )
    st = _state(page, 2)
    assert st["origin"] == "checkpoint comparison" and st["gallery"] == len(st["selected"]) > 0
    _tab(page, 1, "Explore").click()
    page.wait_for_function(
        "([i, n]) => { const r = document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i];"
        " const e = r.querySelector('.lsg-head .lsg-scope');"
        " return e && e.textContent.trim().startsWith(n + ' selected'); }",
        arg=[1, f"{len(st['selected']):,}"],
    )

    # the History tab: the most-forgotten samples; a click selects one and shows it in the card
    _tab(page, 1, "History").click()
    first = cell(page, 1).locator(".logitscope-forgetting tbody tr[data-key='0']").first
    first.wait_for(state="visible")
    _scroll_to(page, 1, ".logitscope-forgetting-list")
    screenshot(page, "dashboard-history-forgetting")
    st = _state(page, 2)
    assert len(st["top_ids"]) > 0
    first.click()
    page.wait_for_function(
        "(i) => !!document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i]"
        ".querySelector('.logitscope-forgetting tr.lspt-active')",
        arg=1,
    )
    st2 = _state(page, 2)
    assert st2["origin"] == "forgetting list" and len(st2["selected"]) == 1
    assert browser_log.errors() == []
    assert browser_log.external_requests() == []
