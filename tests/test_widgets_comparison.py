"""The checkpoint comparison view, its panel, the dashboard's Compare tab and the forgetting list.

Counts and rows are checked against per-sample Python loops over numpy argmax predictions (the
definition of a prediction), McNemar's p against ``scipy.stats.binomtest`` (two-sided, p = 1/2 on
the discordant samples, McNemar 1947), Holm's adjustment against the step-down definition (Holm
1979), confidences against ``scipy.special.softmax`` and forgetting events against a loop over the
definition of Toneva et al. (2019): right at one checkpoint, wrong at the next.
"""

from __future__ import annotations

import html
from pathlib import Path

import ipywidgets as widgets
import numpy as np
import pytest
from scipy import special, stats

import logitscope
from logitscope import ClassNameError, LabelError, LogitFrame, ShapeError
from logitscope.checkpoints import compare_frames
from logitscope.widgets import CheckpointComparisonView, ComparisonPanel, Dashboard, SampleGallery

pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning")

XSS = "<img src=x onerror=alert(1)>"


def _later(frame: LogitFrame, seed: int, noise: float = 1.0, order: np.ndarray | None = None) -> LogitFrame:
    """Another checkpoint of the mail-room model: its logits plus noise, rows in ``order``."""
    rng = np.random.default_rng(seed)
    z = np.asarray(frame.logits, dtype=np.float64) + rng.normal(scale=noise, size=frame.logits.shape)
    order = np.arange(frame.n_samples) if order is None else order
    return LogitFrame(
        z[order], labels=frame.labels[order], classes=frame.classes, ids=frame.ids[order],
        images=frame.payload.data[order],
    )  # fmt: skip


def _loop_cells(za: np.ndarray, zb: np.ndarray, y: np.ndarray) -> list[str]:
    """Each sample's flip-table cell, one sample at a time (reference)."""
    out = []
    for i in range(len(y)):
        pa, pb = int(np.argmax(za[i])), int(np.argmax(zb[i]))
        ra, rb = pa == y[i], pb == y[i]
        if ra and rb:
            out.append("right_both")
        elif rb:
            out.append("fixed")
        elif ra:
            out.append("broken")
        else:
            out.append("wrong_same" if pa == pb else "wrong_different")
    return out


@pytest.fixture(scope="module")
def pair(mailroom: LogitFrame) -> tuple[LogitFrame, LogitFrame, list[str]]:
    """A, B (B's rows shuffled) and each row of A's cell by the loop (B aligned to A by id, by hand)."""
    order = np.random.default_rng(11).permutation(mailroom.n_samples)
    b = _later(mailroom, seed=4, order=order)
    back = {sid: i for i, sid in enumerate(b.ids.tolist())}
    zb = np.asarray(b.logits)[[back[s] for s in mailroom.ids.tolist()]]
    return mailroom, b, _loop_cells(np.asarray(mailroom.logits), zb, mailroom.labels)


def _click(table: widgets.Widget, row: str, column: str = "") -> None:
    """What the browser sends when a row (or a clickable cell) of a PickTable is clicked."""
    table._handle_custom_msg({"action": "pick", "row": row, "column": column}, [])


def test_flip_table_counts_and_mcnemar_against_a_loop_and_scipy(pair):
    a, b, cells = pair
    view = CheckpointComparisonView(compare_frames(a, b))
    table = view.flip_table
    for cell in ("right_both", "fixed", "broken", "wrong_same", "wrong_different"):
        assert table.loc[cell, "count"] == cells.count(cell), cell
        assert table.loc[cell, "share"] == pytest.approx(cells.count(cell) / len(cells))
    n_fixed, n_broken = cells.count("fixed"), cells.count("broken")
    assert n_fixed > 0 and n_broken > 0  # the test would be empty otherwise
    ref = stats.binomtest(n_broken, n_fixed + n_broken, 0.5, alternative="two-sided").pvalue
    assert view.mcnemar_p == pytest.approx(ref, rel=1e-9)
    assert f"p = {ref:.3f}" in view.test_note.value or f"p = {ref:.2g}" in view.test_note.value
    # the table sent to the browser carries the same counts
    sent = {r["key"]: r["cells"]["count"]["sort"] for r in view.flips_table.rows}
    assert sent == {c: cells.count(c) for c in sent}


