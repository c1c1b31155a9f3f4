"""RelabelStore: marks survive a restart, writes are atomic, bad files are refused and kept."""

from __future__ import annotations

import json
import os
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from logitscope import ClassNameError, FileFormatError, LogitFrame, ParameterError
from logitscope.relabel_store import (
    FIELDS,
    RelabelConflictWarning,
    RelabelStore,
    RelabelStoreWarning,
    default_path,
    fingerprint,
)


@pytest.fixture
def path(tmp_path: Path) -> Path:
    return tmp_path / "marks.json"


def test_round_trip_after_restart(mailroom: LogitFrame, path: Path) -> None:
    store = RelabelStore(path, mailroom)
    assert not path.exists()  # created on the first change, not before
    store.add("card-00005", "three", note="top loop open")
    store.add_many([{"id": "card-00100", "suggested_label": 7}, {"id": "card-00002", "suggested_label": "one"}])
    assert path.exists()
    before = store.to_frame()

    # a kernel restart: a new store object on the same file
    again = RelabelStore(path, mailroom)
    pd.testing.assert_frame_equal(again.to_frame(), before)
    assert again.ids == ["card-00005", "card-00100", "card-00002"]
    rec = again.get("card-00005")
    assert rec is not None
    # the row and the given label come from the frame itself
    assert rec["row"] == int(np.flatnonzero(mailroom.ids == "card-00005")[0])
    assert rec["given_label"] == mailroom.classes[int(mailroom.labels[rec["row"]])]
    assert rec["suggested_label"] == "three" and rec["note"] == "top loop open"
    assert again.get("card-00100")["suggested_label"] == "seven"  # class index 7 stored by name


def test_file_layout(mailroom: LogitFrame, path: Path) -> None:
    store = RelabelStore(path, mailroom)
    store.add("card-00042", "one")
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert doc["format"] == "logitscope-relabel" and doc["version"] == 1
    assert doc["classes"] == list(mailroom.classes)
    assert doc["n_samples"] == mailroom.n_samples
    assert [set(m) for m in doc["marks"]] == [set(FIELDS)]
    # marked_at is an ISO 8601 time with a zone
    assert pd.Timestamp(doc["marks"][0]["marked_at"]).tzinfo is not None


def test_update_remove_and_every_change_saved(mailroom: LogitFrame, path: Path) -> None:
    store = RelabelStore(path, mailroom)
    store.add_many([{"id": f"card-{i:05d}", "suggested_label": "zero"} for i in (1, 2, 3)])

    def on_disk() -> dict:
        return {m["id"]: m for m in json.loads(path.read_text(encoding="utf-8"))["marks"]}

    store.update("card-00002", suggested_label="eight", note="checked twice")
    assert on_disk()["card-00002"]["suggested_label"] == "eight"
    assert on_disk()["card-00002"]["note"] == "checked twice"
    store.remove("card-00001")
    assert set(on_disk()) == {"card-00002", "card-00003"}
    assert store.remove_many(["card-00003", "card-09999"], missing_ok=True) == 1
    assert set(on_disk()) == {"card-00002"}
    # marking an id again replaces its mark and moves it to the end
    store.add("card-00007", "one")
    store.add("card-00002", "nine")
    assert store.ids == ["card-00007", "card-00002"] and store.get("card-00002")["suggested_label"] == "nine"
    store.clear()
    assert on_disk() == {} and len(store) == 0


def test_failed_write_keeps_old_file_and_memory(mailroom: LogitFrame, path: Path, monkeypatch) -> None:
    store = RelabelStore(path, mailroom)
    store.add("card-00010", "one")
    old_bytes = path.read_bytes()

    def fsync_fails(fd: int) -> None:  # the whole new document is in the temporary file, not yet on disk
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(os, "fsync", fsync_fails)
    with pytest.raises(OSError, match="disk full"):
        store.add("card-00011", "two")
    with pytest.raises(OSError, match="disk full"):
        store.remove("card-00010")
    monkeypatch.undo()

    assert path.read_bytes() == old_bytes  # the old list, whole
    # no temporary file left behind (the empty lock file stays)
    assert sorted(p.name for p in path.parent.iterdir()) == sorted([path.name, f".{path.name}.lock"])
    assert store.ids == ["card-00010"]  # memory agrees with the file
    assert RelabelStore(path, mailroom).ids == ["card-00010"]


