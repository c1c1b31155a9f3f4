"""Property-based fuzzing (hypothesis) of the three readers: .npz frames, .parquet frames and relabel JSON files.

Each example starts from a valid file and applies structured mutations drawn by hypothesis (a key
dropped or renamed, an array of another shape, dtype or length, special values, a column cast or
nulled, metadata replaced, a JSON node swapped for another value, bytes cut or flipped). The
property: the reader returns a right answer (a frame whose arrays agree with each other and whose
probabilities are probability vectors; a relabel store that can show, export and add marks) or
raises one of our own errors, and never another exception; every example finishes within a
hard time limit (SIGALRM), so a hang fails the test.
"""

from __future__ import annotations

import contextlib
import json
import signal
import tempfile
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from logitscope import LogitFrame
from logitscope.errors import FileFormatError, InputTypeError, LogitscopeError
from logitscope.relabel_store import RelabelStore

OURS = (LogitscopeError, InputTypeError)
FUZZ = settings(max_examples=45, deadline=None, suppress_health_check=[HealthCheck.too_slow], derandomize=True)
#: the same for a test run once per key or operation (every one of them gets its own examples)
FUZZ_EACH = settings(FUZZ, max_examples=12)
TIME_LIMIT = 20  # seconds per example; a reader that hangs fails here


@contextlib.contextmanager
def time_limit(seconds: int = TIME_LIMIT) -> Iterator[None]:
    def expire(signum: int, frame: object) -> None:
        raise AssertionError(f"a reader took longer than {seconds} s (a hang)")

    if not hasattr(signal, "SIGALRM"):  # pragma: no cover - Windows
        yield
        return
    old = signal.signal(signal.SIGALRM, expire)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)


def _check_frame(f: LogitFrame) -> None:
    """What every frame a reader returns must satisfy."""
    n, k = f.logits.shape
    assert n >= 1 and k >= 2 and len(f.classes) == k and len(set(f.classes)) == k
    assert f.ids.shape == (n,) and len(set(f.ids.tolist())) == n
    if f.labels is not None:
        # -1 marks a row without a label (a partly labelled batch); every other label names a class
        assert f.labels.shape == (n,) and f.labels.min() >= -1 and f.labels.max() < k
        assert f.n_labelled == int(np.count_nonzero(f.labels >= 0))
    assert len(f.meta) == n and (f.payload is None or len(f.payload) == n)
    p = f.probabilities()
    assert np.all(np.isfinite(p)) and np.all(p >= 0)
    np.testing.assert_allclose(p.sum(axis=1), 1.0, atol=1e-5)


def _read(path: Path) -> LogitFrame | None:
    with time_limit(), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            f = LogitFrame.read(path)
        except OURS:
            return None
        _check_frame(f)
        return f


def _flip_bytes(path: Path, data: st.DataObject) -> bool:
    """Cut the file or change a few bytes, sometimes; True when the bytes were changed."""
    raw = bytearray(path.read_bytes())
    how = data.draw(st.sampled_from(["none", "none", "none", "truncate", "flip"]), label="bytes")
    if how == "truncate":
        raw = raw[: data.draw(st.integers(0, len(raw) - 1), label="cut at")]
    elif how == "flip":
        for _ in range(data.draw(st.integers(1, 4), label="flips")):
            i = data.draw(st.integers(0, len(raw) - 1), label="at")
            raw[i] = data.draw(st.integers(0, 255), label="to")
    path.write_bytes(bytes(raw))
    return how != "none"


# --------------------------------------------------------------------------- npz

NPZ_KEYS = ["logits", "probabilities", "labels", "classes", "ids", "texts", "images", "image_paths", "meta/desk"]


