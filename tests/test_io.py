"""Reading and writing frames: .npz and .parquet round trips, atomic writes, unreadable files."""

from __future__ import annotations

import zipfile

import numpy as np
import pandas as pd
import pytest

from logitscope import LogitFrame
from logitscope.errors import ClassNameError, DuplicateError, FileFormatError, LabelError, NonFiniteError

DIGITS = ["zero", "one", "two"]


def _assert_same(a: LogitFrame, b: LogitFrame) -> None:
    assert a.logits.dtype == b.logits.dtype
    np.testing.assert_array_equal(a.logits, b.logits)
    np.testing.assert_array_equal(a.labels, b.labels)
    assert a.classes == b.classes
    assert [str(i) for i in a.ids] == [str(i) for i in b.ids]
    pd.testing.assert_frame_equal(a.meta, b.meta, check_dtype=False)
    if a.payload is None:
        assert b.payload is None
    else:
        assert a.payload.kind == b.payload.kind
        np.testing.assert_array_equal(np.asarray(a.payload.data), np.asarray(b.payload.data))


def _meta(n: int) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "desk": np.array(["north desk", "south desk", "night shift"])[np.arange(n) % 3],
            "was_flipped": np.arange(n) % 4 == 0,
            "tray": np.arange(n) * 3,
            "weight": np.linspace(0.5, 2.0, n),
        }
    )


@pytest.mark.parametrize("dtype", [np.float16, np.float32, np.float64])
def test_npz_round_trip_with_images(tmp_path, rng, dtype):
    n = 24
    z = (rng.normal(size=(n, 3)) * 4).astype(dtype)
    images = rng.integers(0, 256, (n, 8, 8), dtype=np.uint8)
    f = LogitFrame(
        z, labels=rng.integers(0, 3, n), classes=DIGITS, ids=[f"card-{i:05d}" for i in range(n)],
        meta=_meta(n), images=images,
    )  # fmt: skip
    path = tmp_path / "cards.npz"
    f.write(path)
    g = LogitFrame.read(path)
    _assert_same(f, g)
    assert g.payload.data.dtype == np.uint8
    # the file is a plain numpy archive: readable without pickles by numpy itself
    with np.load(path, allow_pickle=False) as npz:
        assert {"logits", "labels", "classes", "ids", "images", "meta/desk"} <= set(npz.files)


def test_npz_round_trip_texts_and_int_ids(tmp_path, rng):
    n = 10
    f = LogitFrame(
        rng.normal(size=(n, 3)), labels=rng.integers(0, 3, n), classes=["billing", "hardware", "shipping"],
        ids=np.arange(100, 100 + n), texts=[f"parcel {i} has not arrived, ünïcode ✓" for i in range(n)],
    )  # fmt: skip
    f.write(tmp_path / "t.npz")
    g = LogitFrame.read(tmp_path / "t.npz")
    _assert_same(f, g)
    assert g.ids.dtype.kind == "i" and g.payload.kind == "texts"


@pytest.mark.parametrize("payload", ["texts", "image_paths", None])
def test_parquet_round_trip(tmp_path, rng, payload):
    n = 15
    extra = {}
    if payload == "texts":
        extra["texts"] = [f"ticket {i}: locked out of account" for i in range(n)]
    elif payload == "image_paths":
        extra["image_paths"] = [f"scans/card-{i}.png" for i in range(n)]
    f = LogitFrame(
        rng.normal(size=(n, 3)).astype(np.float32), labels=rng.integers(0, 3, n),
        classes=["billing", "logit:odd name", "ünïcode"], ids=[f"T-{i}" for i in range(n)], meta=_meta(n),
        **extra,
    )  # fmt: skip
    path = tmp_path / "batch.parquet"
    f.write(path)
    g = LogitFrame.read(path)
    _assert_same(f, g)
    # the documented layout, read by pandas itself
    table = pd.read_parquet(path)
    assert list(table.columns[:5]) == ["id", "label", "logit:billing", "logit:logit:odd name", "logit:ünïcode"]


