"""Gallery, card and relabel queue in JupyterLab: hostile strings stay text, clicks reach the kernel.

The mail-room demo gets one class renamed to an HTML snippet that would run script if it were
parsed as markup, and the help-desk demo a ticket text with the same snippet. The page must show
the snippet literally, create no <img src="x"> and fire no dialog. A click on a tile must put
that sample in the card; marking it in the queue must write the file, and after a kernel restart
the queue must show the mark again.
"""

from __future__ import annotations

import json
import math
import time

import pytest

import logitscope

from .harness import (
    cell,
    open_notebook,
    read_cell_text,
    record_timing,
    restart_kernel,
    run_cell,
    screenshot,
    wait_for_output,
    write_notebook,
)

pytestmark = pytest.mark.browser

HOSTILE = "<img src=x onerror=alert(1)>"

SETUP = """\
import json, pathlib
import numpy as np
import ipywidgets as widgets
import logitscope
from logitscope import LogitFrame
from logitscope.widgets import DoubtfulLabelPicker, RelabelQueue, SampleCard, SampleGallery, SharedState

HOSTILE = {hostile!r}
MARKS = pathlib.Path({marks!r})
base = logitscope.load_demo("mailroom")
classes = list(base.classes)
classes[7] = HOSTILE
frame = LogitFrame(base.logits, base.labels, classes, base.ids, base.meta, images=base.payload.data)
state = SharedState(frame.n_samples)
state.select(np.flatnonzero(frame.labels == 7), origin="python")
gallery = SampleGallery(frame, state, page_size=12)
card = SampleCard(frame, state)
queue = RelabelQueue(frame, state, path=MARKS)
picker = DoubtfulLabelPicker(frame, state, n=10, queue=queue)
widgets.VBox([picker, gallery, widgets.HBox([card, queue])])"""

TEXTS = """\
desk = logitscope.load_demo("helpdesk")
texts = list(desk.payload.data)
texts[0] = HOSTILE + " the label printer on floor 2 is jammed again"
tickets = LogitFrame(desk.logits, desk.labels, desk.classes, desk.ids, desk.meta, texts=texts)
tstate = SharedState(tickets.n_samples)
tstate.select(np.arange(6), origin="python")
tgallery = SampleGallery(tickets, tstate, page_size=6, sort_by="row")
tcard = SampleCard(tickets, tstate)
tstate.focus = 0
widgets.VBox([tgallery, tcard])"""

REPORT = """\
print(json.dumps({
    "focus": state.focus,
    "focus_id": None if state.focus is None else str(frame.ids[state.focus]),
    "marks": queue.marks["id"].tolist(),
    "notes": queue.marks["note"].tolist(),
    "page": gallery.page,
    "file_ids": [m["id"] for m in json.loads(MARKS.read_text())["marks"]] if MARKS.exists() else None,
}))"""


