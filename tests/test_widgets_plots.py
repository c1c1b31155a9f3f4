"""Python-level tests of the bqplot views: ScoreScatter, ConfidenceHistogram, ConfusionHeatmap, TemperatureDial.

Selections are checked against masks built from scipy's softmax (``scipy.special.softmax``) and
against scikit-learn's ``confusion_matrix``; top-k pairs against ``torch.topk``; the fitted
temperature against ``scipy.optimize.minimize_scalar`` on the NLL written out with scipy.
Browser behaviour (a real mouse brush) is tested in tests/browser/test_dashboard.py.
"""

from __future__ import annotations

import numpy as np
import pytest
import torch
from scipy import ndimage, optimize, special
from sklearn.metrics import confusion_matrix as sk_confusion_matrix

from logitscope import InputTypeError, LogitFrame, ParameterError
from logitscope.errors import ClassNameError
from logitscope.widgets import (
    ConfidenceHistogram,
    ConfusionHeatmap,
    ScoreScatter,
    SharedState,
    TemperatureDial,
)
from logitscope.widgets.confusion import short_label
from logitscope.widgets.scatter import CLASS_COLORS, FADED, PointRaster
from logitscope.widgets.style import RIGHT, WRONG

XSS = "<img src=x onerror=alert(1)>"


@pytest.fixture(scope="module")
def parcels() -> LogitFrame:
    """5,000 samples x 12 classes of seeded synthetic logits, with one hostile class name."""
    rng = np.random.default_rng(11)
    n, k = 5000, 12
    y = rng.integers(0, k, n)
    z = rng.normal(size=(n, k)).astype(np.float32)
    z[np.arange(n), y] += rng.uniform(0.0, 4.0, n).astype(np.float32)
    classes = [f"depot-{i:02d}" for i in range(k)]
    classes[3] = XSS
    return LogitFrame(z, labels=y, classes=classes)


def _softmax(frame: LogitFrame, t: float = 1.0) -> np.ndarray:
    return special.softmax(np.asarray(frame.logits, dtype=np.float64) / t, axis=1)


def _confidence(frame: LogitFrame, t: float = 1.0) -> np.ndarray:
    return _softmax(frame, t).max(axis=1)


def _entropy(frame: LogitFrame, t: float = 1.0) -> np.ndarray:
    p = _softmax(frame, t)
    return -(special.xlogy(p, p)).sum(axis=1)


class Recorder:
    """Counts writes to a SharedState (every call of ``select``) by origin."""

    def __init__(self, state: SharedState) -> None:
        self.calls: list[str] = []
        original = state.select

        def select(rows, origin=""):  # type: ignore[no-untyped-def]
            self.calls.append(state.name_of(origin))
            original(rows, origin)

        state.select = select  # type: ignore[method-assign]


# --------------------------------------------------------------------------- scatter


def test_raster_pixels_and_disc_spread_against_scipy():
    r = PointRaster(40, 30, (0.0, 2.0), (-1.0, 1.0), radius2=5.0)
    x = np.array([0.0, 1.999, 1.0, 0.5, np.nan])
    y = np.array([1.0, -1.0, 0.0, 0.26, 0.0])
    # column floor((x - x0) / width * 40), row floor((y1 - y) / height * 30), top row first; NaN -> -1
    cols = np.floor((x[:4] - 0.0) / 2.0 * 40).clip(0, 39)
    rows = np.floor((1.0 - y[:4]) / 2.0 * 30).clip(0, 29)
    np.testing.assert_array_equal(r.pixels(x, y), [*(rows * 40 + cols).astype(int), -1])
    # each point spread over a disc of radius sqrt(5): scipy.ndimage.correlate with the disc kernel
    rng = np.random.default_rng(4)
    counts = rng.poisson(0.4, 40 * 30)
    yy, xx = np.mgrid[-2:3, -2:3]
    disc = (xx**2 + yy**2 <= 5.0).astype(float)
    ref = ndimage.correlate(counts.reshape(30, 40).astype(float), disc, mode="constant", cval=0.0)
    np.testing.assert_allclose(r._spread(counts), ref)
    assert len(r.offsets) == int(disc.sum()) == 21
    # alpha of a pixel covered by c points: 1 - exp(-c / depth)
    planes = r.layer(np.array([0, 0, 0]), np.zeros(3, np.int64), ["#ff0000"])
    assert planes[3, 0, 0] == pytest.approx(1 - np.exp(-3 / r.depth), rel=1e-6)
    assert planes[0, 0, 0] == pytest.approx(planes[3, 0, 0])  # premultiplied pure red
    assert planes[1, 0, 0] == 0.0 and planes[2, 0, 0] == 0.0
    with pytest.raises(ParameterError, match="raster"):
        PointRaster(0, 10, (0, 1), (0, 1))