def test_parquet_refuses_image_arrays(tmp_path):
    f = LogitFrame(np.zeros((2, 2)), images=np.zeros((2, 4, 4), dtype=np.uint8))
    with pytest.raises(FileFormatError, match="image arrays are not stored in Parquet"):
        f.write(tmp_path / "x.parquet")
    assert not (tmp_path / "x.parquet").exists()


def test_probability_layouts(tmp_path):
    p = np.array([[0.2, 0.8], [0.9, 0.1], [1.0, 0.0]])
    np.savez(tmp_path / "p.npz", probabilities=p, labels=np.array([1, 0, 0]))
    f = LogitFrame.read(tmp_path / "p.npz")
    assert f.source == "probabilities"
    np.testing.assert_allclose(f.probabilities(), p, atol=1e-300)
    pd.DataFrame({"id": ["a", "b", "c"], "probability:no stamp": p[:, 0], "probability:stamp": p[:, 1]}).to_parquet(
        tmp_path / "p.parquet"
    )
    g = LogitFrame.read(tmp_path / "p.parquet")
    assert g.classes == ("no stamp", "stamp") and not g.has_labels
    np.testing.assert_allclose(g.probabilities(), p, atol=1e-300)


def test_written_frame_reads_back_the_same_numbers(tmp_path, make_logits):
    z, y = make_logits(n=200, k=4)
    f = LogitFrame(z, labels=y)
    f.write(tmp_path / "a.npz")
    f.write(tmp_path / "a.parquet")
    for name in ("a.npz", "a.parquet"):
        assert LogitFrame.read(tmp_path / name).summary() == f.summary()


# --------------------------------------------------------------------------- atomic writes