@pytest.mark.parametrize(
    ("content", "why"),
    [
        ('{"format": "logitscope-relabel", "version": 1, "marks": [', "invalid JSON"),
        ("", "invalid JSON"),
        ('{"format": "something else", "version": 1, "marks": []}', "does not say format"),
        ('{"format": "logitscope-relabel", "version": 99, "marks": []}', "version 99"),
        ('{"format": "logitscope-relabel", "version": 1, "marks": {}}', "must be lists"),
        ('{"format": "logitscope-relabel", "version": 1, "marks": [{"note": "x"}]}', "lacks an id"),
        ("[1, 2, 3]", "does not say format"),
    ],
)
def test_unreadable_file_is_refused_and_kept(mailroom: LogitFrame, path: Path, content: str, why: str) -> None:
    path.write_text(content, encoding="utf-8")
    with pytest.raises(FileFormatError, match=why) as info:
        RelabelStore(path, mailroom)
    assert str(path) in str(info.value) and "left untouched" in str(info.value)
    assert path.read_text(encoding="utf-8") == content


def test_file_corrupted_while_open_is_not_overwritten(mailroom: LogitFrame, path: Path) -> None:
    store = RelabelStore(path, mailroom)
    store.add("card-00001", "one")
    path.write_text("{ broken", encoding="utf-8")
    with pytest.raises(FileFormatError):
        store.add("card-00002", "two")
    assert path.read_text(encoding="utf-8") == "{ broken"


def test_unknown_ids_warn_and_are_kept(mailroom: LogitFrame, path: Path) -> None:
    store = RelabelStore(path, mailroom)
    store.add("card-00003", "eight")
    doc = json.loads(path.read_text(encoding="utf-8"))
    doc["marks"].append({**doc["marks"][0], "id": "card-99999", "row": 99999})
    path.write_text(json.dumps(doc), encoding="utf-8")

    with pytest.warns(RelabelStoreWarning, match=r"1 of 2 marks name sample ids .*'card-99999'"):
        again = RelabelStore(path, mailroom)
    assert again.unmatched == ["card-99999"]
    assert "card-99999" in again
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RelabelStoreWarning)
        again.add("card-00004", "nine")  # a later save keeps the foreign mark
        assert {m["id"] for m in json.loads(path.read_text())["marks"]} == {"card-00003", "card-99999", "card-00004"}
        assert RelabelStore(path, mailroom).get("card-99999")["row"] == 99999


def test_unknown_class_names_warn_and_are_kept(mailroom: LogitFrame, path: Path) -> None:
    store = RelabelStore(path, mailroom)
    store.add("card-00003", "eight")
    renamed = mailroom.subset(np.arange(mailroom.n_samples))  # same ids ...
    other = LogitFrame(renamed.logits, renamed.labels, [f"digit {c}" for c in renamed.classes], renamed.ids)
    with pytest.warns(RelabelStoreWarning, match="class names this frame does not have: 'eight', 'three'"):
        again = RelabelStore(path, other)
    assert again.get("card-00003")["suggested_label"] == "eight"


def test_class_order_change_warns(mailroom: LogitFrame, path: Path) -> None:
    store = RelabelStore(path, mailroom)
    store.add("card-00003", "eight")
    doc = json.loads(path.read_text())
    doc["classes"] = [*doc["classes"], "ten"]
    path.write_text(json.dumps(doc))
    with pytest.warns(RelabelStoreWarning, match="written for other class names"):
        RelabelStore(path, mailroom)


def test_bad_marks_are_rejected(mailroom: LogitFrame, path: Path) -> None:
    store = RelabelStore(path, mailroom)
    with pytest.raises(ClassNameError, match="'eleven' is not one of the 10 classes"):
        store.add("card-00003", "eleven")
    with pytest.raises(ClassNameError, match="not a class index"):
        store.add("card-00003", 10)
    with pytest.raises(ParameterError, match="'card-77777' is not in the frame"):
        store.add("card-77777", "one")
    with pytest.raises(ParameterError, match="is at row 3, not row 4"):
        store.add("card-00003", "one", row=4)
    with pytest.raises(ParameterError, match="is not marked"):
        store.remove("card-00003")
    with pytest.raises(ParameterError, match="is not marked"):
        store.update("card-00003", note="x")
    assert not path.exists()  # nothing was written for refused changes