def _alpha_at(view: ScoreScatter, row: int) -> int:
    col, line = view.pixel_of(row)
    return int(view.image[line, col, 3])


def test_scatter_box_selects_over_all_rows(parcels):
    view = ScoreScatter(parcels, x="confidence", y="entropy")
    conf, ent = _confidence(parcels), _entropy(parcels)  # scipy reference scores
    np.testing.assert_allclose(view.column("confidence"), conf, rtol=1e-9)
    np.testing.assert_allclose(view.column("entropy"), ent, rtol=1e-9, atol=1e-12)
    # every row is painted: the pixel of each row is at least as opaque as one point alone
    one = 255 * (1 - np.exp(-1 / view.raster.depth))
    assert min(_alpha_at(view, r) for r in range(0, parcels.n_samples, 97)) >= int(one) - 1

    # the browser brush sends only its extents; Python computes the rows over all 5,000
    assert view.state.rows.size == 0 and view.brush_box is None
    view._brush.box = [0.7, 0.3, 0.5, 2.0]  # what the browser sends on release (the brush drags right to left)
    assert view.brush_box == ((0.3, 0.7), (0.5, 2.0))
    expected = np.flatnonzero((conf >= 0.3) & (conf <= 0.7) & (ent >= 0.5) & (ent <= 2.0))
    assert 0 < expected.size < parcels.n_samples
    np.testing.assert_array_equal(view.state.rows, expected)
    assert view.state.origin_name == "score scatter"
    # selected points stay opaque; a point far from every selected one is faded
    assert min(_alpha_at(view, r) for r in expected[::25]) >= int(one) - 1
    px = np.array([view.pixel_of(r) for r in expected], dtype=float)
    far = [r for r in range(parcels.n_samples) if np.min(np.abs(px - view.pixel_of(r)).sum(axis=1)) > 8]
    assert far and max(_alpha_at(view, r) for r in far[:200]) <= int(255 * FADED) + 1


def _painted(view: ScoreScatter, rows: np.ndarray) -> np.ndarray:
    """Premultiplied RGBA planes of ``rows`` painted as the scatter's docstring says, with scipy.

    Each group's point counts spread over the disc (scipy.ndimage.correlate), alpha
    ``1 - exp(-c / depth)`` per pixel, groups painted in order, each over the ones before.
    """
    r = view.raster
    h, w = r.height, r.width
    rad = r.pad
    yy, xx = np.mgrid[-rad : rad + 1, -rad : rad + 1]
    disc = (xx**2 + yy**2 <= view._radius2).astype(float)
    px, groups = view._pixels[rows], np.asarray(view._groups)[rows]
    out = np.zeros((4, h, w))
    for g, color in enumerate(view._palette):
        counts = np.bincount(px[groups == g], minlength=h * w).reshape(h, w).astype(float)
        a = 1.0 - np.exp(-ndimage.correlate(counts, disc, mode="constant", cval=0.0) / r.depth)
        rgb = [int(color[i : i + 2], 16) / 255.0 for i in (1, 3, 5)]
        for c in range(3):
            out[c] = out[c] * (1 - a) + a * rgb[c]
        out[3] = out[3] * (1 - a) + a
    return out