def test_a_cell_click_selects_its_rows_in_the_gallery(pair):
    a, b, cells = pair
    view = CheckpointComparisonView(compare_frames(a, b))
    gallery = SampleGallery(a, view.state, page_size=500)
    _click(view.flips_table, "broken")
    expected = [i for i, c in enumerate(cells) if c == "broken"]
    assert view.state.rows.tolist() == expected
    assert view.state.origin_name == "checkpoint comparison" and view.owns_selection
    assert view.selected_cell == "broken" and view.flips_table.active == {"row": "broken"}
    assert sorted(gallery.page_rows.tolist()) == expected
    # the ids the gallery's tiles show are those samples' ids
    assert sorted(t["id"] for t in gallery.tiles) == sorted(str(a.ids[i]) for i in expected)
    _click(view.flips_table, "wrong_different")
    assert view.state.rows.tolist() == [i for i, c in enumerate(cells) if c == "wrong_different"]
    _click(view.flips_table, "wrong_different")  # a second click clears the view's own selection
    assert view.state.rows.size == 0 and view.selected_cell is None and view.flips_table.active == {}


def test_a_class_click_selects_its_changed_rows(pair):
    a, b, cells = pair
    view = CheckpointComparisonView(compare_frames(a, b))
    y = a.labels
    k = 8
    changed = [i for i, c in enumerate(cells) if c in ("fixed", "broken") and y[i] == k]
    assert changed
    _click(view.classes_table, str(k))
    assert view.state.rows.tolist() == changed
    assert (view.selected_class, view.selected_part) == (k, "changed")
    _click(view.classes_table, str(k), "fixed")
    assert view.state.rows.tolist() == [i for i, c in enumerate(cells) if c == "fixed" and y[i] == k]
    assert view.classes_table.active == {"row": str(k), "column": "fixed"}
    assert view.select_class("eight", "broken").tolist() == [
        i for i, c in enumerate(cells) if c == "broken" and y[i] == k
    ]
    with pytest.raises(logitscope.ParameterError, match="unknown class"):
        view.select_class("eleven")


def test_per_class_table_against_loops_and_holm(pair):
    a, b, cells = pair
    view = CheckpointComparisonView(compare_frames(a, b))
    df = view.per_class
    y = a.labels
    p_raw = []
    for k, name in enumerate(a.classes):
        mine = [c for c, label in zip(cells, y, strict=True) if label == k]
        right_a = sum(c in ("right_both", "broken") for c in mine)
        right_b = sum(c in ("right_both", "fixed") for c in mine)
        fixed, broken = mine.count("fixed"), mine.count("broken")
        assert df.loc[name, "support"] == len(mine)
        assert df.loc[name, "accuracy_a"] == pytest.approx(right_a / len(mine))
        assert df.loc[name, "change"] == pytest.approx((right_b - right_a) / len(mine))
        assert (df.loc[name, "fixed"], df.loc[name, "broken"]) == (fixed, broken)
        # scipy.stats.binomtest: exact two-sided McNemar within the class (1 without discordant samples)
        p_raw.append(1.0 if fixed + broken == 0 else stats.binomtest(broken, fixed + broken, 0.5).pvalue)
    # Holm (1979) step-down, straight from the definition: sorted p_(i) times (m - i + 1), running maximum, cap 1
    m = len(p_raw)
    order = np.argsort(p_raw, kind="stable")
    holm = np.empty(m)
    running = 0.0
    for rank, i in enumerate(order):
        running = max(running, min(1.0, (m - rank) * p_raw[i]))
        holm[i] = running
    np.testing.assert_allclose(df["mcnemar_p_holm"].to_numpy(), holm, rtol=1e-9)
    # what the browser is sent for one class
    row = next(r for r in view.classes_table.rows if r["key"] == "3")["cells"]
    assert row["class"]["text"] == "three" and row["support"]["sort"] == int(df.loc["three", "support"])