def test_csv_export_reads_back(mailroom: LogitFrame, path: Path, tmp_path: Path) -> None:
    store = RelabelStore(path, mailroom)
    tricky = 'a "quoted", comma\nnew line; naïve – ü'
    store.add("card-00012", "four", note=tricky)
    store.add("card-00013", "five")
    out = store.export_csv(tmp_path / "export" / "marks.csv")
    back = pd.read_csv(out, keep_default_na=False)  # read with pandas, outside our code
    assert list(back.columns) == list(FIELDS)
    assert back["id"].tolist() == ["card-00012", "card-00013"]
    assert back["note"].tolist() == [tricky, ""]
    assert back["row"].tolist() == [12, 13]
    assert back["given_label"].tolist() == [mailroom.classes[int(mailroom.labels[r])] for r in (12, 13)]


def test_integer_ids_and_no_frame(tmp_path: Path) -> None:
    frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 2.0], [1.0, 1.5]]), labels=[0, 0, 1], classes=["ok", "late"])
    p = tmp_path / "ints.json"
    store = RelabelStore(p, frame)
    store.add(np.int64(1), "late")
    assert 1 in store and RelabelStore(p, frame).get(1)["given_label"] == "ok"
    # without a frame the store takes the class names from the file
    bare = RelabelStore(p)
    assert bare.classes == ("ok", "late")
    with pytest.raises(ClassNameError):
        bare.add(2, "early")
    bare.add(2, "ok", row=2, given_label="late")
    assert bare.to_frame()["row"].tolist() == [1, 2]


def test_two_stores_on_one_file_do_not_lose_marks(mailroom: LogitFrame, path: Path) -> None:
    first = RelabelStore(path, mailroom)
    second = RelabelStore(path, mailroom)  # e.g. the dashboard opened twice
    first.add("card-00001", "one")
    second.add("card-00002", "two")  # reads the first store's change before writing
    first.add("card-00003", "three")
    assert RelabelStore(path, mailroom).ids == ["card-00001", "card-00002", "card-00003"]


def test_default_path_and_fingerprint(mailroom: LogitFrame, tmp_path: Path) -> None:
    p = default_path(mailroom, tmp_path)
    # the name says which data: first and last class, sample count, then the fingerprint of ids and classes
    assert p.parent == tmp_path and p.name == f"relabel-zero-to-nine-1797-samples-{fingerprint(mailroom, 8)}.json"
    # other ids give another file; other numbers with the same ids and classes give the same file
    shifted = LogitFrame(mailroom.logits * 2, mailroom.labels, mailroom.classes, mailroom.ids)
    assert fingerprint(shifted) == fingerprint(mailroom) and default_path(shifted, tmp_path) == p
    fewer = mailroom.subset(np.arange(100))
    assert fingerprint(fewer) != fingerprint(mailroom)
    # two data sets with the same classes and size but other samples are kept apart by the fingerprint
    renamed = LogitFrame(mailroom.logits, mailroom.labels, mailroom.classes, [f"scan-{i}" for i in range(1797)])
    other = default_path(renamed, tmp_path)
    assert other != p and other.name.startswith("relabel-zero-to-nine-1797-samples-")


def test_default_path_is_a_plain_name_for_any_class_names(tmp_path: Path) -> None:
    z = np.zeros((3, 3))
    odd = LogitFrame(z, classes=["../../etc/passwd", "b", "Ärger / Büro"])
    assert default_path(odd, tmp_path).name.startswith("relabel-etc-passwd-to-arger-buro-3-samples-")
    assert default_path(odd, tmp_path).parent == tmp_path
    nothing_left = LogitFrame(z, classes=["数字一", "数字二", "数字三"])  # no ASCII letter survives
    assert default_path(nothing_left, tmp_path).name.startswith("relabel-3-classes-3-samples-")
    two = LogitFrame(np.zeros((4, 2)), classes=["routine", "urgent"])
    assert default_path(two, tmp_path).name.startswith("relabel-routine-and-urgent-4-samples-")
    unnamed = LogitFrame(np.zeros((5, 4)))  # classes default to their indices
    assert default_path(unnamed, tmp_path).name.startswith(f"relabel-{unnamed.classes[0]}-to-{unnamed.classes[-1]}-")


