"""The views as a person sees them in JupyterLab: layout that stays put, text that does not overlap,
no console errors after a reload, linked clicks, and screenshots of every view.

Each test drives the dashboard (or a view) in chromium and measures the page: bounding boxes in
pixels, the quadrilaterals of SVG text (rotated tick labels included) and the console. Numbers the
browser shows are compared with the kernel's own (computed there with numpy / scipy), never with
hard-coded values. Every wait is on a condition of the page or the kernel, never a fixed delay.

Screenshots of every view at 1400 px and 1000 px go to test-artifacts/views/; the three pictures the
README shows (docs/images/) are regenerated here from the demo and their size is checked.
"""

from __future__ import annotations

import io
import json
import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from .harness import (
    ARTIFACTS_DIR,
    REPO_ROOT,
    activate_main_tab,
    cell,
    open_notebook,
    read_cell_text,
    run_cell,
    wait_for_output,
    write_notebook,
)

pytestmark = pytest.mark.browser

VIEWS_DIR = ARTIFACTS_DIR / "views"
IMAGES_DIR = REPO_ROOT / "docs" / "images"
#: The README's three pictures together stay well under 1 MB.
IMAGES_BUDGET = 600_000

DASH = """\
import json
import numpy as np
import logitscope
frame = logitscope.load_demo({demo!r})
dash = logitscope.explore(frame, relabel_path="marks-{demo}.json")
dash"""


def _dash_notebook(directory: Path, demo: str, *extra: str) -> Path:
    return write_notebook(directory, f"views-{demo}.ipynb", [DASH.format(demo=demo), *extra])


def _settle(page: Any) -> None:
    """Wait for two animation frames: the layout of the last change has been computed."""
    page.evaluate("() => new Promise((r) => requestAnimationFrame(() => requestAnimationFrame(r)))")


def _wait_dashboard(page: Any, index: int = 0) -> None:
    """Wait until the dashboard of cell ``index`` has drawn its scatter image and gallery tiles."""
    wait_for_output(page, index, ".logitscope-dashboard")
    page.wait_for_function(
        """(i) => { const root = document.querySelectorAll('.jp-NotebookPanel:not(.lm-mod-hidden) .jp-Cell')[i];
             if (!root) return false;
             const imgs = Array.from(root.querySelectorAll('.logitscope-scatter image'));
             return imgs.some((im) => (im.getAttribute('href') || '').startsWith('blob:'))
               && root.querySelectorAll('.lsg-grid .lsg-tile').length > 0
               && root.querySelectorAll('.logitscope-confusion .heatmapcell').length > 0; }""",
        arg=index,
        timeout=120_000,
    )
    _settle(page)


def _open_tab(page: Any, title: str, ready: str) -> None:
    """Click the dashboard tab ``title`` and wait until ``ready`` (a selector inside it) is drawn."""
    cell(page, 0).locator(".lm-TabBar-tab", has_text=title).first.click()
    cell(page, 0).locator(ready).first.wait_for(state="visible", timeout=120_000)
    _settle(page)


def _kernel_json(page: Any, index: int) -> Any:
    run_cell(page, index)
    return json.loads(read_cell_text(page, index).strip().splitlines()[-1])


def _collapse_sidebar(page: Any) -> None:
    page.locator(".lm-MenuBar-itemLabel", has_text=re.compile(r"^View$")).first.click()
    page.locator(".lm-Menu .lm-Menu-itemLabel", has_text=re.compile(r"^File Browser$")).first.click()
    page.wait_for_function("() => !document.querySelector('#jp-left-stack:not(.lm-mod-hidden) .jp-FileBrowser')")


# ------------------------------------------------------------------------------------------ geometry

# Screen quadrilateral of each element: its own box (getBBox for SVG, the client rect for HTML) mapped
# through its transform, so a rotated tick label is its rotated box, not the much larger upright one.
_QUADS_JS = """
(root, selector) => Array.from(root.querySelectorAll(selector)).filter((el) => {
    const t = (el.textContent || '').trim(); if (!t) return false;
    const r = el.getBoundingClientRect(); return r.width > 0 && r.height > 0;
  }).map((el) => {
    if (el instanceof SVGGraphicsElement) {
      const b = el.getBBox(), m = el.getScreenCTM();
      const p = (x, y) => [m.a * x + m.c * y + m.e, m.b * x + m.d * y + m.f];
      return { text: el.textContent.trim(),
               quad: [p(b.x, b.y), p(b.x + b.width, b.y), p(b.x + b.width, b.y + b.height), p(b.x, b.y + b.height)] };
    }
    const r = el.getBoundingClientRect();
    return { text: el.textContent.trim(),
             quad: [[r.left, r.top], [r.right, r.top], [r.right, r.bottom], [r.left, r.bottom]] };
  })
"""