def _valid_npz(n: int, k: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(n * 31 + k)
    return {
        "logits": rng.normal(size=(n, k)).astype(np.float32) * 3,
        "labels": rng.integers(0, k, n),
        "classes": np.array([f"desk {j}" for j in range(k)]),
        "ids": np.array([f"T-{i}" for i in range(n)]),
        "texts": np.array([f"ticket {i}" for i in range(n)]),
        "meta/desk": np.arange(n) % 3,
    }


def _odd_array(data: st.DataObject, n: int, k: int) -> np.ndarray:
    kind = data.draw(
        st.sampled_from(
            [
                "0-d",
                "1-D",
                "2-D",
                "3-D",
                "short",
                "long",
                "empty",
                "str",
                "bool",
                "complex",
                "uint64",
                "float16",
                "nan",
                "inf",
                "huge",
                "negative",
                "bytes",
                "datetime",
                "dup",
            ]
        ),
        label="array",
    )
    rng = np.random.default_rng(n + k)
    return {
        "0-d": lambda: np.array(data.draw(st.sampled_from([1.5, "abc", 7]), label="scalar")),
        "1-D": lambda: np.arange(n, dtype=np.float64),
        "2-D": lambda: rng.normal(size=(n, k)),
        "3-D": lambda: rng.normal(size=(n, 2, 2)),
        "short": lambda: np.arange(max(n - 1, 0)),
        "long": lambda: np.arange(n + 1),
        "empty": lambda: np.zeros((0, k)),
        "str": lambda: np.array([f"v{i}" for i in range(n)]),
        "bool": lambda: np.ones((n, k), dtype=bool),
        "complex": lambda: np.ones((n, k), dtype=complex),
        "uint64": lambda: np.full(n, np.iinfo(np.uint64).max, dtype=np.uint64),
        "float16": lambda: rng.normal(size=(n, k)).astype(np.float16),
        "nan": lambda: np.full((n, k), np.nan),
        "inf": lambda: np.full(n, np.inf),
        "huge": lambda: np.full((n, k), 1e308),
        "negative": lambda: -np.ones(n, dtype=np.int64),
        "bytes": lambda: np.array([b"\xff\xfe" * 3] * n),
        "datetime": lambda: np.arange(n).astype("datetime64[D]"),
        "dup": lambda: np.zeros(n, dtype=np.int64),
    }[kind]()


@pytest.mark.parametrize("first", NPZ_KEYS)
@FUZZ_EACH
@given(n=st.integers(1, 6), k=st.integers(2, 4), data=st.data())
def test_npz_reader_fuzz(first: str, n: int, k: int, data: st.DataObject) -> None:
    arrays = _valid_npz(n, k)
    arrays[first] = _odd_array(data, n, k)  # this key for sure, then a few mutations of any kind
    for _ in range(data.draw(st.integers(0, 2), label="mutations")):
        op = data.draw(st.sampled_from(["drop", "replace", "rename", "add"]), label="op")
        key = data.draw(st.sampled_from(NPZ_KEYS), label="key")
        if op == "drop":
            arrays.pop(key, None)
        elif op == "rename" and key in arrays:
            arrays[data.draw(st.sampled_from([*NPZ_KEYS, "meta/", "unknown"]), label="to")] = arrays.pop(key)
        else:
            arrays[key] = _odd_array(data, n, k)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "batch.npz"
        np.savez(path, **arrays)
        damaged = _flip_bytes(path, data)
        f = _read(path)
        if (
            f is not None
            and not damaged
            and "logits" in arrays
            and arrays["logits"].dtype.kind == "f"
            and arrays["logits"].ndim == 2
        ):
            # a frame read from a file holds the numbers stored in it
            np.testing.assert_array_equal(f.logits, arrays["logits"])


# --------------------------------------------------------------------------- parquet

CASTS = [pa.string(), pa.int64(), pa.float16(), pa.bool_(), pa.null()]


TABLE_OPS = ["drop", "rename", "cast", "nulls", "reorder", "metadata", "duplicate", "rows", "labels"]


def _mutate_table(table: pa.Table, data: st.DataObject, op: str | None = None) -> pa.Table:
    names = table.column_names
    col = data.draw(st.sampled_from(names), label="column")
    i = names.index(col)
    op = op or data.draw(st.sampled_from(TABLE_OPS), label="op")
    n = table.num_rows
    if op == "drop" and len(names) > 1:
        return table.remove_column(i)
    if op == "rename":
        new = data.draw(st.sampled_from(["label", "id", "text", "logit:desk 0", "probability:desk 0", "logit:", "x"]))
        return table.rename_columns([new if j == i else c for j, c in enumerate(names)])
    if op == "cast":
        to = data.draw(st.sampled_from(CASTS), label="to")
        try:
            arr = table.column(i).cast(to) if to != pa.null() else pa.nulls(n)
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            arr = pa.array([str(v) for v in table.column(i).to_pylist()])
        return table.set_column(i, col, arr)
    if op == "nulls" and n:
        values = table.column(i).to_pylist()
        values[data.draw(st.integers(0, n - 1), label="row")] = None
        return table.set_column(i, col, pa.array(values, type=table.column(i).type))
    if op == "reorder":
        order = data.draw(st.permutations(range(len(names))), label="order")
        return table.select(list(order))
    if op == "metadata":
        meta = data.draw(
            st.sampled_from(
                [
                    b"",
                    b"{",
                    b'{"classes": 5}',
                    b'{"classes": ["a"]}',
                    b"[" * 5000 + b"]" * 5000,
                    b'{"classes": ["desk 1", "desk 0", "desk 2", "desk 3"]}',
                    b"\xff\xfe",
                ]
            ),
            label="metadata",
        )
        return table.replace_schema_metadata({b"logitscope": meta})
    if op == "duplicate":
        return table.append_column(col, table.column(i))
    if op == "rows":
        return table.slice(0, data.draw(st.integers(0, n), label="rows"))
    if "label" in names:
        labels = data.draw(st.lists(st.one_of(st.integers(-3, 6), st.sampled_from(["desk 0", "desk 1", "nope"])),
                                    min_size=n, max_size=n), label="labels")  # fmt: skip
        kinds = {type(v) for v in labels}
        arr = pa.array(labels) if len(kinds) == 1 else pa.array([str(v) for v in labels])
        return table.set_column(names.index("label"), "label", arr)
    return table


def _check_label_classes(f: LogitFrame, table: pa.Table) -> None:
    """Each sample's label names the class the file says: by name, or by index in the stored class order."""
    column = table.column("label")
    if f.labels is None:  # a label column of nulls only: a batch without labels
        assert column.null_count == len(column)
        return
    # a null label is read as no label (-1), never as a class
    read = [f.classes[i] if i >= 0 else None for i in f.labels.tolist()]
    if pa.types.is_string(column.type) or pa.types.is_large_string(column.type):
        assert read == column.to_pylist()
        return
    try:
        stored = json.loads((table.schema.metadata or {})[b"logitscope"])["classes"]
    except (KeyError, ValueError, TypeError, RecursionError):
        stored = None
    assert isinstance(stored, list), "index labels were read although the file stores no class order"
    assert read == [None if i is None else stored[i] for i in column.to_pylist()]


@pytest.mark.parametrize("first", TABLE_OPS)
@FUZZ_EACH
@given(n=st.integers(1, 6), k=st.integers(2, 4), data=st.data())
def test_parquet_reader_fuzz(first: str, n: int, k: int, data: st.DataObject) -> None:
    arrays = _valid_npz(n, k)
    frame = LogitFrame(
        arrays["logits"], arrays["labels"], list(arrays["classes"]), arrays["ids"], texts=list(arrays["texts"])
    )
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "batch.parquet"
        frame.write(path)
        table = _mutate_table(pq.read_table(path), data, first)
        for _ in range(data.draw(st.integers(0, 2), label="mutations")):
            table = _mutate_table(table, data)
        pq.write_table(table, path, write_page_checksum=True)
        damaged = _flip_bytes(path, data)
        f = _read(path)
        if f is not None and not damaged and "label" in table.column_names:
            _check_label_classes(f, table)
        if f is not None and not damaged and f.n_samples == n and set(f.classes) == set(frame.classes):
            # columns are matched by name: each class keeps its own logits, whatever the column order
            for j, c in enumerate(frame.classes):
                col = f.logits[:, f.classes.index(c)]
                assert np.array_equal(col, frame.logits[:, j]) or table.schema.field(f"logit:{c}").type != pa.float32()


# --------------------------------------------------------------------------- relabel JSON

JSON_VALUES = st.recursive(
    st.none()
    | st.booleans()
    | st.integers()
    | st.floats()
    | st.text(max_size=8)
    | st.sampled_from(["\ud800", "=cmd()", "\r\n", "x" * 300]),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=5), inner, max_size=3),
    max_leaves=8,
)