def test_default_path_keeps_a_list_under_the_earlier_name(mailroom: LogitFrame, tmp_path: Path) -> None:
    earlier = tmp_path / f"logitscope-relabel-{fingerprint(mailroom)}.json"
    RelabelStore(earlier, mailroom).add("card-00003", "eight")
    assert default_path(mailroom, tmp_path) == earlier  # its marks stay in view
    assert RelabelStore(default_path(mailroom, tmp_path), mailroom).ids == ["card-00003"]
    # once a list under the new name exists, that one is used
    new = tmp_path / f"relabel-zero-to-nine-1797-samples-{fingerprint(mailroom, 8)}.json"
    RelabelStore(new, mailroom).add("card-00004", "nine")
    assert default_path(mailroom, tmp_path) == new


def test_csv_export_defuses_spreadsheet_formulas(tmp_path):
    # OWASP "CSV Injection": cells starting with = + - @ are prefixed with ' so a spreadsheet shows them as text;
    # plain numbers are left alone
    import numpy as np
    import pandas as pd

    from logitscope import LogitFrame
    from logitscope.relabel_store import RelabelStore

    frame = LogitFrame(np.eye(3) * 3, labels=[0, 1, 2], classes=["a", "b", "c"], ids=["=cmd()", "-2", "ok"])
    store = RelabelStore(tmp_path / "marks.json", frame=frame)
    store.add("=cmd()", suggested_label="b", note="@SUM(A1)")
    store.add("-2", suggested_label="c", note="fine")
    out = pd.read_csv(store.export_csv(tmp_path / "marks.csv"), dtype=str)
    assert set(out["id"]) == {"'=cmd()", "-2"}
    assert "'@SUM(A1)" in set(out["note"])


# --------------------------------------------------------------------------- hostile files and text


def _doc(marks: list) -> str:
    return json.dumps({"format": "logitscope-relabel", "version": 1, "classes": [], "marks": marks})


GOOD = {"id": "T-1", "row": 0, "given_label": "billing", "suggested_label": "hardware", "note": "", "marked_at": None}


@pytest.mark.parametrize(
    ("content", "why"),
    [
        ("[" * 200_000 + "]" * 200_000, "nested too deeply"),  # the json module's parser recurses
        ('{"format": "logitscope-relabel", "version": ' + "9" * 5000 + ', "marks": []}', "cannot be read"),
        ('{"format": "logitscope-relabel", "version": 1e999, "marks": []}', "cannot be read"),
        (
            '{"format": "logitscope-relabel", "version": 1, "marks": [{"id": NaN, "suggested_label": "a"}]}',
            "cannot be read",
        ),
        (_doc([{**GOOD, "row": "seven"}]), "mark 0 has the row 'seven'"),
        (_doc([{**GOOD, "row": 2.5}]), "mark 0 has the row 2.5"),
        (_doc([{**GOOD, "row": -1}]), "mark 0 has the row -1"),
        (_doc([{**GOOD, "row": 2**70}]), "mark 0 has the row"),
        (_doc([{**GOOD, "row": True}]), "mark 0 has the row True"),
        (_doc([GOOD, {**GOOD, "id": "T-2", "note": {"a": 1}}]), "mark 1 has a note of type dict"),
        (_doc([{**GOOD, "id": ["T-1"]}]), "mark 0 has an id of type list"),
        (_doc([{**GOOD, "id": None}]), "mark 0 has an id of type NoneType"),
        (_doc([{**GOOD, "given_label": 3}]), "mark 0 has a given_label of type int"),
        (_doc([{**GOOD, "later_field": json.loads("[" * 40 + "]" * 40)}]), "nested more than 32 levels"),
        (_doc([{**GOOD, "note": "\ud800"}]), "not valid Unicode"),
        ('{"format": "logitscope-relabel", "version": 1, "classes": [1, 2], "marks": []}', "class names as strings"),
        (_doc([GOOD, {**GOOD, "row": 1}]), "marked twice"),
    ],
    ids=lambda v: v[:30] if isinstance(v, str) else None,
)
def test_hostile_file_is_refused_at_open_and_kept(tmp_path: Path, content: str, why: str) -> None:
    path = tmp_path / "marks.json"
    path.write_bytes(content.encode("utf-8", "surrogatepass"))
    before = path.read_bytes()
    with pytest.raises(FileFormatError, match=why) as info:
        RelabelStore(path)
    assert "left untouched" in str(info.value) and len(str(info.value)) < 400
    assert path.read_bytes() == before


