"""Reading files that are laid out wrongly, reordered, damaged or not files at all: right numbers or a clear error."""

from __future__ import annotations

import os
import re
import stat
import zipfile

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from sklearn.metrics import accuracy_score, log_loss

from logitscope import LogitFrame
from logitscope import io as lio
from logitscope.errors import FileFormatError, InputTypeError, LooksLikeProbabilitiesWarning

DESKS = ["billing", "hardware", "shipping"]


@pytest.fixture
def batch(make_logits):
    z, y = make_logits(n=200, k=3, scale=1.0)
    return LogitFrame(z, labels=y, classes=DESKS, ids=[f"T-{i}" for i in range(200)]), z, y


def _reordered(src, dst, order, *, keep_metadata=True, labels=None):
    table = pq.read_table(src)
    names = ["id", "label", *[f"logit:{DESKS[j]}" for j in order]]
    table = table.select(names)
    if labels is not None:
        table = table.set_column(1, "label", pa.array(labels))
    if not keep_metadata:
        table = table.replace_schema_metadata({})
    pq.write_table(table, dst)


def test_parquet_columns_are_matched_to_classes_by_name(tmp_path, batch):
    frame, z, y = batch
    frame.write(tmp_path / "a.parquet")
    assert pq.read_table(tmp_path / "a.parquet").column("label").to_pylist()[:3] == [DESKS[i] for i in y[:3]]
    # the same columns in another order (c, a, b): with the stored order, and with name labels alone
    _reordered(tmp_path / "a.parquet", tmp_path / "cab.parquet", [2, 0, 1])
    _reordered(tmp_path / "a.parquet", tmp_path / "cab-names.parquet", [2, 0, 1], keep_metadata=False)
    for name in ("cab.parquet", "cab-names.parquet"):
        g = LogitFrame.read(tmp_path / name)
        s = g.summary()
        assert s["accuracy"] == pytest.approx(accuracy_score(y, z.argmax(axis=1)), abs=1e-15)  # sklearn
        assert s["nll"] == pytest.approx(log_loss(y, np.exp(z) / np.exp(z).sum(1, keepdims=True)), rel=1e-10)
        assert {c: g.logits[:, g.classes.index(c)].tolist() for c in DESKS} == {
            c: z[:, j].tolist() for j, c in enumerate(DESKS)
        }


def test_parquet_index_labels_need_the_stored_class_order(tmp_path, batch):
    frame, _, y = batch
    frame.write(tmp_path / "a.parquet")
    # index labels with the order stored: read by that order, whatever the column order
    _reordered(tmp_path / "a.parquet", tmp_path / "idx.parquet", [2, 0, 1], labels=y)
    np.testing.assert_array_equal(LogitFrame.read(tmp_path / "idx.parquet").labels, y)
    # index labels without it: which column an index means is unknown, so the file is refused
    _reordered(tmp_path / "a.parquet", tmp_path / "bare.parquet", [2, 0, 1], keep_metadata=False, labels=y)
    with pytest.raises(FileFormatError, match=r"bare\.parquet: the label column holds class indices .* class order"):
        LogitFrame.read(tmp_path / "bare.parquet")
    # a stored order naming other classes than the columns
    table = pq.read_table(tmp_path / "a.parquet")
    table = table.replace_schema_metadata({b"logitscope": b'{"classes": ["billing", "hardware", "returns"]}'})
    pq.write_table(table, tmp_path / "other.parquet")
    with pytest.raises(FileFormatError, match=r"does not match the columns.*'returns'.*'shipping'"):
        LogitFrame.read(tmp_path / "other.parquet")
    table = table.replace_schema_metadata({b"logitscope": b"{not json"})
    pq.write_table(table, tmp_path / "junk-meta.parquet")
    with pytest.raises(FileFormatError, match="not JSON"):
        LogitFrame.read(tmp_path / "junk-meta.parquet")


def test_parquet_nulls_and_non_numbers_name_the_file_column_and_rows(tmp_path):
    pd.DataFrame({"logit:a": [0.0, None, 1.0, None], "logit:b": [1.0, 0.0, 2.0, 0.5]}).to_parquet(
        tmp_path / "n.parquet"
    )
    with pytest.raises(FileFormatError, match=r"n\.parquet: column 'logit:a' has missing values \(null\) at rows 1, 3"):
        LogitFrame.read(tmp_path / "n.parquet")
    pq.write_table(
        pa.table({"logit:a": pa.array([None, None], pa.null()), "logit:b": [1.0, 0.0]}), tmp_path / "a.parquet"
    )
    with pytest.raises(FileFormatError, match="column 'logit:a' must hold numbers, but holds null"):
        LogitFrame.read(tmp_path / "a.parquet")
    pd.DataFrame({"logit:a": ["1", "2"], "logit:b": [1.0, 0.0]}).to_parquet(tmp_path / "s.parquet")
    with pytest.raises(FileFormatError, match="column 'logit:a' must hold numbers"):
        LogitFrame.read(tmp_path / "s.parquet")
    pd.DataFrame({"id": ["x", None], "logit:a": [1.0, 2.0], "logit:b": [1.0, 0.0]}).to_parquet(tmp_path / "i.parquet")
    with pytest.raises(FileFormatError, match=r"column 'id' has missing values \(null\) at row 1"):
        LogitFrame.read(tmp_path / "i.parquet")