def test_scatter_paints_only_the_brushed_part_and_draws_what_a_full_painting_does(parcels):
    view = ScoreScatter(parcels, x="confidence", y="entropy")
    rows = view.select_box((0.3, 0.6), (1.0, 2.0))
    assert 0 < rows.size < parcels.n_samples
    # the selected points' image sent to the browser covers their part of the plot only
    w, h = view.resolution
    assert view._top_mark.x[1] - view._top_mark.x[0] < 0.6 * (view._sx.max - view._sx.min)
    assert len(view._top_mark.image.value) < len(view._base_widgets[0].value)
    # what the plot shows equals the selected points painted over all points faded (scipy reference)
    top, base = _painted(view, rows), _painted(view, np.arange(parcels.n_samples))
    composite = top + base * (1.0 - top[3]) * FADED
    alpha = view.image[..., 3].astype(float)
    np.testing.assert_allclose(alpha, np.clip(composite[3] * 255 + 0.5, 0, 255).astype(int), atol=1)
    # the class colours (more than three: each pixel takes the last point's colour): the part
    # painted alone equals the same part of the whole image painted
    view.color_by = "true class"
    r = view.raster
    px, g = view._pixels[rows], view._groups[rows]
    window = (0, w, 0, h)
    np.testing.assert_allclose(r.window_layer(px, g, view._palette, window), r.layer(px, g, view._palette))
    py, pxx = np.divmod(px, w)
    window = (
        int(pxx.min()) - r.pad - 1,
        int(pxx.max()) + r.pad + 2,
        int(py.min()) - r.pad - 1,
        int(py.max()) + r.pad + 2,
    )
    window = (max(window[0], 0), min(window[1], w), max(window[2], 0), min(window[3], h))
    c0, c1, r0, r1 = window
    np.testing.assert_allclose(
        r.window_layer(px, g, view._palette, window), r.layer(px, g, view._palette)[:, r0:r1, c0:c1]
    )


def test_scatter_lasso_rows_come_from_the_all_rows_probe(parcels):
    view = ScoreScatter(parcels)
    view.mode = "lasso"
    assert view.figure.interaction is view._lasso and not view._brush.active  # the mouse goes to the lasso
    assert len(view._probe.x) == parcels.n_samples  # the invisible line carries every row
    np.testing.assert_allclose(view._probe.x, _confidence(parcels), rtol=1e-6)
    assert view._probe.visible is False
    picked = np.array([4, 17, 4000, 4999])
    view._probe.selected = picked.astype(np.uint32)  # what the browser's lasso sends back
    np.testing.assert_array_equal(view.state.rows, picked)
    assert view.state.origin_name == "score scatter"
    view._probe.selected = None  # lasso deleted in the browser
    assert view.state.rows.size == 0
    view.mode = "rectangle"
    assert view.figure.interaction is None and view._brush.active  # the rectangle brush takes the mouse again


def test_scatter_axes_and_colours(parcels):
    view = ScoreScatter(parcels, x="margin", y="true_probability", color="true class")
    p = _softmax(parcels)
    top2 = np.sort(p, axis=1)[:, -2:]
    np.testing.assert_allclose(view.column(view.x_score), top2[:, 1] - top2[:, 0], atol=1e-9)
    y = np.asarray(parcels.labels)
    np.testing.assert_allclose(view.column(view.y_score), p[np.arange(len(y)), y], atol=1e-9)
    np.testing.assert_array_equal(view.point_colors, np.asarray(CLASS_COLORS)[y % len(CLASS_COLORS)])
    view.color_by = "correct / wrong"
    correct = p.argmax(axis=1) == y
    np.testing.assert_array_equal(view.point_colors, np.where(correct, RIGHT, WRONG))
    view.x_score = "energy"
    # energy = -logsumexp(z) at T = 1 (scipy.special.logsumexp)
    energy = -special.logsumexp(np.asarray(parcels.logits, dtype=np.float64), axis=1)
    np.testing.assert_allclose(view.column("energy"), energy, rtol=1e-9)
    lo, hi = view._sx.min, view._sx.max
    assert lo < energy.min() and hi > energy.max()  # the axis holds every row
    with pytest.raises(ParameterError, match="not a score"):
        ScoreScatter(parcels, x="loudness")
    with pytest.raises(ParameterError, match="not offered"):
        ScoreScatter(parcels, color="by mood")
    with pytest.raises(ParameterError, match="resolution"):
        ScoreScatter(parcels, resolution=(4, 4))


def test_scatter_follows_temperature(parcels):
    view = ScoreScatter(parcels)
    before = view._pixels.copy()
    view.state.temperature = 2.5
    np.testing.assert_allclose(view.column("confidence"), _confidence(parcels, 2.5), rtol=1e-9)
    assert view._sx.max >= _confidence(parcels, 2.5).max()
    assert not np.array_equal(before, view._pixels)
    # the brush at the new temperature selects by the new scores
    rows = view.select_box((0.2, 0.5), (0.0, 10.0))
    conf = _confidence(parcels, 2.5)
    np.testing.assert_array_equal(rows, np.flatnonzero((conf >= 0.2) & (conf <= 0.5)))