def _valid_relabel(folder: Path) -> Path:
    path = folder / "marks.json"
    store = RelabelStore(path)
    store.add_many([{"id": f"T-{i}", "suggested_label": "billing", "row": i, "given_label": "hardware",
                     "note": f"note {i}"} for i in range(3)])  # fmt: skip
    store.add(7, "hardware", note="an integer id")
    return path


def _paths(doc: Any, prefix: tuple = ()) -> list[tuple]:
    out = [prefix]
    if isinstance(doc, dict):
        for k, v in doc.items():
            out += _paths(v, (*prefix, k))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            out += _paths(v, (*prefix, i))
    return out


def _replace(doc: Any, path: tuple, value: Any) -> Any:
    if not path:
        return value
    doc[path[0]] = _replace(doc[path[0]], path[1:], value)
    return doc


@FUZZ
@given(data=st.data())
def test_relabel_reader_fuzz(data: st.DataObject) -> None:
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        path = _valid_relabel(folder)
        doc = json.loads(path.read_text(encoding="utf-8"))
        for _ in range(data.draw(st.integers(0, 3), label="mutations")):
            op = data.draw(st.sampled_from(["replace", "delete", "duplicate", "nest"]), label="op")
            where = data.draw(st.sampled_from(_paths(doc)), label="path")
            if op == "replace":
                doc = _replace(doc, where, data.draw(JSON_VALUES, label="value"))
            elif op == "delete" and where and isinstance(doc, dict | list):
                parent = doc
                for key in where[:-1]:
                    parent = parent[key]
                with contextlib.suppress(KeyError, IndexError, TypeError):
                    del parent[where[-1]]
            elif op == "duplicate" and isinstance(doc, dict) and isinstance(doc.get("marks"), list) and doc["marks"]:
                doc["marks"].append(doc["marks"][0])
            elif op == "nest":
                doc = _replace(doc, where, json.loads("[" * 50 + "1" + "]" * 50))
        text = json.dumps(doc, ensure_ascii=data.draw(st.booleans(), label="ascii"))
        text = data.draw(
            st.sampled_from(
                [text, text, text[: len(text) // 2], text.replace("1", "9" * 5000, 1), "[" * 100_000 + "]" * 100_000]
            ),
            label="text",
        )
        path.write_bytes(text.encode("utf-8", "surrogatepass"))
        before = path.read_bytes()
        with time_limit(), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                store = RelabelStore(path)
            except FileFormatError:
                assert path.read_bytes() == before  # refused and left as it was
                return
            # opened: every view works, and a new mark is kept next to the old ones
            n = len(store)
            table = store.to_frame()
            assert len(table) == n
            store.export_csv(folder / "marks.csv")
            label = store.classes[0] if store.classes else "billing"
            store.add("fuzz-new", label, note="added after the fuzz")
            again = RelabelStore(path)
            assert len(again) == n + ("fuzz-new" not in table["id"].tolist()) and "fuzz-new" in again


@pytest.mark.parametrize("maker", ["npz", "parquet"])
def test_fuzz_starting_points_are_valid(tmp_path: Path, maker: str) -> None:
    # the unmutated files read back as the frame they came from: the properties above start from right answers
    arrays = _valid_npz(5, 3)
    if maker == "npz":
        np.savez(tmp_path / "a.npz", **arrays)
        f = LogitFrame.read(tmp_path / "a.npz")
    else:
        LogitFrame(arrays["logits"], arrays["labels"], list(arrays["classes"]), arrays["ids"]).write(
            tmp_path / "a.parquet"
        )
        f = LogitFrame.read(tmp_path / "a.parquet")
    np.testing.assert_array_equal(f.logits, arrays["logits"])
    np.testing.assert_array_equal(f.labels, arrays["labels"])