def test_the_rectangle_brush_selects_rows_by_both_confidences(pair):
    a, b, _ = pair
    view = CheckpointComparisonView(compare_frames(a, b))
    # reference confidences: scipy.special.softmax of each frame's logits at its temperature, B aligned by id
    back = {sid: i for i, sid in enumerate(b.ids.tolist())}
    conf_a = special.softmax(np.asarray(a.logits, np.float64), axis=1).max(1)
    conf_b = special.softmax(np.asarray(b.logits, np.float64), axis=1).max(1)[[back[s] for s in a.ids.tolist()]]
    box_x, box_y = (0.5, 0.9), (0.2, 0.8)
    # the browser brush sends only its extents, once, on release (x0, x1, y0, y1; here dragged right to left);
    # Python computes the rows over all rows
    assert view.brush_box is None
    view._brush.box = [box_x[1], box_x[0], box_y[0], box_y[1]]
    assert view.brush_box == (box_x, box_y)
    inside = (conf_a >= box_x[0]) & (conf_a <= box_x[1]) & (conf_b >= box_y[0]) & (conf_b <= box_y[1])
    assert inside.sum() > 0
    assert view.state.rows.tolist() == np.flatnonzero(inside).tolist()
    assert view.owns_selection and view.selected_cell is None
    # the selected points are painted opaque over the rest faded: a selected sample's pixel is fully drawn
    r = int(np.flatnonzero(inside)[0])
    col, row = view.pixel_of(r)
    assert view.image[row, col, 3] > 200
    # another view's selection removes the brush rectangle
    view.state.select([0, 1], origin="python")
    assert view.brush_box is None


def test_points_are_painted_into_one_image_at_100k_rows():
    # 100,000 synthetic help-desk tickets x 12 queues: the browser gets images, not 100,000 SVG elements
    rng = np.random.default_rng(2)
    n, k = 100_000, 12
    y = rng.integers(0, k, n)
    za = rng.normal(size=(n, k)).astype(np.float32)
    za[np.arange(n), y] += 1.5
    zb = za + rng.normal(scale=0.8, size=(n, k)).astype(np.float32)
    view = CheckpointComparisonView(compare_frames(LogitFrame(za, labels=y), LogitFrame(zb, labels=y)))
    sizes = [np.size(getattr(mark, "x", ())) for mark in view.figure.marks]
    assert max(sizes) <= 2  # images placed by two corners, a diagonal, a focus ring
    assert view.image.shape == (*view.resolution[::-1], 4)
    cells = _loop_cells(za[:2000], zb[:2000], y[:2000])  # the loop on the first 2,000 rows
    rows = view.select_cell("fixed")
    assert rows[rows < 2000].tolist() == [i for i, c in enumerate(cells) if c == "fixed"]


def test_without_labels_the_view_shows_agreement(pair):
    a, b, _ = pair
    view = CheckpointComparisonView(compare_frames(a.with_labels(None), b.with_labels(None)))
    back = {sid: i for i, sid in enumerate(b.ids.tolist())}
    zb = np.asarray(b.logits)[[back[s] for s in a.ids.tolist()]]
    changed = [i for i in range(a.n_samples) if np.argmax(a.logits[i]) != np.argmax(zb[i])]  # reference loop
    assert view.flip_table.loc["changed", "count"] == len(changed)
    assert view.select_cell("changed").tolist() == changed
    assert view.mcnemar_p is None and view.classes_table.rows == []
    with pytest.raises(LabelError):
        view.select_class(0)


def test_compare_opens_a_panel_with_gallery_and_card(pair):
    a, b, cells = pair
    panel = logitscope.compare(a, b, names=("epoch 3", XSS))
    assert isinstance(panel, ComparisonPanel)
    assert panel.view.state is panel.gallery.state is panel.card.state
    _click(panel.view.flips_table, "fixed")
    fixed = [i for i, c in enumerate(cells) if c == "fixed"]
    assert panel.selected.tolist() == fixed and panel.gallery.n_shown == len(fixed)
    panel.gallery.focus = int(panel.gallery.page_rows[0])  # a tile click in the browser
    assert panel.card.sample["id"] == str(a.ids[panel.gallery.page_rows[0]])
    # a name from the user reaches HTML escaped
    assert XSS not in panel.view.readout.value and html.escape(XSS) in panel.view.readout.value


def test_compare_names_missing_ids_or_shows_them_apart(pair):
    a, b, _ = pair
    short = b.subset(np.arange(b.n_samples - 3))
    gone = set(b.ids[-3:].tolist())
    with pytest.raises(ShapeError, match="3 ids of A are not in B"):
        logitscope.compare(a, short)
    panel = logitscope.compare(a, short, missing="drop")
    assert set(panel.comparison.only_in_a.tolist()) == gone
    assert "3 samples of A are not in B" in panel.view.apart.value
    with pytest.raises(ClassNameError):
        logitscope.compare(a, LogitFrame(b.logits, labels=b.labels))  # class names "0".."9"