def _quads(locator: Any, selector: str) -> list[dict[str, Any]]:
    return list(locator.evaluate(_QUADS_JS, selector))


def _overlap(a: list[list[float]], b: list[list[float]], slack: float = 0.5) -> bool:
    """Whether two convex quadrilaterals overlap by more than ``slack`` pixels (separating axis theorem)."""
    pa, pb = np.asarray(a, float), np.asarray(b, float)
    for poly in (pa, pb):
        for i in range(4):
            edge = poly[(i + 1) % 4] - poly[i]
            axis = np.array([-edge[1], edge[0]])
            norm = np.hypot(*axis)
            if norm == 0:
                continue
            axis /= norm
            ra, rb = pa @ axis, pb @ axis
            if ra.max() - slack <= rb.min() or rb.max() - slack <= ra.min():
                return False
    return True


def _overlapping(*groups: list[dict[str, Any]]) -> list[tuple[str, str]]:
    """Pairs of texts whose boxes overlap: within one group, or between two groups when two are given."""
    if len(groups) == 1:
        items = groups[0]
        pairs = [(items[i], items[j]) for i in range(len(items)) for j in range(i + 1, len(items))]
    else:
        pairs = [(a, b) for a in groups[0] for b in groups[1]]
    return [(a["text"], b["text"]) for a, b in pairs if _overlap(a["quad"], b["quad"])]


def _axes(figure: Any) -> list[Any]:
    return [figure.locator("g.axis").nth(i) for i in range(figure.locator("g.axis").count())]


def _assert_axes_readable(figure: Any, what: str) -> None:
    """No two tick labels of an axis overlap, and the axis title sits clear of its tick labels."""
    for axis in _axes(figure):
        ticks = _quads(axis, ".tick text")
        assert _overlapping(ticks) == [], (what, [t["text"] for t in ticks])
        title = _quads(axis, "text.axislabel")
        assert _overlapping(title, ticks) == [], (what, title and title[0]["text"])


# ------------------------------------------------------------------------------------------ item 5


@pytest.mark.parametrize("width", [1400, 1000])
def test_a_tile_click_keeps_the_layout_in_place(jupyter_server, notebook_dir, browser_page, browser_log, width):
    page = browser_page
    page.set_viewport_size({"width": width, "height": 1000})
    path = _dash_notebook(notebook_dir, "mailroom")
    open_notebook(page, jupyter_server, path)
    _collapse_sidebar(page)
    run_cell(page, 0)
    _wait_dashboard(page)
    out = cell(page, 0)
    for k, index in enumerate((2, 5)):  # an empty card first, then one that already shows a sample
        tile = out.locator(".lsg-tile").nth(index)
        tile.scroll_into_view_if_needed()
        _settle(page)
        before = {
            "tile": tile.bounding_box(),
            "confusion": out.locator(".logitscope-confusion").first.bounding_box(),
            "gallery": out.locator(".lsg-grid").first.bounding_box(),
        }
        want = (tile.locator(".lsg-id").text_content() or "").strip()
        tile.click()
        page.wait_for_function(
            """([el, want]) => { const id = el.querySelector('.lsc-id'); const img = el.querySelector('.lsc-view img');
                 return id && id.textContent === want && img && img.complete; }""",
            arg=[out.locator(".lsc-root").first.element_handle(), want],
        )
        _settle(page)
        after = {name: loc.bounding_box() for name, loc in (
            ("tile", tile), ("confusion", out.locator(".logitscope-confusion").first),
            ("gallery", out.locator(".lsg-grid").first),
        )}  # fmt: skip
        for name in before:
            dy = abs(after[name]["y"] - before[name]["y"])
            dh = abs(after[name]["height"] - before[name]["height"])
            assert dy <= 1 and dh <= 1, (width, k, name, before[name], after[name])  # measured in pixels
    assert browser_log.errors() == []


