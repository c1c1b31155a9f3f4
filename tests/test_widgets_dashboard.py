"""Python-level tests of the Dashboard: composition, ``selected``, propagation to every view, temperature.

The mail-room demo frame holds scikit-learn's bundled digits data; selections are checked against
masks from scipy's softmax and counts from ``sklearn.metrics.confusion_matrix``.
"""

from __future__ import annotations

import html

import ipywidgets as widgets
import numpy as np
import pytest
from scipy import special
from sklearn.metrics import confusion_matrix as sk_confusion_matrix

import logitscope
from logitscope import LogitFrame
from logitscope.widgets import (
    ConfidenceHistogram,
    ConfusionHeatmap,
    Dashboard,
    RelabelQueue,
    SampleCard,
    SampleGallery,
    ScoreScatter,
    SharedState,
    TemperatureDial,
)

XSS = "<img src=x onerror=alert(1)>"


@pytest.fixture
def dash(mailroom: LogitFrame, tmp_path) -> Dashboard:
    return logitscope.explore(mailroom, relabel_path=tmp_path / "marks.json")


def _walk(widget: widgets.Widget):  # type: ignore[no-untyped-def]
    yield widget
    for child in getattr(widget, "children", ()) or ():
        yield from _walk(child)


def test_explore_builds_every_view_on_one_state(dash, mailroom, tmp_path):
    assert isinstance(dash, Dashboard)
    views = [dash.scatter, dash.histogram, dash.confusion, dash.gallery, dash.card, dash.dial, dash.queue]
    kinds = [ScoreScatter, ConfidenceHistogram, ConfusionHeatmap, SampleGallery, SampleCard, TemperatureDial]
    for view, kind in zip(views, [*kinds, RelabelQueue], strict=True):
        assert isinstance(view, kind) and view.state is dash.state and view.frame is mailroom
    assert dash.doubtful.queue is dash.queue
    assert dash.queue.path == str((tmp_path / "marks.json").resolve())
    assert [dash.tabs.get_title(i) for i in range(2)] == ["Explore", "Calibrate and decide"]
    # every explore view sits in the first tab
    inside = {id(w) for w in _walk(dash.tabs.children[0])}
    assert all(id(v) in inside for v in views if v is not dash.dial)
    assert id(dash.dial) in {id(w) for w in _walk(dash)}


def test_calibration_tab_is_built_on_first_open(dash):
    assert dash._calibration is None
    dash.tabs.selected_index = 1
    panel = dash._calibration
    assert panel is not None and panel.state is dash.state
    assert dash.tabs.children[1].children == (panel,)
    assert dash.calibration is panel  # built once


def test_selected_from_python_reaches_every_view(dash, mailroom):
    rows = [3, 40, 41, 900, 1500]
    dash.selected = rows
    assert dash.selected.tolist() == rows and dash.state.origin_name == "Python"
    assert sorted(dash.gallery.page_rows.tolist()) == rows
    # the scatter draws the selected rows opaque, over the others faded
    col, line = dash.scatter.pixel_of(rows[0])
    assert dash.scatter.image[line, col, 3] > 255 * 0.5
    assert dash.scatter._mark.image is dash.scatter._base_widgets[1]  # the faded picture of all rows
    conf = special.softmax(np.asarray(mailroom.logits, dtype=np.float64), axis=1).max(axis=1)  # scipy
    y = np.asarray(mailroom.labels)
    pred = np.asarray(mailroom.logits).argmax(axis=1)
    right = pred[rows] == y[rows]
    sel = np.asarray(dash.histogram._sel_bars.y)
    edges = dash.histogram.edges
    np.testing.assert_array_equal(sel[0], np.histogram(conf[rows][right], edges)[0])
    np.testing.assert_array_equal(sel[1], np.histogram(conf[rows][~right], edges)[0])
    cells = sorted({(int(y[r]), int(pred[r])) for r in rows})
    assert dash.confusion.outlined == cells
    assert dash._selection.value.startswith("5 of 1,797 samples selected from Python")
    dash._clear.click()
    assert dash.selected.size == 0 and dash.gallery.n_shown == mailroom.n_samples


def test_a_brush_updates_the_other_views(dash, mailroom):
    conf = special.softmax(np.asarray(mailroom.logits, dtype=np.float64), axis=1).max(axis=1)
    dash.histogram._brush.selected = np.array([0.2, 0.5])  # as the browser's interval brush sends it
    expected = np.flatnonzero((conf >= 0.2) & (conf <= 0.5))
    np.testing.assert_array_equal(dash.selected, expected)
    assert dash.state.origin_name == "histogram"
    assert dash.gallery.n_shown == expected.size
    assert f"{expected.size:,} selected rows fall in" in dash.confusion._note.value


def test_confusion_click_selects_the_cell_samples(dash, mailroom):
    y = np.asarray(mailroom.labels)
    pred = np.asarray(mailroom.logits).argmax(axis=1)
    ref = sk_confusion_matrix(y, pred)  # scikit-learn
    dash.confusion._on_cell_click(dash.confusion._grid, {"data": {"rowNum": 3, "columnNum": 8}})
    assert dash.selected.size == ref[3, 8]
    assert np.all(y[dash.selected] == 3) and np.all(pred[dash.selected] == 8)
    assert dash.gallery.n_shown == ref[3, 8]