def test_dashboard_compare_tab_selects_in_the_explore_gallery(pair, tmp_path: Path):
    a, b, cells = pair
    dash = Dashboard(a, relabel_path=tmp_path / "m.json", compare_to=b)
    view = dash.comparison
    assert view is not None and view.state is dash.state and view in dash.views
    assert dash.tabs.get_title(3) == "Compare" and view not in dash.tabs.children[3].children
    dash.tabs.selected_index = 3  # drawn when first in sight (bqplot lays out hidden figures at zero size)
    assert dash.tabs.children[3].children == (view,)
    # B came in another row order: the view's rows are the dashboard frame's rows, matched by id
    _click(view.flips_table, "broken")
    broken = [i for i, c in enumerate(cells) if c == "broken"]
    assert dash.selected.tolist() == broken
    assert dash.gallery.n_shown == len(broken) and set(dash.gallery.page_rows.tolist()) <= set(broken)
    # a selection made in the Explore tab is drawn in the comparison too
    dash.confusion.select_cell("four", "nine")
    assert not view.owns_selection and view.selected_cell is None
    assert "of them are in this comparison" in view.note.value


def test_dashboard_names_missing_ids_or_shows_them_apart(pair, tmp_path: Path):
    a, b, cells = pair
    short = b.subset(np.arange(5, b.n_samples))
    with pytest.raises(ShapeError, match="compare_missing='drop'"):
        Dashboard(a, relabel_path=tmp_path / "m.json", compare_to=short)
    dash = Dashboard(a, relabel_path=tmp_path / "m.json", compare_to=short, compare_missing="drop")
    view = dash.comparison
    assert view is not None
    gone = sorted(b.ids[:5].tolist())
    assert sorted(a.ids[view.rows_apart].tolist()) == gone
    view.select_apart()
    assert sorted(a.ids[dash.selected].tolist()) == gone
    # the flip table counts only the shared samples; the fixed rows are still rows of the dashboard frame
    keep = {s for s in short.ids.tolist()}
    expected = [i for i, c in enumerate(cells) if c == "fixed" and a.ids[i] in keep]
    assert view.select_cell("fixed").tolist() == expected
    with pytest.raises(LabelError, match="different labels"):
        dash.compare(LogitFrame(b.logits, labels=(b.labels + 1) % 10, classes=b.classes, ids=b.ids))


def test_dashboard_update_compares_the_new_frame_with_b(pair, mailroom, tmp_path: Path):
    a, b, _ = pair
    dash = Dashboard(a, relabel_path=tmp_path / "m.json", compare_to=b)
    nxt = _later(mailroom, seed=9, noise=1.0, order=np.random.default_rng(5).permutation(mailroom.n_samples))
    dash.update(nxt, "epoch 2")
    view = dash.comparison
    assert view is not None and view.frame is nxt and view.error == ""
    back = {sid: i for i, sid in enumerate(b.ids.tolist())}
    cells = _loop_cells(np.asarray(nxt.logits), np.asarray(b.logits)[[back[s] for s in nxt.ids.tolist()]], nxt.labels)
    assert view.flip_table["count"].to_dict() == {c: cells.count(c) for c in view.flip_table.index}
    assert view.select_cell("fixed").tolist() == [i for i, c in enumerate(cells) if c == "fixed"]


def _loop_forgetting(correct: np.ndarray) -> np.ndarray:
    """Forgetting events per sample, by the definition: right at checkpoint e, wrong at e + 1."""
    events = np.zeros(correct.shape[1], dtype=int)
    for i in range(correct.shape[1]):
        for e in range(correct.shape[0] - 1):
            if correct[e, i] and not correct[e + 1, i]:
                events[i] += 1
    return events