# ------------------------------------------------------------------------------------------ item 6

SELECT = "dash.selected = np.arange(0, frame.n_samples, 9)"
MODE = "p = dash.calibration.picker\np.mode = {mode!r}; p.use_lower_bound = {lower}; p.y_kind = {kind!r}"


@pytest.mark.parametrize("demo", ["helpdesk", "mailroom"])
def test_no_label_overlaps_or_cuts_in_any_view(jupyter_server, notebook_dir, browser_page, browser_log, demo):
    page = browser_page
    page.set_viewport_size({"width": 1400, "height": 1400})
    modes = [("target accuracy", False, "accuracy"), ("target accuracy", True, "accuracy"),
             ("costs", False, "accuracy"), ("costs", False, "risk"), ("by hand", False, "risk")]  # fmt: skip
    cells = [SELECT] + [MODE.format(mode=m, lower=lo, kind=k) for m, lo, k in modes]
    path = _dash_notebook(notebook_dir, demo, *cells)
    open_notebook(page, jupyter_server, path)
    run_cell(page, 0)
    _wait_dashboard(page)
    run_cell(page, 1)  # a selection: the sweep draws the selection's NLL curve, the heat map its outlines
    out = cell(page, 0)
    page.wait_for_function(
        "(el) => /selected from Python/.test(el.textContent)",
        arg=out.locator(".logitscope-selection").first.element_handle(),
    )
    # the confusion matrix: tick labels (rotated when long) and axis titles clear of each other
    figure = out.locator(".logitscope-confusion .bqplot").first
    figure.scroll_into_view_if_needed()
    _assert_axes_readable(figure, f"{demo} confusion")
    assert out.locator(".logitscope-confusion .heatmapcell").count() > 0
    for name, view in (("scatter", ".logitscope-scatter"), ("histogram", ".logitscope-histogram")):
        _assert_axes_readable(out.locator(f"{view} .bqplot").first, f"{demo} {name}")
    # gallery bars: class names are whole (the help desk's "account closure" was cut to "accoun...")
    cut = out.locator(".lsg-bname").evaluate_all(
        "(els) => els.filter((e) => e.scrollWidth > e.clientWidth + 1).map((e) => e.textContent)"
    )
    assert cut == [], cut

    _open_tab(page, "Calibrate and decide", ".logitscope-threshold .bqplot")
    sweep = out.locator(".logitscope-sweep")
    page.wait_for_function(  # the selection's NLL curve is drawn (dash-dotted) before the axes are read
        "(el) => Array.from(el.querySelectorAll('path.line')).some((p) => p.style.strokeDasharray)",
        arg=sweep.first.element_handle(),
    )
    for i in range(sweep.locator(".bqplot").count()):
        _assert_axes_readable(sweep.locator(".bqplot").nth(i), f"{demo} sweep {i}")
    reliability = out.locator(".logitscope-reliability").first
    counts = _quads(reliability, ".bqplot text.label")
    assert _overlapping(counts) == [], [c["text"] for c in counts]
    for i in range(reliability.locator(".bqplot").count()):
        _assert_axes_readable(reliability.locator(".bqplot").nth(i), f"{demo} reliability {i}")

    picker = out.locator(".logitscope-threshold").first
    readout_at = None
    for k, (mode, _lower, kind) in enumerate(modes):
        run_cell(page, 2 + k)
        want = "Risk" if kind == "risk" else "Accuracy"
        page.wait_for_function(
            "([el, want]) => el.querySelector('.mainheading, text.mainheading') "
            "&& el.querySelector('.mainheading').textContent.startsWith(want)",
            arg=[picker.element_handle(), want],
        )
        _settle(page)
        _assert_axes_readable(picker.locator(".bqplot").first, f"{demo} threshold {mode} {kind}")
        # every control's description shows in full ("cost of a revi..." was cut)
        cut = picker.locator(".widget-label").evaluate_all(
            "(els) => els.filter((e) => e.offsetParent && e.scrollWidth > e.clientWidth + 1).map((e) => e.textContent)"
        )
        assert cut == [], (mode, cut)
        # the readout table stays where it is in every mode (it used to jump below the chart)
        # (measured from the chart's corner: running a cell scrolls the page)
        box, chart = picker.locator(".ls-readout").first.bounding_box(), picker.locator(".bqplot").first.bounding_box()
        at = (box["x"] - chart["x"], box["y"] - chart["y"])
        readout_at = readout_at or at
        assert abs(at[0] - readout_at[0]) <= 1 and abs(at[1] - readout_at[1]) <= 1, (mode, at, readout_at)
    assert browser_log.errors() == []