def test_marks_with_bad_text_or_rows_are_refused(tmp_path: Path) -> None:
    store = RelabelStore(tmp_path / "m.json")
    with pytest.raises(ParameterError, match="not valid Unicode"):
        store.add("T-1", "billing", note="half a pair \ud83d")
    with pytest.raises(ParameterError, match="row of sample 'T-1' must be a whole number"):
        store.add("T-1", "billing", row=2.5)  # type: ignore[arg-type]
    with pytest.raises(ParameterError, match="finite number"):
        store.add(float("nan"), "billing")
    assert not (tmp_path / "m.json").exists()


HOSTILE = [
    "ok\r=SUM(1+1)",
    'line one\n=HYPERLINK("http://x")',
    "=cmd|' /C calc'!A0",
    "+1+2",
    "-1+cmd",
    "@SUM(A1)",
    "\t=1",
    "\r=1",
    "\n@x",
    "\t1",  # a tab before a number is not a plain number
    'quote " and , comma\r\n and crlf',
]


def test_csv_export_keeps_one_row_per_mark_and_defuses_every_formula(tmp_path: Path) -> None:
    # RFC 4180: a field holding CR or LF is quoted, so the csv module and pandas (two readers outside our
    # code) read back one row per mark; OWASP "CSV Injection": no cell starts with = + - @ tab or CR
    import csv

    store = RelabelStore(tmp_path / "m.json")
    for i, text in enumerate(HOSTILE):
        store.add(f"{text}#{i}", "billing", note=text, row=i, given_label=text)
    out = store.export_csv(tmp_path / "m.csv")
    with out.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    back = pd.read_csv(out, dtype=str, keep_default_na=False)
    assert len(rows) == len(HOSTILE) + 1 and len(back) == len(HOSTILE)
    cells = [c for r in rows[1:] for c in r] + back.to_numpy().ravel().tolist()
    assert not [c for c in cells if c[:1] in ("=", "+", "-", "@", "\t", "\r", "\n")]
    # the text itself survives behind the defusing quote
    assert [n[1:] if n.startswith("'") else n for n in back["note"]] == HOSTILE
    assert back["note"].iloc[0] == HOSTILE[0]  # "ok..." needs no quote: the CR stays inside the cell
    assert back["row"].tolist() == [str(i) for i in range(len(HOSTILE))]


def test_conflicting_edits_of_one_id_later_wins_and_warns(tmp_path: Path) -> None:
    path = tmp_path / "m.json"
    first, second = RelabelStore(path), RelabelStore(path)
    first.add("T-1", "billing", note="first")
    with pytest.warns(RelabelConflictWarning, match=r"another store changed the mark of sample 'T-1'"):
        second.add("T-1", "hardware", note="second")  # second never saw first's mark: a conflict, second wins
    assert RelabelStore(path).get("T-1")["note"] == "second"
    with pytest.warns(RelabelConflictWarning, match="'T-1'"):
        first.update("T-1", note="first again")  # first's view is stale: the later edit wins again
    assert RelabelStore(path).get("T-1")["note"] == "first again"
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        first.update("T-1", note="no one else wrote since")  # no warning without a conflict
        second.add("T-2", "billing")  # other ids: merged without a word
    assert RelabelStore(path).ids == ["T-1", "T-2"]
    # clear() removes what this store shows; a mark another store added since is kept
    first.clear()
    assert RelabelStore(path).ids == ["T-2"] and first.ids == ["T-2"]
