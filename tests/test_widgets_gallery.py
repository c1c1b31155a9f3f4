"""SampleGallery, SampleCard, RelabelQueue and DoubtfulLabelPicker: traits and callbacks, no browser.

Numbers are checked against scipy (``scipy.special.softmax``, ``scipy.stats.entropy``) on the
mail-room demo, whose images are scikit-learn's bundled 8 x 8 digits; image encoding against
numpy's ``np.kron`` and Pillow's decoder.
"""

from __future__ import annotations

import io
import json
import math
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from PIL import Image
from scipy import special, stats

import logitscope
from logitscope import LabelError, LogitFrame, ParameterError
from logitscope.analysis import rank_doubtful_labels
from logitscope.widgets import DoubtfulLabelPicker, RelabelQueue, SampleCard, SampleGallery, SharedState
from logitscope.widgets import relabel as relabel_widgets
from logitscope.widgets._assets import esm
from logitscope.widgets.thumbnails import ThumbnailCache, encode_png, snippet

HOSTILE = "<img src=x onerror=alert(1)>"


@pytest.fixture(scope="module")
def helpdesk() -> LogitFrame:
    return logitscope.load_demo("helpdesk")


def scipy_probs(frame: LogitFrame, t: float) -> np.ndarray:
    """Reference probabilities: scipy.special.softmax in float64."""
    return special.softmax(np.asarray(frame.logits, dtype=np.float64) / t, axis=1)


def decode(png: bytes) -> np.ndarray:
    return np.asarray(Image.open(io.BytesIO(png)))


# ---------------------------------------------------------------------------------- gallery


