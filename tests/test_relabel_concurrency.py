"""RelabelStore shared by several processes: no acknowledged mark is lost, not even under kill -9.

Each writer is its own process (forked, as two notebook kernels are two processes) with its own
store on the same file. After every call to the store returns, the writer appends the sample id to
its own acknowledgement file with one unbuffered ``write(2)``, so the parent knows which marks were
acknowledged even when it kills the writer at a random moment. The checks: every acknowledged mark
is in the file, the file always parses, and the temporary files killed writers leave are removed
when the next store opens.
"""

from __future__ import annotations

import json
import multiprocessing as mp
import os
import random
import signal
import time
import warnings
from pathlib import Path

import pytest
from filelock import FileLock

from logitscope._atomic import leftover_temp_files
from logitscope.relabel_store import RelabelConflictWarning, RelabelStore

pytestmark = pytest.mark.skipif(not hasattr(os, "fork"), reason="the writers are forked processes")

CTX = mp.get_context("fork") if hasattr(os, "fork") else None


def _ack(fd: int, text: str) -> None:
    os.write(fd, (text + "\n").encode())


def _acks(path: Path) -> list[str]:
    return path.read_text().split() if path.exists() else []


def _writer(path: str, who: str, n: int, pace: bool, ack: str, seed: int) -> None:
    """Add n marks of our own; remove every third again and change the note of every fifth, at some pace."""
    rng = random.Random(seed)
    store = RelabelStore(path)
    fd = os.open(ack, os.O_WRONLY | os.O_CREAT | os.O_APPEND)
    for i in range(n):
        sid = f"{who}-{i:04d}"
        store.add(sid, "billing", note=f"by {who}")
        _ack(fd, f"add {sid}")
        if i % 3 == 2:
            store.remove(sid)
            _ack(fd, f"remove {sid}")
        elif i % 5 == 4:
            store.update(sid, note=f"checked by {who}")
            _ack(fd, f"update {sid}")
        if pace:  # a person's pace: one change every 50 to 300 ms
            time.sleep(rng.uniform(0.05, 0.3))


def _run_writers(path: Path, n_procs: int, n: int, pace: bool) -> list[Path]:
    acks = [path.parent / f"ack-{w}.txt" for w in range(n_procs)]
    procs = [CTX.Process(target=_writer, args=(str(path), f"w{w}", n, pace, str(acks[w]), w)) for w in range(n_procs)]
    for p in procs:
        p.start()
    for p in procs:
        p.join(timeout=60)
        assert p.exitcode == 0, f"a writer failed (exit code {p.exitcode})"
    return acks


@pytest.mark.parametrize(
    ("n_procs", "n", "pace"), [(2, 45, False), (4, 24, False), (2, 7, True), (4, 5, True)], ids=str
)
def test_concurrent_writers_lose_nothing(tmp_path: Path, n_procs: int, n: int, pace: bool) -> None:
    path = tmp_path / "marks.json"
    RelabelStore(path).add_many([{"id": f"before-{i}", "suggested_label": "billing"} for i in range(10)])
    acks = _run_writers(path, n_procs, n, pace)

    expected: dict[str, str] = {f"before-{i}": "" for i in range(10)}
    for a in acks:
        lines = _acks(a)
        assert len([x for x in lines if x == "add"]) == n  # every call returned
        for op, sid in zip(lines[::2], lines[1::2], strict=True):
            who = sid.split("-")[0]
            if op == "add":
                expected[sid] = f"by {who}"
            elif op == "update":
                expected[sid] = f"checked by {who}"
            else:
                del expected[sid]
    # read with the json module, outside the store's own reader
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert {m["id"]: m["note"] for m in doc["marks"]} == expected
    assert leftover_temp_files(path) == []


def _same_ids_writer(path: str, who: str, ack: str, barrier: object) -> None:
    store = RelabelStore(path)  # opened before anyone writes: its view is empty
    barrier.wait()  # type: ignore[attr-defined]
    fd = os.open(ack, os.O_WRONLY | os.O_CREAT | os.O_APPEND)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        for i in range(8):
            store.add(f"T-{i}", "billing", note=f"by {who}")
    named = [str(w.message) for w in caught if issubclass(w.category, RelabelConflictWarning)]
    _ack(fd, json.dumps(named))