def test_gallery_card_queue_in_lab(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    dialogs: list[str] = []

    def on_dialog(dialog) -> None:
        dialogs.append(f"{dialog.type}: {dialog.message}")
        dialog.dismiss()

    page.on("dialog", on_dialog)
    marks = notebook_dir / "mailroom-marks.json"
    cells = [SETUP.format(hostile=HOSTILE, marks=str(marks)), TEXTS, REPORT, 'print("fresh kernel")']
    path = write_notebook(notebook_dir, "gallery.ipynb", cells)
    open_notebook(page, jupyter_server, path)

    t0 = time.monotonic()
    run_cell(page, 0)
    wait_for_output(page, 0, ".lsg-tile img")
    record_timing("gallery_first_render_s", time.monotonic() - t0)
    out = cell(page, 0)
    tiles = out.locator(".lsg-tile")
    assert tiles.count() == 12
    pages = math.ceil(int((logitscope.load_demo("mailroom").labels == 7).sum()) / 12)
    assert out.locator(".lsg-page").inner_text().strip() == f"page 1 of {pages}"
    # the renamed class shows literally, as the given label of every tile on the page
    labels = out.locator(".lsg-label")
    assert labels.count() == 12 and all(labels.nth(i).inner_text() == HOSTILE for i in range(12))
    assert out.get_by_text(HOSTILE, exact=True).first.is_visible()
    screenshot(page, "gallery-mailroom")

    # click a tile: the card shows that sample
    target = tiles.nth(4)
    tile_id = target.locator(".lsg-id").inner_text().strip()
    target.click()
    card_id = out.locator(".lsc-id")
    card_id.wait_for(state="visible")
    page.wait_for_function(
        "([el, want]) => el.textContent === want", arg=[card_id.element_handle(), tile_id], timeout=30_000
    )
    assert target.get_attribute("class") is not None and "lsg-focus" in target.get_attribute("class")
    assert out.locator(".lsc-label").inner_text() == HOSTILE
    assert out.locator(".lsc-view img").count() == 1

    # mark it in the queue with a note; the table shows the mark
    out.locator(".lsr-note").fill(f"looks like a one {HOSTILE}")
    out.locator(".lsr-mark-focus").click()
    row = out.locator(".lsr-table tbody tr", has_text=tile_id)
    row.wait_for(state="visible", timeout=30_000)
    assert row.locator(".lsr-given").inner_text() == HOSTILE
    assert row.locator(".lsr-notecell").inner_text() == f"looks like a one {HOSTILE}"
    assert out.locator(".lsr-path").inner_text().endswith(marks.name)

    # next page
    out.locator(".lsg-next").click()
    page.wait_for_function(
        "([el, want]) => el.textContent.trim() === want",
        arg=[out.locator(".lsg-page").element_handle(), f"page 2 of {pages}"],
    )
    screenshot(page, "gallery-page-2")
    out.locator(".lsr-table").scroll_into_view_if_needed()
    screenshot(page, "gallery-card-queue")

    run_cell(page, 2)
    state = json.loads(read_cell_text(page, 2))
    assert state["focus_id"] == tile_id and state["marks"] == [tile_id] and state["file_ids"] == [tile_id]
    assert state["notes"] == [f"looks like a one {HOSTILE}"] and state["page"] == 1
    on_disk = json.loads(marks.read_text(encoding="utf-8"))  # the test reads the file itself
    assert [m["id"] for m in on_disk["marks"]] == [tile_id]

    # a ticket text carrying the snippet shows literally in its tile and in the card
    run_cell(page, 1)
    wait_for_output(page, 1, ".lsg-text")
    tout = cell(page, 1)
    assert tout.locator(".lsg-text").first.inner_text().startswith(HOSTILE + " the label printer")
    assert tout.locator(".lsc-text").inner_text().startswith(HOSTILE + " the label printer")
    tout.scroll_into_view_if_needed()
    screenshot(page, "gallery-helpdesk")

    # the label-issue picker selects its top 10; the gallery shows them
    out.locator(".lsr-pick").scroll_into_view_if_needed()
    out.locator(".lsr-pick").click()
    page.wait_for_function(
        "el => el.textContent === '10 selected (doubtful-label picker)'", arg=out.locator(".lsg-scope").element_handle()
    )
    assert out.locator(".lsg-tile").count() == 10
    assert out.locator(".lsr-picker .lsr-status").inner_text().startswith("selected 10 of ")
    screenshot(page, "gallery-label-issues")

    # nothing was parsed as markup: no <img src="x">, no dialog
    assert page.locator('img[src="x"]').count() == 0
    assert dialogs == []

    # kernel restart: the queue reopens the same file and shows the mark again
    restart_kernel(page, jupyter_server)
    run_cell(page, 3)  # execution counts restart at 1: run a never-run cell first so cell 0 gets a new count
    run_cell(page, 0)
    wait_for_output(page, 0, ".lsr-table")
    assert cell(page, 0).locator(".lsr-table tbody tr", has_text=tile_id).count() == 1
    assert "reopened 1 mark from the file" in cell(page, 0).locator(".lsr-queue .lsr-status").inner_text()

    assert dialogs == []
    assert browser_log.errors() == []
    assert browser_log.external_requests() == []