def test_history_tab_lists_the_most_forgotten_samples(mailroom, tmp_path: Path):
    epochs = [_later(mailroom, seed=s, noise=3.0) for s in range(4)]
    shuffled = np.random.default_rng(8).permutation(mailroom.n_samples)
    epochs.append(_later(mailroom, seed=4, noise=3.0, order=shuffled))  # the last one's rows in another order
    dash = Dashboard(epochs[0], relabel_path=tmp_path / "m.json")
    with pytest.raises(logitscope.ParameterError, match="at least two"):
        dash.forgetting()
    for f in epochs[1:]:
        dash.update(f)
    # reference: argmax predictions of each epoch, matched to the first epoch's ids by hand
    ids = epochs[0].ids.tolist()
    correct = []
    for f in epochs:
        pos = {s: i for i, s in enumerate(f.ids.tolist())}
        z = np.asarray(f.logits)[[pos[s] for s in ids]]
        correct.append(z.argmax(1) == epochs[0].labels)
    events = _loop_forgetting(np.array(correct))
    result = dash.forgetting()
    np.testing.assert_array_equal(result.ranking.forgetting_events, events)
    # the list fills when the History tab is opened
    listed = dash.forgetting_list
    assert listed.listed_ids == []
    dash.tabs.selected_index = 2
    top = listed.listed_ids
    assert len(top) == listed.n
    got = [events[ids.index(s)] for s in top]
    assert got == sorted(got, reverse=True) and got[0] == events.max() and min(got) >= 1
    # "right now?" is the frame on screen (the last epoch, rows in another order)
    current = dash.frame
    first = listed.table.rows[0]["cells"]
    row = current.ids.tolist().index(top[0])
    assert first["now"] == ("yes" if np.argmax(current.logits[row]) == current.labels[row] else "no")
    _click(listed.table, "0")
    assert dash.selected.tolist() == [row] and dash.state.focus == row
    assert dash.card.sample["id"] == str(top[0])
    listed.select_forgotten()
    assert sorted(current.ids[dash.selected].tolist()) == sorted(s for s, e in zip(ids, events, strict=True) if e > 0)


def test_pick_tables_sync_their_traits(pair):
    # the state the front end receives names every synced trait (a property must not shadow Widget.keys)
    a, b, _ = pair
    view = CheckpointComparisonView(compare_frames(a, b))
    for table in (view.flips_table, view.classes_table):
        state = table.get_state()
        assert {"columns", "rows", "active", "caption", "note", "max_height", "empty", "_esm"} <= set(state)
        assert state["rows"] == table.rows


def test_out_of_sight_the_compare_tab_waits_and_catches_up(pair, mailroom, tmp_path: Path):
    a, b, _ = pair
    dash = Dashboard(a, relabel_path=tmp_path / "m.json", compare_to=b)
    view = dash.comparison
    assert view is not None and not view.live  # the Explore tab is in sight
    dash.selected = [1, 2, 3]
    drawn = view.image.copy()  # reading the image draws it for the current selection
    # a new frame with fewer rows, in another order: nothing may index the old rows meanwhile
    nxt = _later(mailroom, seed=7).subset(np.arange(100, mailroom.n_samples)[::-1])
    dash.update(nxt)
    dash.selected = np.arange(nxt.n_samples - 5, nxt.n_samples)
    dash.tabs.selected_index = 3
    assert view.live and view.frame is nxt
    back = {sid: i for i, sid in enumerate(b.ids.tolist())}
    ref = _loop_cells(np.asarray(nxt.logits), np.asarray(b.logits)[[back[s] for s in nxt.ids.tolist()]], nxt.labels)
    assert view.flip_table["count"].to_dict() == {c: ref.count(c) for c in view.flip_table.index}
    assert "5 samples selected from Python; 5 of them are in this comparison" in view.note.value
    assert view.image.shape == drawn.shape


def test_hostile_class_names_and_ids_never_reach_html_unescaped(pair):
    a, b, _ = pair
    classes = list(a.classes)
    classes[8] = XSS
    ids = np.array([f"{XSS}-{i}" for i in range(a.n_samples)], dtype=object)
    ha = LogitFrame(a.logits, labels=a.labels, classes=classes, ids=ids)
    pos = {s: i for i, s in enumerate(a.ids.tolist())}
    hb = LogitFrame(b.logits, labels=b.labels, classes=classes, ids=ids[[pos[s] for s in b.ids.tolist()]])
    view = CheckpointComparisonView(compare_frames(ha, hb.subset(np.arange(5, hb.n_samples)), missing="drop"))
    view.select_class(XSS)
    html_values = [w.value for w in _walk(view) if isinstance(w, widgets.HTML)]
    assert html_values and not any(XSS in v for v in html_values)
    assert any(html.escape(XSS) in v for v in html_values)  # the note names the class, escaped
    # the tables carry the names as plain text: the browser sets them with textContent
    assert next(r for r in view.classes_table.rows if r["key"] == "8")["cells"]["class"]["text"] == XSS


def _walk(widget: widgets.Widget):  # type: ignore[no-untyped-def]
    yield widget
    for child in getattr(widget, "children", ()) or ():
        yield from _walk(child)