def test_scatter_without_labels_offers_only_label_free_scores():
    z = np.random.default_rng(3).normal(size=(40, 4))
    view = ScoreScatter(LogitFrame(z))
    assert "true_probability" not in view.scores_offered and "confidence" in view.scores_offered
    assert view.colors_offered == ("predicted class",)
    np.testing.assert_array_equal(view.point_colors, np.asarray(CLASS_COLORS)[z.argmax(axis=1)])


def test_views_check_their_arguments(parcels):
    with pytest.raises(InputTypeError, match="LogitFrame"):
        ScoreScatter(np.zeros((3, 2)))
    with pytest.raises(ParameterError, match="5000"):
        ConfidenceHistogram(parcels, SharedState(10))
    with pytest.raises(InputTypeError, match="SharedState"):
        ConfusionHeatmap(parcels, state="everything")


# --------------------------------------------------------------------------- linking


def test_selection_from_another_view_is_highlighted_without_feedback(parcels):
    state = SharedState(parcels.n_samples)
    rec = Recorder(state)
    scatter = ScoreScatter(parcels, state)
    hist = ConfidenceHistogram(parcels, state)
    conf = _confidence(parcels)

    hist.select_interval(0.2, 0.4)
    assert rec.calls == ["histogram"]  # the scatter only redraws; it writes nothing back
    expected = np.flatnonzero((conf >= 0.2) & (conf <= 0.4))
    np.testing.assert_array_equal(state.rows, expected)
    assert _alpha_at(scatter, int(expected[0])) > int(255 * FADED) + 1  # drawn opaque in the scatter

    # a scatter brush replaces the selection; the histogram's own interval is dropped, not re-applied
    scatter.select_box((0.5, 1.0), (0.0, 5.0))
    assert rec.calls == ["histogram", "score scatter"]
    assert hist._interval is None
    # the browser answers the reset of the histogram brush with an empty interval: no write
    hist._brush.selected = None
    assert rec.calls == ["histogram", "score scatter"]
    assert state.origin_name == "score scatter"
    # the same for the scatter's brush after another view selects
    scatter._brush.box = [0.5, 1.0, 0.0, 5.0]  # the rectangle the browser shows
    n_calls = len(rec.calls)
    hist.select_interval(0.6, 0.9)
    assert scatter.brush_box is None  # another view selected: the rectangle is removed
    scatter._brush.box = []  # the browser's empty box after that
    assert len(rec.calls) == n_calls + 1 and state.origin_name == "histogram"


def test_own_brush_removed_clears_own_selection(parcels):
    view = ConfidenceHistogram(parcels)
    view._brush.selected = np.array([0.3, 0.6])
    assert view.state.rows.size > 0 and view.state.origin_name == "histogram"
    view._brush.selected = None
    assert view.state.rows.size == 0


# --------------------------------------------------------------------------- histogram


def test_histogram_interval_rows_equal_numpy_mask(parcels):
    view = ConfidenceHistogram(parcels, bins=20)
    conf = _confidence(parcels)  # scipy softmax
    view._brush.brushing = True
    view._brush.selected = np.array([0.55, 0.25])  # a brush dragged right to left
    assert view.state.rows.size == 0
    view._brush.brushing = False
    np.testing.assert_array_equal(view.state.rows, np.flatnonzero((conf >= 0.25) & (conf <= 0.55)))


def test_histogram_counts_match_numpy_histogram(parcels):
    view = ConfidenceHistogram(parcels, bins=25)
    conf = _confidence(parcels)
    correct = _softmax(parcels).argmax(axis=1) == np.asarray(parcels.labels)
    edges = np.histogram_bin_edges(conf, bins=25)
    np.testing.assert_allclose(view.edges, edges, rtol=1e-9)
    right, wrong = np.histogram(conf[correct], edges)[0], np.histogram(conf[~correct], edges)[0]
    np.testing.assert_array_equal(view._bars.y, np.stack([right, wrong]))
    assert view._bars.y.sum() == parcels.n_samples
    # a selection elsewhere is drawn as its own counts
    rows = np.arange(0, parcels.n_samples, 7)
    view.state.select(rows, origin="test")
    sel_right = np.histogram(conf[rows][correct[rows]], edges)[0]
    sel_wrong = np.histogram(conf[rows][~correct[rows]], edges)[0]
    np.testing.assert_array_equal(view._sel_bars.y, np.stack([sel_right, sel_wrong]))
    assert view._sel_bars.visible and view._bars.opacities == [0.3, 0.3]
    view.state.clear("test")
    assert not view._sel_bars.visible
    # the count axis ends at the tallest bar drawn: the tallest stack (numpy.histogram of all confidences),
    # or side by side the tallest single bar; a selection leaves it where it is
    assert view._sy.min == 0 and view._sy.max == np.histogram(conf, edges)[0].max()
    view.state.select(rows, origin="test")
    assert view._sy.max == np.histogram(conf, edges)[0].max()
    view.layout_mode = "side by side"
    assert view._sy.max == max(right.max(), wrong.max())