def test_failed_npz_write_leaves_the_old_file(tmp_path, monkeypatch, rng):
    path = tmp_path / "cards.npz"
    old = LogitFrame(rng.normal(size=(5, 3)), labels=[0, 1, 2, 0, 1])
    old.write(path)
    before = path.read_bytes()

    def broken_savez(fh, **arrays):
        fh.write(b"PK\x03\x04 half an archive")
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(np, "savez", broken_savez)
    with pytest.raises(OSError, match="disk full"):
        LogitFrame(rng.normal(size=(9, 3))).write(path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cards.npz"]  # no temporary file left behind
    monkeypatch.undo()
    _assert_same(LogitFrame.read(path), old)


def test_failed_parquet_write_leaves_the_old_file(tmp_path, rng):
    path = tmp_path / "batch.parquet"
    LogitFrame(rng.normal(size=(3, 2))).write(path)
    before = path.read_bytes()
    # a metadata column pyarrow cannot convert fails inside the write, after the temporary file exists
    bad = LogitFrame(rng.normal(size=(3, 2)), meta=pd.DataFrame({"mixed": [1, "two", object()]}))
    with pytest.raises(FileFormatError, match=r"cannot be stored as Parquet.*column mixed"):
        bad.write(path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["batch.parquet"]


# --------------------------------------------------------------------------- unreadable files


def test_missing_and_unknown_files(tmp_path):
    with pytest.raises(FileFormatError, match="no such file"):
        LogitFrame.read(tmp_path / "nothing.npz")
    (tmp_path / "a.csv").write_text("0.1,0.9\n")
    with pytest.raises(FileFormatError, match=r"unknown file type '\.csv'"):
        LogitFrame.read(tmp_path / "a.csv")
    with pytest.raises(FileFormatError, match="unknown file type"):
        LogitFrame(np.zeros((1, 2))).write(tmp_path / "a.csv")


def test_corrupt_npz(tmp_path, rng):
    (tmp_path / "junk.npz").write_bytes(b"this is not a zip archive")
    with pytest.raises(FileFormatError, match=r"not an \.npz archive"):
        LogitFrame.read(tmp_path / "junk.npz")
    good = tmp_path / "good.npz"
    LogitFrame(rng.normal(size=(50, 3))).write(good)
    data = good.read_bytes()
    (tmp_path / "cut.npz").write_bytes(data[: len(data) // 2])  # truncated: no central directory
    with pytest.raises(FileFormatError, match=r"cut\.npz"):
        LogitFrame.read(tmp_path / "cut.npz")
    # a damaged member: flip bytes inside the stored logits, the CRC check catches it
    with zipfile.ZipFile(good) as zf:
        info = zf.getinfo("logits.npy")
    damaged = bytearray(data)
    start = info.header_offset + 30 + len(info.filename) + 200
    damaged[start : start + 8] = b"\xff" * 8
    (tmp_path / "damaged.npz").write_bytes(bytes(damaged))
    with pytest.raises(FileFormatError, match=r"not a readable \.npz file"):
        LogitFrame.read(tmp_path / "damaged.npz")


def test_npz_layout_errors(tmp_path):
    np.savez(tmp_path / "none.npz", labels=np.array([0, 1]))
    with pytest.raises(FileFormatError, match="exactly one of the arrays 'logits' or 'probabilities'"):
        LogitFrame.read(tmp_path / "none.npz")
    np.savez(tmp_path / "both.npz", logits=np.zeros((2, 2)), probabilities=np.full((2, 2), 0.5))
    with pytest.raises(FileFormatError, match="exactly one"):
        LogitFrame.read(tmp_path / "both.npz")
    np.savez(tmp_path / "obj.npz", logits=np.array([[1.0, 0.0]], dtype=object))
    with pytest.raises(FileFormatError, match=r"not a readable \.npz file"):
        LogitFrame.read(tmp_path / "obj.npz")
    # errors about the content name the file and keep their own class
    np.savez(tmp_path / "lab.npz", logits=np.zeros((2, 2)), labels=np.array([0, 2]))
    with pytest.raises(LabelError, match=r"lab.npz: labels must lie in \[0, 2\)"):
        LogitFrame.read(tmp_path / "lab.npz")
    np.savez(tmp_path / "nan.npz", logits=np.array([[0.0, np.inf], [0.0, 1.0]]))
    with pytest.raises(NonFiniteError, match=r"nan\.npz: .*row 0"):
        LogitFrame.read(tmp_path / "nan.npz")
    np.savez(tmp_path / "dup.npz", logits=np.zeros((2, 2)), classes=np.array(["stamp", "stamp"]))
    with pytest.raises(DuplicateError, match="class name 'stamp' appears twice"):
        LogitFrame.read(tmp_path / "dup.npz")


def test_corrupt_and_misshapen_parquet(tmp_path):
    (tmp_path / "junk.parquet").write_bytes(b"PAR1 but nothing else")
    with pytest.raises(FileFormatError, match="not a readable Parquet file"):
        LogitFrame.read(tmp_path / "junk.parquet")
    pd.DataFrame({"id": [1, 2], "score": [0.1, 0.2]}).to_parquet(tmp_path / "nocols.parquet")
    with pytest.raises(FileFormatError, match="needs columns 'logit:<class>'"):
        LogitFrame.read(tmp_path / "nocols.parquet")
    pd.DataFrame({"logit:a": [0.0, 2.0], "logit:b": [2.0, 0.0], "label": ["a", "e"]}).to_parquet(tmp_path / "l.parquet")
    with pytest.raises(ClassNameError, match=r"l.parquet: .*not among the 2 classes: 'e' \(at row 1\)"):
        LogitFrame.read(tmp_path / "l.parquet")


def test_atomic_write_gives_normal_permissions_and_keeps_existing_ones(tmp_path):
    # a file written atomically must not stay private (tempfile.mkstemp creates 0o600): new files get
    # 0o666 less the umask, as open() would give them (POSIX open(2)); a replaced file keeps its mode
    import os
    import stat

    from logitscope._atomic import atomic_write

    mask = os.umask(0o022)
    try:
        new = tmp_path / "new.txt"
        with atomic_write(new, "w") as fh:
            fh.write("x")
        assert stat.S_IMODE(new.stat().st_mode) == 0o644
        old = tmp_path / "old.txt"
        old.write_text("a")
        old.chmod(0o640)
        with atomic_write(old, "w") as fh:
            fh.write("b")
        assert stat.S_IMODE(old.stat().st_mode) == 0o640 and old.read_text() == "b"
    finally:
        os.umask(mask)