def test_page_follows_selection_and_sort(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    gallery = SampleGallery(mailroom, state, page_size=10, sort_by="entropy", descending=True)
    rows = np.random.default_rng(3).choice(mailroom.n_samples, size=57, replace=False)
    state.select(rows, origin="scatter")
    ent = stats.entropy(scipy_probs(mailroom, 1.0), axis=1)  # reference: scipy.stats.entropy
    sel = np.sort(rows)
    expected = sel[np.argsort(-ent[sel], kind="stable")]
    assert gallery.page == 0 and gallery.n_pages == 6 and gallery.n_shown == 57
    assert gallery.page_rows.tolist() == expected[:10].tolist()
    assert [t["row"] for t in gallery.tiles] == expected[:10].tolist()
    assert gallery.scope == "57 selected (scatter)"
    gallery.next_page()
    assert gallery.page_rows.tolist() == expected[10:20].tolist()
    gallery.page = 5  # the front end sets the trait
    assert gallery.page_rows.tolist() == expected[50:].tolist() and len(gallery.tiles) == 7
    gallery.next_page()  # past the end: stays
    assert gallery.page == 5
    # toggling the direction goes back to page 0, low entropy first
    gallery.descending = False
    assert gallery.page == 0
    assert gallery.page_rows.tolist() == sel[np.argsort(ent[sel], kind="stable")][:10].tolist()
    # a new selection starts at page 0 again
    gallery.page = 3
    state.select(rows[:5], origin="histogram")
    assert gallery.page == 0 and gallery.n_pages == 1 and gallery.scope == "5 selected (histogram)"
    assert set(gallery.page_rows.tolist()) == set(rows[:5].tolist())


def test_all_samples_when_nothing_selected(mailroom: LogitFrame) -> None:
    gallery = SampleGallery(mailroom, page_size=24)
    conf = scipy_probs(mailroom, 1.0).max(axis=1)  # reference confidence: max of scipy's softmax
    expected = np.argsort(conf, kind="stable")
    assert gallery.scope == f"all {mailroom.n_samples:,} samples"
    assert gallery.n_pages == math.ceil(mailroom.n_samples / 24)
    assert len(gallery.tiles) == 24  # only the visible page goes to the browser
    seen = []
    for page in range(gallery.n_pages):
        gallery.page = page
        seen.extend(gallery.page_rows.tolist())
    assert seen == expected.tolist()
    assert np.array_equal(gallery.order, expected)


def test_tiles_top3_against_scipy_and_follow_temperature(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    gallery = SampleGallery(mailroom, state, page_size=12, sort_by="row")
    for t in (1.0, 2.5, 0.4):
        state.temperature = t
        p = scipy_probs(mailroom, t)  # reference: scipy.special.softmax(z / T)
        for tile in gallery.tiles:
            r = tile["row"]
            top = np.argsort(-p[r], kind="stable")[:3]
            assert [name for name, _ in tile["top"]] == [mailroom.classes[j] for j in top]
            np.testing.assert_allclose([v for _, v in tile["top"]], p[r, top], rtol=1e-9, atol=1e-12)
            assert tile["predicted"] == mailroom.classes[int(p[r].argmax())]
            assert tile["label"] == mailroom.classes[int(mailroom.labels[r])]
            assert tile["correct"] == (int(p[r].argmax()) == int(mailroom.labels[r]))
            assert tile["id"] == str(mailroom.ids[r])


def test_sort_order_follows_temperature(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    gallery = SampleGallery(mailroom, state, page_size=30, sort_by="confidence")
    state.temperature = 3.0
    conf = scipy_probs(mailroom, 3.0).max(axis=1)
    assert gallery.page_rows.tolist() == np.argsort(conf, kind="stable")[:30].tolist()
    np.testing.assert_allclose([t["value"] for t in gallery.tiles], np.sort(conf)[:30], rtol=1e-9)


def test_focus_links_both_ways(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    gallery = SampleGallery(mailroom, state)
    card = SampleCard(mailroom, state)
    gallery.focus = 17  # what a click on a tile does
    assert state.focus == 17 and card.sample["row"] == 17
    state.focus = 3  # another view sets the focus
    assert gallery.focus == 3
    gallery.focus = mailroom.n_samples + 5  # out of range from the front end: ignored
    assert gallery.focus == 3 and state.focus == 3
    state.focus = None
    assert gallery.focus is None and card.sample == {}


def test_sort_columns_and_bad_arguments(mailroom: LogitFrame) -> None:
    gallery = SampleGallery(mailroom)
    assert "row" in gallery.sort_columns and "true_probability" in gallery.sort_columns
    assert "predicted" not in gallery.sort_columns
    with pytest.raises(ParameterError, match="sort_by must be one of"):
        gallery.sort_by = "nonsense"
    with pytest.raises(ParameterError, match="sort_by must be one of"):
        SampleGallery(mailroom, sort_by="nonsense")
    with pytest.raises(ParameterError, match="page_size"):
        SampleGallery(mailroom, page_size=0)
    with pytest.raises(ParameterError, match="state is for 10 samples"):
        SampleGallery(mailroom, SharedState(10))
    unlabelled = mailroom.with_labels(None)
    g = SampleGallery(unlabelled, page_size=4)
    assert "true_probability" not in g.sort_columns
    assert all(t["label"] is None and t["correct"] is None for t in g.tiles)


# ---------------------------------------------------------------------------------- previews


def test_digit_thumbnail_is_nearest_neighbour_upscale(mailroom: LogitFrame) -> None:
    gallery = SampleGallery(mailroom, page_size=6, sort_by="row")
    tile = gallery.tiles[0]
    img = decode(tile["png"])
    assert img.shape == (64, 64) and (tile["width"], tile["height"]) == (64, 64)
    # reference: each 8 x 8 pixel becomes an 8 x 8 block (np.kron with a block of ones)
    expected = np.kron(mailroom.payload.data[0], np.ones((8, 8), dtype=np.uint8))
    assert np.array_equal(img, expected)


def test_image_kinds_and_cache(tmp_path: Path) -> None:
    rng = np.random.default_rng(0)
    rgb = rng.random((3, 5, 7, 3))  # floats in [0, 1]
    t = encode_png(rgb[0], size=64)
    img = decode(t.png)
    assert img.shape == (45, 63, 3)  # whole factor 9: 7 * 9 = 63 <= 64
    np.testing.assert_array_equal(img[::9, ::9], np.round(rgb[0] * 255).astype(np.uint8))
    big = encode_png(np.zeros((300, 150), dtype=np.uint8), size=64)
    assert (big.width, big.height) == (32, 64)  # shrunk to fit, aspect kept

    paths = []
    for i in range(3):
        p = tmp_path / f"parcel-{i}.png"
        Image.fromarray((rgb[i] * 255).astype(np.uint8)).save(p)
        paths.append(p)
    paths[2] = tmp_path / "gone.png"  # a missing file must not break the gallery
    deep = tmp_path / "deep.png"  # 16-bit greyscale, stretched to 0..255
    Image.fromarray(np.array([[0, 1000], [3000, 4000]], dtype=np.uint16)).save(deep)
    assert decode(
        ThumbnailCache(LogitFrame(np.zeros((1, 2)), image_paths=[deep]).payload, size=2).get(0).png
    ).tolist() == [
        [0, 64],
        [191, 255],
    ]  # (v - 0) * 255 / 4000, rounded: numpy arithmetic on the same values
    frame = LogitFrame(rng.normal(size=(3, 4)), labels=[0, 1, 2], image_paths=paths)
    gallery = SampleGallery(frame, sort_by="row")
    assert gallery.tiles[0]["png"] is not None and gallery.tiles[0]["error"] is None
    assert gallery.tiles[2]["png"] is None and "file not found" in gallery.tiles[2]["error"]

    cache = ThumbnailCache(frame.payload, size=32, max_items=2)
    cache.get(0), cache.get(1), cache.get(0), cache.get(2)
    assert (cache.hits, cache.misses, len(cache)) == (1, 3, 2)
    cache.get(1)  # row 1 was least recently used, so it was dropped
    assert cache.misses == 4


def test_text_snippets(helpdesk: LogitFrame) -> None:
    gallery = SampleGallery(helpdesk, page_size=50, sort_by="row")
    for tile in gallery.tiles:
        full = " ".join(helpdesk.payload.data[tile["row"]].split())
        assert tile["png"] is None and len(tile["text"]) <= 161
        assert full.startswith(tile["text"].rstrip("…"))
    long = "word " * 100
    assert snippet(long).endswith("…") and len(snippet(long)) <= 161


# ---------------------------------------------------------------------------------- card


def test_card_numbers_against_scipy(mailroom: LogitFrame) -> None:
    state = SharedState(mailroom.n_samples)
    card = SampleCard(mailroom, state)
    for t, row in ((1.0, 42), (2.0, 42), (0.5, 1000)):
        state.temperature = t
        state.focus = row
        s = card.sample
        p = scipy_probs(mailroom, t)[row]  # reference: scipy.special.softmax
        order = np.argsort(-p, kind="stable")
        assert [name for name, *_ in s["probabilities"]] == [mailroom.classes[j] for j in order]
        np.testing.assert_allclose([v for _, v, *_ in s["probabilities"]], p[order], rtol=1e-9, atol=1e-12)
        scores = dict(s["scores"])
        assert scores["confidence"] == pytest.approx(p.max(), rel=1e-9)
        assert scores["entropy"] == pytest.approx(stats.entropy(p), rel=1e-9)  # scipy.stats.entropy
        assert scores["margin"] == pytest.approx(p[order[0]] - p[order[1]], rel=1e-7, abs=1e-12)
        assert scores["label probability"] == pytest.approx(p[mailroom.labels[row]], rel=1e-9)
        z = np.asarray(mailroom.logits[row], dtype=np.float64)
        assert scores["energy"] == pytest.approx(-t * special.logsumexp(z / t), rel=1e-9)  # Liu et al. 2020
        assert card.temperature == t
        meta = dict(s["meta"])
        assert meta["desk"] == mailroom.meta["desk"][row]
        assert meta["keyed_before_flip"] == str(mailroom.meta["keyed_before_flip"][row])
        assert decode(s["png"]).shape == (224, 224)


def test_card_top_k_and_label_outside() -> None:
    rng = np.random.default_rng(11)
    k = 30
    z = rng.normal(size=(5, k)) * 2
    labels = np.argsort(z, axis=1)[:, 0]  # the least probable class: outside the top 20
    frame = LogitFrame(z, labels=labels, classes=[f"route {i}" for i in range(k)], texts=["a"] * 5)
    card = SampleCard(frame, top=20)
    card.state.focus = 2
    s = card.sample
    assert len(s["probabilities"]) == 20 and s["n_classes"] == 30
    p = special.softmax(z[2])
    name, prob, rank = s["label_outside"]
    assert name == f"route {labels[2]}" and rank == 30 and prob == pytest.approx(p.min(), rel=1e-9)
    assert s["text"] == "a" and s["png"] is None


# ---------------------------------------------------------------------------------- relabel queue


def msg(widget, **content) -> None:
    """Deliver a custom message as the front end would (ipywidgets' dispatch to on_msg handlers)."""
    widget._handle_custom_msg(content, [])


def test_queue_marks_selection_and_focus(mailroom: LogitFrame, tmp_path: Path) -> None:
    path = tmp_path / "queue.json"
    state = SharedState(mailroom.n_samples)
    queue = RelabelQueue(mailroom, state, path=path)
    assert queue.path == str(path.resolve()) and queue.n_marks == 0
    rows = np.array([11, 25, 300, 1500])
    state.select(rows, origin="scatter")
    assert queue.n_selected == 4
    msg(queue, action="mark", scope="selection", suggested="", note="desk 3 batch")
    marks = queue.marks
    assert marks["row"].tolist() == rows.tolist() and set(marks["note"]) == {"desk 3 batch"}
    # default suggestion: the most probable class other than the given label (scipy softmax)
    p = scipy_probs(mailroom, 1.0)[rows]
    p[np.arange(rows.size), mailroom.labels[rows]] = -1
    assert marks["suggested_label"].tolist() == [mailroom.classes[j] for j in p.argmax(axis=1)]
    assert marks["given_label"].tolist() == [mailroom.classes[j] for j in mailroom.labels[rows]]

    state.focus = 77
    assert queue.focus_id == "card-00077"
    msg(queue, action="mark", scope="focus", suggested="two", note="")
    assert queue.marks.iloc[-1][["id", "suggested_label"]].tolist() == ["card-00077", "two"]
    assert queue.items[0]["id"] == "card-00077"  # the list shows the latest first
    on_disk = json.loads(path.read_text(encoding="utf-8"))
    assert [m["id"] for m in on_disk["marks"]] == [*(f"card-{r:05d}" for r in rows), "card-00077"]

    msg(queue, action="unmark", id="card-00025")
    assert "card-00025" not in queue.marks["id"].tolist() and queue.n_marks == 4
    msg(queue, action="export")
    back = pd.read_csv(path.with_suffix(".csv"))
    assert back["id"].tolist() == queue.marks["id"].tolist()
    assert "exported 4 marks" in queue.status

    msg(queue, action="focus", row=300)  # clicking a mark's id shows it in the card
    assert state.focus == 300

    # a kernel restart: a new queue on the same path has every mark back
    again = RelabelQueue(mailroom, SharedState(mailroom.n_samples), path=path)
    pd.testing.assert_frame_equal(again.marks, queue.marks)
    assert "reopened 4 marks" in again.status


def test_queue_python_api_and_errors(mailroom: LogitFrame, tmp_path: Path, monkeypatch) -> None:
    queue = RelabelQueue(mailroom, path=tmp_path / "api.json")
    queue.mark(5, suggested="three", note="open loop")
    queue.mark(np.array([7, 8]), suggested=1)
    assert queue.marks["suggested_label"].tolist() == ["three", "one", "one"]
    queue.unmark(["card-00007"])
    queue.unmark("card-00008")
    assert queue.marks["id"].tolist() == ["card-00005"]
    with pytest.raises(ParameterError, match="nothing to mark"):
        queue.mark([])
    with pytest.raises(ParameterError, match="rows must lie in"):
        queue.mark([mailroom.n_samples])
    with pytest.raises(logitscope.ClassNameError):
        queue.mark(3, suggested="eleven")
    msg(queue, action="mark", scope="selection", suggested="", note="")  # nothing selected
    assert queue.status.startswith("nothing to mark")
    msg(queue, action="unmark", id="card-01234")  # not marked: reported, not raised
    assert queue.status.startswith("not done:")
    monkeypatch.setattr(relabel_widgets, "UI_MARK_LIMIT", 1000)
    queue.state.select(np.arange(1001), origin="python")  # a click on "selection" this large is refused
    msg(queue, action="mark", scope="selection", suggested="", note="")
    assert queue.status.startswith("not marked: the selection holds 1,001 samples, more than 1,000")
    assert queue.marks["id"].tolist() == ["card-00005"]


def test_queue_default_path_in_current_folder(mailroom: LogitFrame, tmp_path: Path, monkeypatch) -> None:
    monkeypatch.chdir(tmp_path)
    queue = RelabelQueue(mailroom)
    name = Path(queue.path).name
    assert re.fullmatch(r"relabel-zero-to-nine-1797-samples-[0-9a-f]{8}\.json", name)
    assert Path(queue.path).parent == tmp_path.resolve()
    queue.mark(9)
    assert (tmp_path / name).exists()
    assert RelabelQueue(mailroom).marks["id"].tolist() == ["card-00009"]


def test_picker_selects_top_candidates(mailroom: LogitFrame, tmp_path: Path) -> None:
    state = SharedState(mailroom.n_samples)
    queue = RelabelQueue(mailroom, state, path=tmp_path / "picked.json")
    gallery = SampleGallery(mailroom, state)
    picker = DoubtfulLabelPicker(mailroom, state, method="given_probability", n=15, queue=queue)
    msg(picker, action="pick")
    # given-label probability: the 15 samples whose given label has the lowest probability (scipy softmax)
    p_label = scipy_probs(mailroom, 1.0)[np.arange(mailroom.n_samples), mailroom.labels]
    assert set(state.rows.tolist()) == set(np.argsort(p_label, kind="stable")[:15].tolist())
    assert state.origin_name == "doubtful-label picker"
    assert gallery.n_shown == 15 and gallery.scope == "15 selected (doubtful-label picker)"

    picker.method = "confident_learning"
    picker.n = 10
    state.temperature = 1.5
    picker.pick()
    ranking = rank_doubtful_labels(mailroom.logits, mailroom.labels, "confident_learning", temperature=1.5)
    assert state.rows.tolist() == np.sort(ranking.index[:10]).tolist()
    assert f"of {len(ranking)} flagged" in picker.status
    # the queue's default suggestions are now the pick's
    msg(queue, action="mark", scope="selection", suggested="", note="")
    got = dict(zip(queue.marks["row"].tolist(), queue.marks["suggested_label"].tolist(), strict=True))
    want = {int(r): mailroom.classes[int(c)] for r, c in zip(ranking.index[:10], ranking.suggested[:10], strict=True)}
    assert got == want
    with pytest.raises(ParameterError):
        picker.method = "guess"
    with pytest.raises(ParameterError):
        picker.n = 0


def test_picker_without_labels(mailroom: LogitFrame) -> None:
    picker = DoubtfulLabelPicker(mailroom.with_labels(None))
    assert picker.enabled is False and "no labels" in picker.status
    with pytest.raises(LabelError):
        picker.pick()
    msg(picker, action="pick")
    assert picker.status.startswith("not done:")


# ---------------------------------------------------------------------------------- escaping


def test_user_strings_reach_the_front_end_raw_and_js_uses_text_only(tmp_path: Path) -> None:
    z = np.array([[3.0, 0.0, 0.0], [0.0, 3.0, 0.0], [0.0, 0.0, 3.0]])
    frame = LogitFrame(
        z,
        labels=[1, 1, 2],
        classes=[HOSTILE, "shipping & <b>returns</b>", "quote \" and '"],
        ids=[HOSTILE + "-id", "T-2", "T-3"],
        meta=pd.DataFrame({"channel": [HOSTILE, "email", "chat"]}),
        texts=[HOSTILE + " printer broken", "a", "b"],
    )
    state = SharedState(3)
    gallery = SampleGallery(frame, state, sort_by="row")
    card = SampleCard(frame, state)
    queue = RelabelQueue(frame, state, path=tmp_path / "hostile.json")
    # Python sends the literal strings; the JS modules put them in the page with textContent
    # (escaping them in Python too would show "&lt;img" to the user).
    assert gallery.tiles[0]["id"] == HOSTILE + "-id" and gallery.tiles[0]["predicted"] == HOSTILE
    assert gallery.tiles[0]["text"].startswith(HOSTILE)
    state.focus = 0
    assert card.sample["predicted"] == HOSTILE and dict(card.sample["meta"])["channel"] == HOSTILE
    queue.mark(0, suggested=HOSTILE, note=HOSTILE)
    assert queue.items[0]["suggested_label"] == HOSTILE and queue.items[0]["note"] == HOSTILE
    assert queue.classes[0] == HOSTILE
    for name in ("gallery.js", "card.js", "relabel.js"):
        src = esm(name)
        for sink in ("innerHTML", "outerHTML", "insertAdjacentHTML", "document.write", "DOMParser", "eval("):
            assert sink not in src, f"{name} uses {sink}"
        assert "textContent" in src


def test_first_rows_in_order_equal_numpys_stable_sort():
    from logitscope.widgets.gallery import first_in_order

    rng = np.random.default_rng(5)
    for keys in (rng.normal(size=5000), rng.integers(0, 7, 5000).astype(float), np.r_[rng.normal(size=50), np.nan]):
        for m in (1, 12, 48, 700, keys.size, keys.size + 3):
            # reference: numpy's stable sort of every key (numpy.argsort, kind="stable")
            np.testing.assert_array_equal(first_in_order(keys, m), np.argsort(keys, kind="stable")[:m])


def test_a_large_selection_pages_in_the_order_of_a_full_sort(mailroom):
    gallery = SampleGallery(mailroom, page_size=12)
    conf = mailroom.sample_scores().confidence
    ref = np.argsort(conf, kind="stable")  # numpy.argsort: the display order of "low first"
    np.testing.assert_array_equal(gallery.page_rows, ref[:12])
    gallery.page = 40  # far past the first rows ranked
    np.testing.assert_array_equal(gallery.page_rows, ref[480:492])
    np.testing.assert_array_equal(gallery.order, ref)