def test_histogram_other_score_and_temperature(parcels):
    view = ConfidenceHistogram(parcels, score="entropy", bins=10, layout_mode="side by side")
    assert view._bars.type == "grouped"
    ent = _entropy(parcels, 1.0)
    rows = view.select_interval(1.0, 2.0)
    np.testing.assert_array_equal(rows, np.flatnonzero((ent >= 1.0) & (ent <= 2.0)))
    view.state.temperature = 0.5
    ent_half = _entropy(parcels, 0.5)
    np.testing.assert_allclose(view.edges, np.histogram_bin_edges(ent_half, bins=10), rtol=1e-6, atol=1e-9)
    np.testing.assert_array_equal(view._bars.y.sum(axis=0), np.histogram(ent_half, view.edges)[0])
    with pytest.raises(ParameterError, match="bins"):
        ConfidenceHistogram(parcels, bins=0)


# --------------------------------------------------------------------------- confusion


def test_confusion_cell_row_column_against_sklearn(mailroom):
    view = ConfusionHeatmap(mailroom)
    y = np.asarray(mailroom.labels)
    pred = _softmax(mailroom).argmax(axis=1)
    ref = sk_confusion_matrix(y, pred, labels=range(10))  # scikit-learn
    np.testing.assert_array_equal(view.aggregated, ref)
    np.testing.assert_array_equal(view._grid.color, ref.astype(float))
    for i, j in [(4, 9), (3, 8), (8, 1), (0, 0)]:
        rows = view.select_cell(i, j)
        assert rows.size == ref[i, j]
        assert np.all(y[rows] == i) and np.all(pred[rows] == j)
    # a click in the browser sends the cell's row and column numbers
    view._on_cell_click(view._grid, {"event": "element_click", "data": {"rowNum": 4, "columnNum": 9}})
    assert view.state.rows.size == ref[4, 9] and view.state.origin_name == "confusion matrix"
    assert view.clicked == (4, 9) and not view._row_button.disabled
    view._row_button.click()
    assert view.state.rows.size == ref[4].sum() and np.all(y[view.state.rows] == 4)
    view._col_button.click()
    assert view.state.rows.size == ref[:, 9].sum() and np.all(pred[view.state.rows] == 9)
    assert view.select_row("seven").size == ref[7].sum()
    assert view.select_column("eight").size == ref[:, 8].sum()
    with pytest.raises(ClassNameError):
        view.select_cell("eleven", 0)
    with pytest.raises(ParameterError, match="other"):
        view.select_cell(None, 0)


def test_confusion_row_shares_against_sklearn(mailroom):
    view = ConfusionHeatmap(mailroom, normalize=True)
    y = np.asarray(mailroom.labels)
    pred = np.asarray(mailroom.logits).argmax(axis=1)
    ref = sk_confusion_matrix(y, pred, normalize="true")  # scikit-learn's row normalisation
    np.testing.assert_allclose(view._grid.color, ref, rtol=1e-12)
    view.hide_diagonal = True
    np.testing.assert_allclose(np.diag(view._grid.color), 0.0)
    np.testing.assert_allclose(view._grid.color[0, 1:], ref[0, 1:], rtol=1e-12)


def test_confusion_highlights_cells_of_a_selection(mailroom):
    view = ConfusionHeatmap(mailroom)
    y = np.asarray(mailroom.labels)
    pred = np.asarray(mailroom.logits).argmax(axis=1)
    rows = np.array([0, 5, 10, 11, 300, 1796])
    view.state.select(rows, origin="test")
    expected = sorted({(int(y[r]), int(pred[r])) for r in rows})
    assert view.outlined == expected
    view.state.clear("test")
    assert view.outlined == [] and not view._outline.visible