# ------------------------------------------------------------------------------------------ item 12


@pytest.mark.parametrize("hidden", ["dashboard tab", "notebook tab"])
def test_no_console_errors_after_a_reload_with_hidden_tabs(
    jupyter_server, notebook_dir, browser_page, browser_log, hidden
):
    page = browser_page
    path = _dash_notebook(notebook_dir, "mailroom")
    other = write_notebook(notebook_dir, "other.ipynb", ["1 + 1"])
    open_notebook(page, jupyter_server, path)
    run_cell(page, 0)
    _wait_dashboard(page)
    # every tab drawn once, then back to the first: the hidden ones hold built views
    _open_tab(page, "Calibrate and decide", ".logitscope-threshold .bqplot")
    _open_tab(page, "History", ".logitscope-history .bqplot")
    _open_tab(page, "Explore", ".logitscope-scatter .bqplot")
    if hidden == "notebook tab":
        _open_tab(page, "Calibrate and decide", ".logitscope-threshold .bqplot")
    page.keyboard.press("Control+s")
    page.wait_for_function(
        "() => !document.querySelector('.jp-NotebookPanel .jp-mod-dirty, .lm-TabBar-tab.jp-mod-dirty')"
    )
    if hidden == "notebook tab":  # another notebook in front: the dashboard's tab is hidden during the reload
        page.goto(jupyter_server.lab_url(other), wait_until="domcontentloaded")
        page.locator(".lm-TabBar-tab", has_text="other.ipynb").first.wait_for()
    page.reload(wait_until="domcontentloaded")
    if hidden == "notebook tab":
        page.locator(".lm-TabBar-tab", has_text=path.name).first.wait_for()
        page.wait_for_function(
            "() => document.querySelectorAll('.logitscope-dashboard').length > 0", timeout=120_000
        )  # views built while hidden
        # the reload restores the layout (the dashboard's notebook first), then opens and brings to the front
        # the URL's notebook: wait for that before bringing the dashboard's notebook back
        activate_main_tab(page, "other.ipynb")
        activate_main_tab(page, path.name)
        ready = cell(page, 0).locator(".logitscope-threshold .bqplot").first
        ready.wait_for(state="attached", timeout=120_000)
        ready.scroll_into_view_if_needed()
        ready.wait_for(state="visible", timeout=120_000)
    else:
        _wait_dashboard(page)
    _settle(page)
    tabs = (
        ("History", ".logitscope-history .bqplot"),
        ("Calibrate and decide", ".logitscope-sweep .bqplot"),
        ("Explore", ".logitscope-scatter .bqplot"),
    )
    for title, ready in tabs:
        _open_tab(page, title, ready)
    errors = browser_log.errors()
    assert errors == [], (len(errors), errors[:3])


# ------------------------------------------------------------------------------------------ item 7

CLASS_MIX = """\
import json
import numpy as np
import ipywidgets as widgets
import logitscope
from logitscope.widgets import ClassMixView, SampleGallery, SharedState
frame = logitscope.load_demo("mailroom")
rng = np.random.default_rng(5)
w = np.where(np.isin(frame.labels, [1, 7]), 3.0, 1.0)
batch = frame.subset(rng.choice(frame.n_samples, 600, replace=False, p=w / w.sum())).with_labels(None)
state = SharedState(batch.n_samples)
view = ClassMixView(batch, frame, state)
gallery = SampleGallery(batch, state, page_size=8)
widgets.VBox([view, gallery])"""

CLASS_MIX_STATE = """\
pred = batch.sample_scores().predicted  # numpy: the batch's predicted classes
check = batch.class_mix_check(frame, temperature=state.temperature)
print(json.dumps({"selected": state.rows.tolist(), "sevens": np.flatnonzero(pred == 7).tolist(),
                  "origin": state.origin_name, "shown": int(gallery.n_shown),
                  "same_check": view.check.to_dict() == check.to_dict()}))"""