@pytest.mark.parametrize("shape", [(3, 2), ()])
def test_npz_meta_of_the_wrong_shape(tmp_path, shape):
    np.savez(tmp_path / "m.npz", logits=np.eye(3) * 2, **{"meta/desk": np.zeros(shape)})
    with pytest.raises(
        FileFormatError, match=r"m\.npz: meta/desk must be 1-D .*\(3 samples\), got shape " + re.escape(str(shape))
    ):
        LogitFrame.read(tmp_path / "m.npz")
    np.savez(tmp_path / "short.npz", logits=np.eye(3) * 2, **{"meta/desk": np.zeros(2)})
    with pytest.raises(FileFormatError, match="got shape"):
        LogitFrame.read(tmp_path / "short.npz")


@pytest.mark.parametrize("key", ["classes", "texts", "image_paths"])
def test_npz_zero_d_strings_are_refused(tmp_path, key):
    np.savez(tmp_path / "s.npz", logits=np.eye(3) * 2, **{key: np.array("abc")})
    with pytest.raises(InputTypeError, match=rf"s\.npz: {key} must be one-dimensional"):
        LogitFrame.read(tmp_path / "s.npz")


def test_npz_member_that_is_not_an_array(tmp_path):
    with zipfile.ZipFile(tmp_path / "z.npz", "w") as zf:
        zf.writestr("logits.txt", "1,2\n3,4\n")
    with pytest.raises(FileFormatError, match=r"'logits\.txt' is not a numpy array"):
        LogitFrame.read(tmp_path / "z.npz")


def test_a_directory_or_an_unreadable_file_is_named_as_such(tmp_path, monkeypatch):
    (tmp_path / "batch.npz").mkdir()
    with pytest.raises(FileFormatError, match=r"batch\.npz: is a directory, not a file"):
        LogitFrame.read(tmp_path / "batch.npz")
    (tmp_path / "batch.parquet").mkdir()  # pyarrow would read a folder as a dataset
    with pytest.raises(FileFormatError, match="is a directory"):
        LogitFrame.read(tmp_path / "batch.parquet")
    fifo = tmp_path / "pipe.npz"
    os.mkfifo(fifo)
    with pytest.raises(FileFormatError, match="not a regular file"):  # and no read that waits for a writer
        LogitFrame.read(fifo)
    LogitFrame(np.eye(2) * 2).write(tmp_path / "ok.npz")

    def refused(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(lio, "open", refused, raising=False)  # what open(2) says for a file of another user
    with pytest.raises(FileFormatError, match=r"ok\.npz: the file cannot be read \(Permission denied\)"):
        LogitFrame.read(tmp_path / "ok.npz")


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root reads every file")
def test_a_file_without_read_permission(tmp_path):
    path = tmp_path / "ok.npz"
    LogitFrame(np.eye(2) * 2).write(path)
    path.chmod(0)
    try:
        with pytest.raises(FileFormatError, match="cannot be read"):
            LogitFrame.read(path)
    finally:
        path.chmod(stat.S_IRUSR | stat.S_IWUSR)


def test_a_file_of_probabilities_under_logits_warns_naming_the_file(tmp_path):
    np.savez(tmp_path / "p.npz", logits=np.array([[0.2, 0.8], [0.9, 0.1]]))
    with pytest.warns(LooksLikeProbabilitiesWarning, match=r"p\.npz: every row .*from_probabilities"):
        LogitFrame.read(tmp_path / "p.npz")


def test_a_damaged_page_of_a_written_parquet_file_is_found(tmp_path, batch):
    # Parquet's page CRC (written by LogitFrame.write, checked on reading): one flipped bit in a stored logit
    frame, z, _ = batch
    path = tmp_path / "a.parquet"
    frame.write(path)
    raw = bytearray(path.read_bytes())
    at = raw.find(np.float64(z[5, 1]).tobytes())
    assert at > 0  # the value is stored as it is (no compression of random floats)
    raw[at] ^= 0x01
    path.write_bytes(bytes(raw))
    with pytest.raises(FileFormatError, match=r"a\.parquet: not a readable Parquet file .*CRC"):
        LogitFrame.read(path)
