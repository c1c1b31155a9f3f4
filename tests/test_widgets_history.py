"""A dashboard that follows training: update in place, selection and marks by id, the epoch history.

Numbers of the history are checked against scikit-learn (accuracy_score, log_loss) and
torchmetrics (multiclass_calibration_error); the fitted temperature against scipy.optimize.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import optimize, special
from sklearn.metrics import accuracy_score, log_loss

from logitscope import ClassNameError, LogitFrame, ParameterError
from logitscope.widgets import Dashboard

pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning")


def _epoch(frame: LogitFrame, scale: float, seed: int, order: np.ndarray | None = None) -> LogitFrame:
    """The mail-room logits sharpened or flattened by ``scale`` plus noise, rows in ``order``: a later epoch."""
    rng = np.random.default_rng(seed)
    z = np.asarray(frame.logits, dtype=np.float64) * scale + rng.normal(scale=0.3, size=frame.logits.shape)
    order = np.arange(frame.n_samples) if order is None else order
    return LogitFrame(
        z[order],
        labels=frame.labels[order],
        classes=frame.classes,
        ids=frame.ids[order],
        images=frame.payload.data[order],
    )


def test_update_keeps_selection_focus_and_marks_by_id(mailroom: LogitFrame, tmp_path: Path) -> None:
    dash = Dashboard(mailroom, relabel_path=tmp_path / "marks.json")
    dash.selected = [3, 10, 42]
    dash.state.focus = 10
    dash.queue.mark([42], note="smudged")
    dash.state.temperature = 1.3
    order = np.random.default_rng(1).permutation(mailroom.n_samples)
    nxt = _epoch(mailroom, 1.2, seed=2, order=order)
    dash.update(nxt, "epoch 2")
    assert dash.frame is nxt and all(v.frame is nxt for v in dash.views)
    assert sorted(nxt.ids[dash.selected].tolist()) == sorted(mailroom.ids[[3, 10, 42]].tolist())
    assert nxt.ids[dash.state.focus] == mailroom.ids[10]
    assert dash.state.temperature == 1.3  # kept unless asked
    marks = dash.queue.marks
    assert marks["id"].tolist() == [mailroom.ids[42]] and marks["note"].tolist() == ["smudged"]
    # the views show the new frame: the gallery pages over the same selected samples
    assert sorted(nxt.ids[dash.gallery.page_rows].tolist()) == sorted(mailroom.ids[[3, 10, 42]].tolist())
    dash.update(_epoch(mailroom, 1.5, seed=3), temperature=1.0)
    assert dash.state.temperature == 1.0


def test_ids_missing_from_the_new_frame_drop_out_of_the_selection(mailroom: LogitFrame, tmp_path: Path) -> None:
    dash = Dashboard(mailroom, relabel_path=tmp_path / "m.json")
    dash.selected = [0, 1, 2]
    dash.state.focus = 0
    smaller = mailroom.subset(np.arange(1, 1000))
    dash.update(smaller)
    assert smaller.ids[dash.selected].tolist() == mailroom.ids[[1, 2]].tolist()
    assert dash.state.focus is None  # its sample is not in the new frame
    with pytest.raises(ClassNameError, match="same classes"):
        dash.update(LogitFrame(np.zeros((3, 10))))


def test_history_has_one_row_per_frame_with_reference_numbers(mailroom: LogitFrame, tmp_path: Path) -> None:
    torch = pytest.importorskip("torch")
    tm = pytest.importorskip("torchmetrics.functional.classification")
    dash = Dashboard(mailroom, relabel_path=tmp_path / "m.json", label="epoch 1")
    epochs = [_epoch(mailroom, s, seed=i) for i, s in enumerate((0.5, 1.0, 2.0))]
    for i, f in enumerate(epochs):  # as a training loop would call it
        dash.update(f, f"epoch {i + 2}")
    h = dash.history
    assert h["label"].tolist() == ["epoch 1", "epoch 2", "epoch 3", "epoch 4"]
    assert h["update"].tolist() == [0, 1, 2, 3]
    for row, f in zip(h.itertuples(), [mailroom, *epochs], strict=True):
        z = np.asarray(f.logits, dtype=np.float64)
        p = special.softmax(z, axis=1)  # scipy softmax
        assert row.accuracy == pytest.approx(accuracy_score(f.labels, p.argmax(1)))  # sklearn
        assert row.nll == pytest.approx(log_loss(f.labels, p), rel=1e-9)  # sklearn
        ece = tm.multiclass_calibration_error(torch.from_numpy(p), torch.from_numpy(f.labels), 10, n_bins=15)
        assert row.ece == pytest.approx(float(ece), abs=1e-6)  # torchmetrics
        res = optimize.minimize_scalar(  # scipy.optimize on sklearn's log_loss
            lambda lt, z=z, f=f: log_loss(f.labels, special.softmax(z / math.exp(lt), axis=1), labels=range(10)),
            bounds=(-5, 5),
            method="bounded",
            options={"xatol": 1e-9},
        )
        assert row.fitted_temperature == pytest.approx(math.exp(res.x), rel=1e-5)
    view = dash.history_view
    assert view.current == 3 and list(view.points["accuracy"].y) == pytest.approx(h["accuracy"].tolist())
    assert view.rings["nll"].x[0] == 3.0


def test_stepping_back_to_an_earlier_update(mailroom: LogitFrame, tmp_path: Path) -> None:
    dash = Dashboard(mailroom, relabel_path=tmp_path / "m.json", keep_frames=2)
    e1, e2 = _epoch(mailroom, 0.5, 1), _epoch(mailroom, 2.0, 2)
    dash.update(e1)
    dash.update(e2)
    assert len(dash.history) == 3
    # clicking the point of update 1 in the history (what bqplot sends) shows that frame again
    view = dash.history_view
    view._on_click(view.points["nll"], {"data": {"index": 1}})
    assert dash.frame is e1 and view.current == 1 and len(dash.history) == 3
    with pytest.raises(ParameterError, match="not kept"):
        dash.show_update(0)  # only the two most recent frames are kept
    view._on_click(view.points["nll"], {"data": {"index": 0}})
    assert "no longer kept" in view.note.value and dash.frame is e1
    with pytest.raises(ParameterError, match="keep_frames"):
        Dashboard(mailroom, relabel_path=tmp_path / "n.json", keep_frames=0)


def test_update_redraws_the_calibration_tab(mailroom: LogitFrame, tmp_path: Path) -> None:
    dash = Dashboard(mailroom, relabel_path=tmp_path / "m.json")
    panel = dash.calibration
    panel.use_random_split(0.5, seed=1)
    nxt = _epoch(mailroom, 2.0, seed=5)
    dash.update(nxt)
    assert panel.split is None and panel.diagram.finding.n == nxt.n_samples
    p = special.softmax(np.asarray(nxt.logits, dtype=np.float64) / dash.state.temperature, axis=1)
    assert panel.diagram.finding.nll == pytest.approx(log_loss(nxt.labels, p), rel=1e-9)  # sklearn
    dash.tabs.selected_index = 1  # the sweep was out of sight: it redraws when shown
    assert panel.sweep.finding.n == nxt.n_samples


def test_the_first_record_waits_for_the_history_and_equals_an_eager_one(mailroom: LogitFrame, tmp_path: Path) -> None:
    import datetime as dt

    from logitscope.findings import epoch_record

    def now() -> dt.datetime:
        return dt.datetime.now().astimezone().replace(microsecond=0)

    before = now()
    dash = Dashboard(mailroom, relabel_path=tmp_path / "m.json")
    after = now()
    eager = epoch_record(mailroom, 0, None, dash.state.binning).to_dict()
    dash.tabs.selected_index = 2  # the History tab: the first record is made now
    assert len(dash.history_view.points["accuracy"].y) == 1
    row = dash.history.iloc[0].to_dict()
    assert set(row) == set(eager)
    # made later, the record keeps the time its frame was shown: while the dashboard was built
    assert before <= dt.datetime.fromisoformat(row.pop("shown_at")) <= after
    eager.pop("shown_at")
    for key, value in eager.items():
        assert row[key] == value or (value != value and row[key] != row[key]), key  # NaN equals NaN here
    # the header's accuracy is the record's, and scikit-learn's (sklearn.metrics.accuracy_score)
    ref = accuracy_score(mailroom.labels, np.argmax(mailroom.logits, axis=1))
    assert row["accuracy"] == pytest.approx(ref) and f"accuracy {ref:.1%}" in dash._summary.value


def test_update_relabels_the_pair_buttons_and_their_clicks_follow(mailroom: LogitFrame, tmp_path: Path) -> None:
    from sklearn.metrics import confusion_matrix

    dash = Dashboard(mailroom, relabel_path=tmp_path / "m.json")
    before = list(dash.confusion._pair_box.children)
    nxt = _epoch(mailroom, 2.0, seed=5)
    dash.update(nxt)
    after = list(dash.confusion._pair_box.children)
    assert len(after) == len(before) and all(a is b for a, b in zip(before, after, strict=True))  # no new widgets
    # the first button names the new frame's largest confusion (scikit-learn's confusion_matrix)
    cm = confusion_matrix(nxt.labels, np.argmax(nxt.logits, axis=1), labels=range(nxt.n_classes))
    np.fill_diagonal(cm, 0)
    pair = dash.confusion.pairs[0]
    assert pair.count == cm.max() == cm[pair.true, pair.other]
    assert f"({pair.count:,})" in after[0].description
    after[0].click()  # what a click in the browser does
    assert dash.selected.size == cm[pair.true, pair.other] and dash.state.origin_name == "confusion matrix"


def test_an_update_out_of_the_history_tab_defers_the_record_and_keeps_its_time(
    mailroom: LogitFrame, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    import itertools

    from logitscope.findings import epoch_record
    from logitscope.widgets import dashboard as dashboard_module

    clock = itertools.count()  # each reading of the clock a new time: a record shows when its frame was shown
    monkeypatch.setattr(dashboard_module, "_now", lambda: f"2026-01-01T00:00:{next(clock):02d}+00:00")
    dash = Dashboard(mailroom, relabel_path=tmp_path / "m.json", keep_frames=3)
    frames = [_epoch(mailroom, s, seed=i) for i, s in enumerate((0.7, 1.4, 2.0, 2.5))]
    dash.update(frames[0], "epoch 2")
    assert dash.pending_records == 2  # the first frame's and this one's: the History tab is out of sight
    for i, f in enumerate(frames[1:]):
        dash.update(f, f"epoch {i + 3}")
    # four frames shown beyond the first, three kept: the records of the frames let go are made, the rest wait
    assert dash.pending_records == 3
    h = dash.history  # reading the history makes every record
    assert dash.pending_records == 0 and h["update"].tolist() == [0, 1, 2, 3, 4]
    assert h["shown_at"].tolist() == [f"2026-01-01T00:00:{i:02d}+00:00" for i in range(5)]
    for row, f in zip(h.itertuples(), [mailroom, *frames], strict=True):
        eager = epoch_record(f, row.update, row.label, dash.state.binning)
        assert row.fitted_temperature == eager.fitted_temperature and row.nll == eager.nll  # the same numbers
    assert dash.history_view.current == 4  # the frame on screen
    dash.tabs.selected_index = 2
    dash.update(mailroom, "again")  # with the History tab in sight the record is made at once
    assert dash.pending_records == 0 and len(dash.history_view.records) == 6