def test_a_class_mix_click_selects_its_rows_in_the_gallery(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    path = write_notebook(notebook_dir, "class-mix.ipynb", [CLASS_MIX, CLASS_MIX_STATE])
    open_notebook(page, jupyter_server, path)
    run_cell(page, 0)
    out = cell(page, 0)
    wait_for_output(page, 0, ".lsg-tile")
    page.wait_for_function("() => document.querySelectorAll('.logitscope-class-mix .bargroup .bar').length >= 20")
    scope = out.locator(".lsg-scope").first
    assert (scope.text_content() or "").startswith("all 600")
    # class "seven" is the eighth bar group (x order = class order); click its batch bar
    out.locator(".logitscope-class-mix .bargroup").nth(7).locator(".bar").last.click()
    page.wait_for_function("(el) => /selected \\(class mix\\)/.test(el.textContent)", arg=scope.element_handle())
    got = _kernel_json(page, 1)
    assert got["selected"] == got["sevens"] and len(got["sevens"]) > 0 and got["origin"] == "class mix"
    assert got["shown"] == len(got["sevens"]) and got["same_check"]
    assert (scope.text_content() or "").strip() == f"{len(got['sevens'])} selected (class mix)"
    assert out.locator(".lsg-tile").count() == min(8, len(got["sevens"]))
    assert all((t or "").strip() == "seven" for t in out.locator(".lsg-pred").all_text_contents())
    # the bars stay marked while the selection is the view's; a Ctrl-click on them clears it
    out.locator(".logitscope-class-mix .bargroup").nth(7).locator(".bar").last.click(modifiers=["Control"])
    page.wait_for_function("(el) => el.textContent.startsWith('all 600')", arg=scope.element_handle())
    assert _kernel_json(page, 1)["selected"] == []
    assert browser_log.errors() == []


# ------------------------------------------------------------------------------------------ items 8, 10, 9

CONFUSION_STATE = """\
c = dash.confusion
print(json.dumps({"outlined": c.outlined, "diag": [c.cell_text[i][i] for i in range(c.n_positions)],
                  "row_button": c._row_button.description, "t": dash.state.temperature,
                  "label": list(dash.calibration.sweep.marker_label.text)}))"""


# JS: for each square of the confusion view's outline path, the row-major index of the heat-map cell it
# covers on the screen (every corner within 1 px), or -1 when it covers none; sorted.
OUTLINE_ON_CELLS_JS = """
(root) => {
  const path = root.querySelector('path.line');
  const cells = Array.from(root.querySelectorAll('.heatmapcell')).map((c) => c.getBoundingClientRect());
  const ctm = path.getScreenCTM();
  const found = [];
  for (const sub of (path.getAttribute('d') || '').split('M').filter((s) => s.trim())) {
    const v = (sub.match(/-?[0-9.]+(?:e-?[0-9]+)?/g) || []).map(Number);
    const xs = [], ys = [];
    for (let i = 0; i + 1 < v.length; i += 2) {
      const p = new DOMPoint(v[i], v[i + 1]).matrixTransform(ctm);
      xs.push(p.x); ys.push(p.y);
    }
    const box = [Math.min(...xs), Math.min(...ys), Math.max(...xs), Math.max(...ys)];
    found.push(cells.findIndex((r) => [r.left, r.top, r.right, r.bottom].every((e, k) => Math.abs(e - box[k]) <= 1)));
  }
  return found.sort((a, b) => a - b);
}
"""


def test_confusion_selection_blank_diagonal_and_sweep_label(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    cells = [SELECT, "dash.confusion.hide_diagonal = True", CONFUSION_STATE]
    path = _dash_notebook(notebook_dir, "mailroom", *cells)
    open_notebook(page, jupyter_server, path)
    run_cell(page, 0)
    _wait_dashboard(page)
    out = cell(page, 0)
    run_cell(page, 1)
    heat = out.locator(".logitscope-confusion").first
    # a selection from Python: each cell holding selected rows is outlined and says how many
    page.wait_for_function("(el) => el.querySelectorAll('text.label').length > 100", arg=heat.element_handle())
    got = _kernel_json(page, 3)
    # the outline path's squares, on the screen, lie exactly on the outlined cells (row-major index, 1 px)
    on_cells = heat.evaluate(OUTLINE_ON_CELLS_JS)
    assert on_cells == sorted(i * 10 + j for i, j in got["outlined"]) and on_cells
    VIEWS_DIR.mkdir(parents=True, exist_ok=True)
    heat.locator(".bqplot").first.screenshot(path=str(VIEWS_DIR / "mailroom-confusion-outlined.png"))
    sel_texts = [t for t in heat.locator("text.label").all_text_contents() if t.endswith(" sel.")]
    assert len(sel_texts) == len(got["outlined"])
    # a hidden diagonal leaves its cells blank, not 0.00
    run_cell(page, 2)
    page.wait_for_function("(el) => el.querySelector('input[type=checkbox]').checked", arg=heat.element_handle())
    got = _kernel_json(page, 3)
    assert got["diag"] == [""] * 10
    # the whole-row button: labelled by a clicked cell, plain again once the selection is cleared
    heat.locator(".heatmapcell").nth(4 * 10 + 9).click()
    button = heat.locator("button", has_text="whole row").first
    page.wait_for_function("(el) => /true four/.test(el.textContent)", arg=button.element_handle())
    out.locator("button", has_text="clear selection").first.click()
    page.wait_for_function("(el) => el.textContent === 'whole row of the clicked cell'", arg=button.element_handle())
    # the sweep's dot: dragged to another temperature, its label reads the new value (item 10)
    _open_tab(page, "Calibrate and decide", ".logitscope-sweep .bqplot")
    sweep = out.locator(".logitscope-sweep .bqplot").first
    dot = sweep.locator("path.dot").first
    dot.scroll_into_view_if_needed()
    _settle(page)
    box = dot.bounding_box()
    cx, cy = box["x"] + box["width"] / 2, box["y"] + box["height"] / 2
    page.mouse.move(cx, cy)
    page.mouse.down()
    page.mouse.move(cx - 40, cy, steps=8)
    page.mouse.up()
    page.wait_for_function(
        "(el) => Array.from(el.querySelectorAll('text.label')).some((t) => /^T 0\\./.test(t.textContent))",
        arg=sweep.element_handle(),
    )
    got = _kernel_json(page, 3)
    assert got["t"] < 1.0 and got["label"] == [f"T {got['t']:.3f}"]
    shown = [t for t in sweep.locator("text.label").all_text_contents() if t.startswith("T ")]
    assert shown == [f"T {got['t']:.3f}"]
    # the reliability diagram names a clicked bin by its confidence range (item 9)
    diagram = out.locator(".logitscope-reliability .bqplot").first
    diagram.locator("path.dot").last.click()
    note = out.locator(".logitscope-reliability").first
    page.wait_for_function(
        "(el) => /with confidence \\d\\.\\d\\d–\\d\\.\\d\\d selected/.test(el.textContent)", arg=note.element_handle()
    )
    assert re.search(r"bin (None|\d)", note.text_content() or "") is None
    assert browser_log.errors() == []


# ------------------------------------------------------------------------------------------ screenshots


def _view_shots(page: Any, prefix: str) -> list[Path]:
    """Screenshots of every view of the dashboard on the page, one file each."""
    out = cell(page, 0)
    shots: list[Path] = []
    VIEWS_DIR.mkdir(parents=True, exist_ok=True)
    explore = {
        "scatter": ".logitscope-scatter", "histogram": ".logitscope-histogram", "gallery": ".lsg-root",
        "card": ".lsc-root", "confusion": ".logitscope-confusion", "queue": ".lsr-queue",
        "doubtful-labels": ".lsr-picker", "dial": ".logitscope-dial",
    }  # fmt: skip
    calibrate = {
        "reliability": ".logitscope-reliability",
        "sweep": ".logitscope-sweep",
        "threshold": ".logitscope-threshold",
    }
    tabs = (
        ("Explore", explore, ".logitscope-scatter .bqplot"),
        ("Calibrate and decide", calibrate, ".logitscope-threshold .bqplot"),
        ("History", {"history": ".logitscope-history"}, ".logitscope-history .bqplot"),
    )
    for tab, views, ready in tabs:
        _open_tab(page, tab, ready)
        for name, selector in views.items():
            target = out.locator(selector).first
            target.scroll_into_view_if_needed()
            _settle(page)
            path = VIEWS_DIR / f"{prefix}-{name}.png"
            target.screenshot(path=str(path))
            shots.append(path)
    return shots


@pytest.mark.parametrize("width", [1400, 1000])
@pytest.mark.parametrize("demo", ["mailroom", "helpdesk"])
def test_screenshots_of_every_view(jupyter_server, notebook_dir, browser_page, browser_log, demo, width):
    page = browser_page
    page.set_viewport_size({"width": width, "height": 1000})
    # the largest confusion selected and its first sample in the card, as a person would look
    show = "p = dash.confusion.pairs[0]\ndash.confusion.select_cell(p.true, p.other)\n"
    show += "dash.state.focus = int(dash.selected[0])"
    path = _dash_notebook(notebook_dir, demo, show)
    open_notebook(page, jupyter_server, path)
    _collapse_sidebar(page)
    run_cell(page, 0)
    _wait_dashboard(page)
    run_cell(page, 1)
    cell(page, 0).locator(".lsc-id").first.wait_for()
    shots = _view_shots(page, f"{demo}-{width}")
    assert len(shots) == 12 and all(p.stat().st_size > 2000 for p in shots)
    assert browser_log.errors() == []


# ------------------------------------------------------------------------------------------ README pictures


def _save_small(png: bytes, target: Path, width: int = 1000) -> int:
    """Save a screenshot scaled to ``width`` pixels and reduced to 256 colours (PNG); return its size in bytes."""
    from PIL import Image

    image = Image.open(io.BytesIO(png)).convert("RGB")
    if image.width > width:
        image = image.resize((width, round(image.height * width / image.width)), Image.LANCZOS)
    small = image.quantize(colors=256, method=Image.Quantize.MEDIANCUT, dither=Image.Dither.NONE)
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp = target.with_name(target.name + ".tmp")
    small.save(tmp, format="PNG", optimize=True)
    tmp.replace(target)
    return target.stat().st_size


README_CELLS = [
    "dash.confusion.select_cell('four', 'nine'); dash.state.focus = int(dash.selected[0])",
    "dash.calibration.picker.mode = 'target accuracy'; dash.calibration.picker.target_accuracy = 0.98",
    "from logitscope.report import write_report\nwrite_report(frame, 'report.html', fit_temperature=True, "
    "target_accuracy=0.98)\nprint(json.dumps({'path': __import__('os').path.abspath('report.html')}))",
]


def test_readme_pictures_are_made_from_the_demo(jupyter_server, notebook_dir, browser_page, browser_log):
    page = browser_page
    page.set_viewport_size({"width": 1400, "height": 1100})
    path = _dash_notebook(notebook_dir, "mailroom", *README_CELLS)
    open_notebook(page, jupyter_server, path)
    _collapse_sidebar(page)
    run_cell(page, 0)
    _wait_dashboard(page)
    run_cell(page, 1)
    out = cell(page, 0)
    out.locator(".lsc-id").first.wait_for()
    dashboard = out.locator(".logitscope-dashboard").first

    def top_of_dashboard() -> dict:
        """The dashboard's top at the top of the notebook's scroll area; its visible part as a clip."""
        dashboard.evaluate("(el) => el.scrollIntoView({block: 'start'})")
        _settle(page)
        box = dashboard.bounding_box()
        assert box is not None and box["y"] >= 0, box
        return {**box, "height": min(box["height"], 1100 - 40 - box["y"], 1040)}  # above the status bar

    sizes = {}
    sizes["explore"] = _save_small(page.screenshot(clip=top_of_dashboard()), IMAGES_DIR / "explore.png")
    run_cell(page, 2)
    _open_tab(page, "Calibrate and decide", ".logitscope-threshold .bqplot")
    sizes["calibrate"] = _save_small(page.screenshot(clip=top_of_dashboard()), IMAGES_DIR / "calibrate.png")
    report = Path(_kernel_json(page, 3)["path"])
    view = page.context.new_page()
    view.set_viewport_size({"width": 1200, "height": 1300})
    view.goto(report.as_uri(), wait_until="load")
    sizes["report"] = _save_small(view.screenshot(), IMAGES_DIR / "report.png")
    view.close()
    assert all(s > 20_000 for s in sizes.values()), sizes  # pictures, not blank pages
    assert sum(sizes.values()) < IMAGES_BUDGET, sizes
    readme = (REPO_ROOT / "README.md").read_text(encoding="utf-8")
    for name in ("explore", "calibrate", "report"):
        assert f"docs/images/{name}.png" in readme
    assert browser_log.errors() == []