def test_temperature_from_the_dial_reaches_every_view(dash, mailroom):
    dash.dial.slider.value = 3.0
    t = dash.state.temperature
    assert t == pytest.approx(3.0)
    p = special.softmax(np.asarray(mailroom.logits, dtype=np.float64) / t, axis=1)  # scipy
    np.testing.assert_allclose(dash.scatter.column("confidence"), p.max(axis=1), rtol=1e-9)
    np.testing.assert_allclose(dash.histogram.edges, np.histogram_bin_edges(p.max(axis=1), bins=30), rtol=1e-6)
    assert dash.card.temperature == pytest.approx(t)
    acc = float((p.argmax(axis=1) == np.asarray(mailroom.labels)).mean())
    assert f"accuracy {acc:.1%}" in dash._summary.value


def test_a_state_can_be_shared_with_a_second_dashboard(mailroom, tmp_path):
    state = SharedState(mailroom.n_samples)
    a = Dashboard(mailroom, state, relabel_path=tmp_path / "a.json")
    b = Dashboard(mailroom, state, relabel_path=tmp_path / "b.json")
    a.selected = [1, 2]
    assert b.selected.tolist() == [1, 2] and sorted(b.gallery.page_rows.tolist()) == [1, 2]


def test_hostile_names_never_reach_html_widgets_unescaped(tmp_path):
    rng = np.random.default_rng(2)
    z = rng.normal(size=(60, 3))
    frame = LogitFrame(
        z,
        labels=rng.integers(0, 3, 60),
        classes=[XSS, "parcel", "letter"],
        texts=[XSS] * 60,
        ids=[f"{XSS}{i}" for i in range(60)],
    )
    dash = Dashboard(frame, relabel_path=tmp_path / "marks.json")
    dash.selected = np.arange(30)
    dash.confusion.select_position(0, 0)
    for w in _walk(dash):
        if isinstance(w, widgets.HTML):
            assert XSS not in w.value, f"raw class name inside HTML: {w.value!r}"
    assert html.escape(XSS) not in dash.confusion._ax_row.tick_labels.values()  # SVG text: no double escaping


def test_sweep_selection_curve_waits_while_its_tab_is_hidden(dash):
    # the selection's NLL curve costs one pass per temperature: computed only when the tab is in sight,
    # then checked against sklearn's log_loss on the selected rows at one grid temperature
    from scipy.special import softmax
    from sklearn.metrics import log_loss

    sweep = dash.calibration.sweep
    assert not sweep.live  # built while the Explore tab is shown
    rows = np.arange(0, dash.frame.n_samples, 5)
    dash.selected = rows
    assert sweep.selection_finding is None
    dash.tabs.selected_index = 1
    assert sweep.live and sweep.selection_curve.visible
    t = float(sweep.selection_curve.x[10])
    p = softmax(np.asarray(dash.frame.logits[rows], dtype=np.float64) / t, axis=1)
    ref = log_loss(dash.frame.labels[rows], p, labels=range(dash.frame.n_classes))
    assert sweep.selection_curve.y[10] == pytest.approx(ref, rel=1e-7)
    dash.tabs.selected_index = 0
    assert not sweep.live


def test_a_brush_sends_each_widget_one_message_after_every_view_followed(tmp_path) -> None:  # type: ignore[no-untyped-def]
    """The messages of a selection leave together, one per widget, each picture before the mark showing it."""
    import ipywidgets as widgets

    import logitscope

    frame = logitscope.load_demo("mailroom")
    dash = logitscope.explore(frame, relabel_path=tmp_path / "m.json")
    sent: list[tuple[object, dict]] = []
    followed: list[str] = []
    send = widgets.Widget._send

    def record(self, msg, buffers=None):  # type: ignore[no-untyped-def]
        sent.append((self, dict(msg.get("state") or {}), len(followed)))
        return send(self, msg, buffers)

    for view in dash.views:  # note when each view has followed the selection
        view.state.observe(lambda change, v=view: followed.append(v.kind), "rows")
    widgets.Widget._send = record
    try:
        dash.scatter._brush.box = [0.3, 0.6, 0.5, 2.0]  # what the browser sends on release
    finally:
        widgets.Widget._send = send
    views_sent = [(w, s, n) for w, s, n in sent if w is not dash.scatter._brush]  # the brush's own box first
    assert dash.selected.size > 0 and len(views_sent) >= 6
    assert all(n == len(followed) for _, _, n in views_sent)  # nothing left before every view had followed
    widgets_sent = [w for w, _, _ in views_sent]
    assert len(widgets_sent) == len(set(map(id, widgets_sent)))  # one message per widget
    # the selection's picture leaves before the mark that shows it (bqplot redraws on the mark's message)
    mark = dash.scatter._top_mark
    picture = mark.image
    assert widgets_sent.index(picture) < widgets_sent.index(mark)