def test_same_ids_from_four_processes_warn_and_keep_one_mark_each(tmp_path: Path) -> None:
    path = tmp_path / "marks.json"
    barrier = CTX.Barrier(4)
    acks = [tmp_path / f"ack-{w}.txt" for w in range(4)]
    procs = [CTX.Process(target=_same_ids_writer, args=(str(path), f"w{w}", str(acks[w]), barrier)) for w in range(4)]
    for p in procs:
        p.start()
    for p in procs:
        p.join(timeout=60)
        assert p.exitcode == 0
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert sorted(m["id"] for m in doc["marks"]) == [f"T-{i}" for i in range(8)]
    assert {m["note"] for m in doc["marks"]} <= {f"by w{w}" for w in range(4)}
    messages = [m for a in acks for m in json.loads(a.read_text())]
    # the first write of T-0 comes first; each other process's first write finds it written by another
    assert len(messages) >= 3
    assert all("another store changed the mark of sample" in m and "'T-" in m for m in messages)


def _fast_writer(path: str, who: str, ack: str) -> None:
    store = RelabelStore(path)
    fd = os.open(ack, os.O_WRONLY | os.O_CREAT | os.O_APPEND)
    for i in range(100_000):
        sid = f"{who}-{i:05d}"
        store.add(sid, "billing", note="x" * 40)
        _ack(fd, sid)


def test_kill_minus_nine_at_random_moments(tmp_path: Path) -> None:
    path = tmp_path / "marks.json"
    # a list of some size, so a write takes a few milliseconds and kills land inside writes too
    RelabelStore(path).add_many(
        [{"id": f"old-{i}", "suggested_label": "billing", "note": "n" * 60} for i in range(1500)]
    )
    rng = random.Random(8)
    acked: set[str] = {f"old-{i}" for i in range(1500)}
    leftovers_seen = 0
    for rnd in range(8):
        acks = [tmp_path / f"ack-{rnd}-{w}.txt" for w in range(2)]
        procs = [CTX.Process(target=_fast_writer, args=(str(path), f"r{rnd}w{w}", str(acks[w]))) for w in range(2)]
        for p in procs:
            p.start()
        time.sleep(rng.uniform(0.3, 0.8))
        for p in rng.sample(procs, 2):
            os.kill(p.pid, signal.SIGKILL)
            time.sleep(rng.uniform(0.0, 0.05))
        for p in procs:
            p.join(timeout=30)
            assert p.exitcode == -signal.SIGKILL
        for a in acks:
            acked |= set(_acks(a))
        leftovers_seen += len(leftover_temp_files(path))
        store = RelabelStore(path)  # the file always parses; opening removes the killed writers' leftovers
        missing = acked - set(store.ids)
        assert not missing, f"round {rnd}: {len(missing)} acknowledged marks lost, e.g. {sorted(missing)[:3]}"
        assert leftover_temp_files(path) == []
    assert len(acked) > 1500 + 8  # the writers did get marks in before they were killed


def _dies_mid_write(path: str, ready: str) -> None:
    store = RelabelStore(path)

    def hang(fd: int) -> None:  # the new document is in the temporary file, not yet renamed
        Path(ready).write_text("inside the write")
        time.sleep(60)

    os.fsync = hang  # type: ignore[assignment]  # this child's own os module only
    store.add("never-acknowledged", "billing")


def test_kill_inside_a_write_keeps_the_file_and_the_next_open_tidies(tmp_path: Path) -> None:
    path = tmp_path / "marks.json"
    RelabelStore(path).add("kept", "billing")
    before = path.read_bytes()
    ready = tmp_path / "ready"
    p = CTX.Process(target=_dies_mid_write, args=(str(path), str(ready)))
    p.start()
    deadline = time.monotonic() + 30
    while not ready.exists():
        assert time.monotonic() < deadline and p.is_alive()
        time.sleep(0.01)
    os.kill(p.pid, signal.SIGKILL)
    p.join(timeout=30)
    assert path.read_bytes() == before  # the old list, whole
    assert len(leftover_temp_files(path)) == 1  # the dead writer's temporary file
    store = RelabelStore(path)
    assert store.ids == ["kept"] and leftover_temp_files(path) == []


def test_open_removes_only_stale_temporary_files_of_its_own(tmp_path: Path) -> None:
    path = tmp_path / "marks.json"
    RelabelStore(path).add("kept", "billing")
    ours = tmp_path / ".marks.json.k3x9_q2a.tmp"
    others = [
        tmp_path / ".other.json.k3x9_q2a.tmp",  # another file's
        tmp_path / ".marks.json.k3.x9.tmp",  # not the name pattern atomic_write makes
        tmp_path / "marks.json.bak",
        tmp_path / "notes.txt",
    ]
    for f in [ours, *others]:
        f.write_text("{")
    # a live writer holds the lock while its temporary file exists: that file must stay
    live = FileLock(tmp_path / ".marks.json.lock")
    with live:
        RelabelStore(path)
        assert ours.exists()
    RelabelStore(path)
    assert not ours.exists()
    assert all(f.exists() for f in others)