def test_confusion_pairs_within_top_k_against_torch(parcels):
    view = ConfusionHeatmap(parcels)
    z = torch.from_numpy(np.asarray(parcels.logits))
    y = torch.from_numpy(np.asarray(parcels.labels))
    for k in (1, 2, 3):
        view.k = k
        assert len(view.pairs) == view.n_pairs
        top = torch.topk(z, k, dim=1).indices  # torch.topk as the reference
        counts = [p.count for p in view.pairs]
        assert counts == sorted(counts, reverse=True)
        for pair in view.pairs[:4]:
            in_top = ((y == pair.true) & (top == pair.other).any(dim=1)).numpy()
            assert pair.count == int(in_top.sum())
            rows = view.select_pair(pair.true, pair.other)
            np.testing.assert_array_equal(rows, np.flatnonzero(in_top))
        # no off-diagonal pair outside the list has a larger count
        full = torch.zeros(12, 12, dtype=torch.long)
        full.index_put_((y.repeat_interleave(k), top.reshape(-1)), torch.ones(len(y) * k, dtype=torch.long), True)
        full.fill_diagonal_(0)
        assert int(full.max()) == counts[0]
    # each pair is a clickable button whose text shows the class names literally
    texts = [b.description for b in view._pair_box.children]
    assert len(texts) == view.n_pairs


def test_confusion_with_1000_classes_shows_top_30_and_other():
    rng = np.random.default_rng(5)
    n, k = 30_000, 1000
    y = rng.integers(0, k, n)
    z = rng.normal(size=(n, k)).astype(np.float32)
    z[np.arange(n), y] += 3.5
    frame = LogitFrame(z, labels=y, classes=[f"route {i}" for i in range(k)])
    view = ConfusionHeatmap(frame, max_classes=30)
    assert view.n_positions == 31 and view._grid.color.shape == (31, 31)
    assert view.position_names[-1] == "other (970 classes)"
    pred = z.argmax(axis=1)
    ref = sk_confusion_matrix(y, pred, labels=range(k))  # scikit-learn
    off = ref.copy()
    np.fill_diagonal(off, 0)
    errors = off.sum(axis=0) + off.sum(axis=1)
    # the 30 drawn classes are those with the most errors (ties by class index)
    order = sorted(range(k), key=lambda c: (-errors[c], c))[:30]
    np.testing.assert_array_equal(view.shown_classes, sorted(order))
    shown = np.asarray(sorted(order))
    rest = np.setdiff1d(np.arange(k), shown)
    agg = view.aggregated
    np.testing.assert_array_equal(agg[:30, :30], ref[np.ix_(shown, shown)])
    np.testing.assert_array_equal(agg[:30, 30], ref[np.ix_(shown, rest)].sum(axis=1))
    np.testing.assert_array_equal(agg[30, :30], ref[np.ix_(rest, shown)].sum(axis=0))
    assert agg[30, 30] == ref[np.ix_(rest, rest)].sum()
    assert agg.sum() == n
    # clicking the "other"/"other" cell selects exactly those samples
    rows = view.select_position(30, 30)
    assert rows.size == agg[30, 30]
    assert np.all(np.isin(y[rows], rest)) and np.all(np.isin(pred[rows], rest))
    # a class not drawn on its own still selects its own samples exactly
    c = int(rest[0])
    assert view.select_cell(c, c).size == ref[c, c]
    assert view.select_row(None).size == ref[rest].sum()
    # tick labels: 31 of them, never 1000
    assert len(view._ax_row.tick_labels) == 31


def test_confusion_class_names_reach_the_front_end_as_plain_text(parcels):
    view = ConfusionHeatmap(parcels)
    # bqplot draws tick labels as SVG text (d3 .text()); the name must arrive unchanged, not escaped twice
    assert view.position_names[3] == XSS and view.tick_labels[3] == short_label(XSS)
    assert view._ax_row.tick_labels[XSS] == short_label(XSS) and view._ax_col.tick_labels[XSS] == short_label(XSS)
    view._on_cell_click(view._grid, {"data": {"rowNum": 3, "columnNum": 0}})
    assert short_label(XSS) in view._row_button.description  # ipywidgets Button text is set as text, not HTML
    assert XSS in view._row_button.tooltip


def test_confusion_without_labels_explains():
    view = ConfusionHeatmap(LogitFrame(np.zeros((4, 3))))
    assert "needs labels" in view.children[0].value


# --------------------------------------------------------------------------- dial


def test_dial_fit_matches_scipy_minimiser_and_sets_state(mailroom):
    dial = TemperatureDial(mailroom)
    fit = dial.fit()
    z = np.asarray(mailroom.logits, dtype=np.float64)
    y = np.asarray(mailroom.labels)

    def nll(t: float) -> float:
        return float(-special.log_softmax(z / t, axis=1)[np.arange(len(y)), y].mean())

    ref = optimize.minimize_scalar(nll, bounds=(0.05, 20), method="bounded", options={"xatol": 1e-7})
    assert fit.temperature == pytest.approx(ref.x, rel=1e-3)
    assert dial.state.temperature == fit.temperature
    assert dial.slider.value == pytest.approx(fit.temperature, rel=0.03)  # slider steps are 0.01 in log10
    assert f"{fit.temperature:.3g}" in dial.readout.value


def test_dial_slider_and_state_stay_in_step(mailroom):
    state = SharedState(mailroom.n_samples)
    dial = TemperatureDial(mailroom, state)
    dial.slider.value = 2.0
    assert state.temperature == pytest.approx(2.0)
    state.temperature = 0.5
    assert dial.slider.value == pytest.approx(0.5)
    # the slider spans the accepted range (parameters.RANGES), so any accepted temperature shows as it is
    state.temperature = 100.0
    assert state.temperature == 100.0 and dial.slider.value == pytest.approx(100.0)
    assert "T = 100" in dial.readout.value and dial.box.value == 100.0
    dial.reset_button.click()
    assert state.temperature == 1.0
    with pytest.raises(ParameterError):
        TemperatureDial(mailroom, t_min=2.0, t_max=1.0)


def test_dial_without_labels_cannot_fit():
    dial = TemperatureDial(LogitFrame(np.zeros((3, 2))))
    assert dial.fit_button.disabled


def test_scatter_rings_the_focused_sample(parcels):
    view = ScoreScatter(parcels)
    assert view._focus_mark.visible is False
    view.state.focus = 1234
    assert view._focus_mark.visible is True
    assert view._focus_mark.x[0] == pytest.approx(_confidence(parcels)[1234], rel=1e-9)
    assert view._focus_mark.y[0] == pytest.approx(_entropy(parcels)[1234], rel=1e-9, abs=1e-12)
    view.y_score = "margin"
    p = np.sort(_softmax(parcels)[1234])
    assert view._focus_mark.y[0] == pytest.approx(p[-1] - p[-2], abs=1e-9)
    view.state.focus = None
    assert view._focus_mark.visible is False


def test_hidden_diagonal_keeps_confusions_inside_other():
    rng = np.random.default_rng(8)
    n, k = 6000, 60
    y = rng.integers(0, k, n)
    z = rng.normal(size=(n, k)).astype(np.float32)
    z[np.arange(n), y] += 2.0
    view = ConfusionHeatmap(LogitFrame(z, labels=y), max_classes=12)
    ref = sk_confusion_matrix(y, z.argmax(axis=1), labels=range(k))  # scikit-learn
    rest = np.setdiff1d(np.arange(k), view.shown_classes)
    inner = ref[np.ix_(rest, rest)]
    view.hide_diagonal = True
    m = view.matrix()
    assert np.all(np.diag(m)[:-1] == 0)
    assert m[-1, -1] == inner.sum() - np.trace(inner) > 0  # other classes mistaken for each other
    view.normalize = True
    assert view.matrix()[-1, -1] == pytest.approx((inner.sum() - np.trace(inner)) / ref[rest].sum())


def test_colour_modes_that_need_labels_are_refused_on_an_unlabelled_frame():
    # a clear TraitError naming the offered modes, instead of an error deep in the drawing code
    import traitlets

    from logitscope import LogitFrame
    from logitscope.widgets.scatter import ScoreScatter

    frame = LogitFrame(np.random.default_rng(3).normal(size=(40, 3)))
    view = ScoreScatter(frame)
    with pytest.raises(traitlets.TraitError, match="predicted class"):
        view.color_by = "correct / wrong"
    assert view.color_by == "predicted class"


def _label_map(mark) -> dict:  # type: ignore[no-untyped-def]
    """{(row class, column class): text} of a bqplot Label mark drawn on the heat map's scales."""
    rows, cols, texts = mark.y.tolist(), mark.x.tolist(), mark.text.tolist()
    return {(r, c): t for r, c, t in zip(rows, cols, texts, strict=True)}


def _outlined_squares(view: ConfusionHeatmap) -> list[tuple[int, int]]:
    """The (row, column) of each closed unit square of the confusion view's outline path (NaN between squares)."""
    x, y = np.asarray(view._outline.x, dtype=float), np.asarray(view._outline.y, dtype=float)
    n = view.n_positions
    squares = []
    for xs, ys in zip(np.split(x, np.flatnonzero(np.isnan(x))), np.split(y, np.flatnonzero(np.isnan(y))), strict=True):
        xs, ys = xs[~np.isnan(xs)], ys[~np.isnan(ys)]
        assert xs.size == 5 and xs[0] == xs[-1] and ys[0] == ys[-1]  # closed
        assert np.ptp(xs) == 1 and np.ptp(ys) == 1  # one cell wide and high
        squares.append((int(n - ys.max()), int(xs.min())))
    return sorted(squares)


def test_confusion_selection_is_outlined_with_its_counts(mailroom):
    view = ConfusionHeatmap(mailroom)
    y = np.asarray(mailroom.labels)
    pred = np.asarray(mailroom.logits).argmax(axis=1)
    ref = sk_confusion_matrix(y, pred, labels=range(10))  # scikit-learn
    rows = np.arange(0, mailroom.n_samples, 13)
    view.state.select(rows, origin="python")
    # the selected rows' own confusion matrix (scikit-learn) says which cells hold them and how many
    sel = sk_confusion_matrix(y[rows], pred[rows], labels=range(10))
    assert view.outlined == [(int(i), int(j)) for i, j in np.argwhere(sel > 0)]
    assert _outlined_squares(view) == view.outlined  # the one outline path goes round exactly those cells
    assert view._grid.selected is None and view._grid.unselected_style == {}  # no cell is restyled: nothing fades
    got = _label_map(view._selected_numbers)
    names = mailroom.classes
    for i, j in view.outlined:
        assert got[(names[i], names[j])] == f"{sel[i, j]:,} sel."
    # each cell still shows its own count
    assert view.cell_text[4][9] == f"{ref[4, 9]:,}"
    view.state.clear()
    assert view.outlined == [] and view._selected_numbers.visible is False


def test_confusion_hidden_diagonal_is_blank_not_zero(mailroom):
    view = ConfusionHeatmap(mailroom, normalize=True)
    y = np.asarray(mailroom.labels)
    pred = np.asarray(mailroom.logits).argmax(axis=1)
    ref = sk_confusion_matrix(y, pred, normalize="true")  # scikit-learn's row shares
    assert view.cell_text[3][3] == f"{ref[3, 3]:.2f}"
    view.hide_diagonal = True
    assert [view.cell_text[i][i] for i in range(10)] == [""] * 10
    assert view.cell_text[4][9] == f"{ref[4, 9]:.2f}"
    shown = _label_map(view._numbers)
    assert shown[("three", "three")] == "" and shown[("four", "nine")] == f"{ref[4, 9]:.2f}"


def test_confusion_whole_row_button_forgets_a_cleared_cell(mailroom):
    view = ConfusionHeatmap(mailroom)
    view.select_position(4, 9)
    assert view._row_button.description.startswith("whole row: true four") and not view._row_button.disabled
    view.state.clear()
    assert view.clicked is None and view._row_button.disabled
    assert view._row_button.description == view._col_button.description.replace("column", "row")
    view.select_position(2, 3)
    view.state.select([0, 1], origin="python")  # another view's selection: the clicked cell no longer applies
    assert view.clicked is None and view._row_button.disabled


def test_confusion_names_long_classes_in_full_where_it_cuts_them():
    long = "returns to sender, " * 12 + "depot"
    rng = np.random.default_rng(4)
    y = rng.integers(0, 3, 300)
    z = rng.normal(size=(300, 3))
    z[np.arange(300), y] += 1.5
    view = ConfusionHeatmap(LogitFrame(z, labels=y, classes=["letter", long, "parcel"]))
    assert view.tick_labels[1] == short_label(long) and len(view.tick_labels[1]) <= 24
    assert view._tooltip.fields == ["row", "column", "color"]  # the hovered cell names both classes in full
    assert list(view._grid.row) == ["letter", long, "parcel"]
    view.select_position(1, 1)
    assert view._row_button.tooltip == f"every sample of true class {long}"
    pair = next(b for b in view._pair_box.children if long[:5] in b.description)
    assert long in pair.tooltip and long not in pair.description
