"""Reading and writing frames as ``.npz`` and ``.parquet``.

NPZ layout (``numpy.savez``; no pickled objects):

==================  =========  ===========================================
key                 shape      meaning
==================  =========  ===========================================
``logits``          (N, K)     raw logits, any float dtype; or instead
``probabilities``   (N, K)     probabilities, rows summing to one
``labels``          (N,)       optional; class indices, -1 where a row has no label
``classes``         (K,)       optional; class names (strings)
``ids``             (N,)       optional; unique sample ids
``images``          (N, H, W)  optional; or (N, H, W, C)
``texts``           (N,)       optional; strings
``image_paths``     (N,)       optional; strings
``meta/<column>``   (N,)       optional; one metadata column each
==================  =========  ===========================================

Parquet layout: one row per sample; a column ``id``, optionally ``label``,
one float column per class named ``logit:<class name>`` (or
``probability:<class name>``), optionally ``text`` or ``image_path``; every
other column is metadata. Columns are matched to classes by name, so their
order does not change the numbers. The ``label`` column holds class names
(what :func:`write_frame` writes) or class indices; indices need the class
order, which :func:`write_frame` stores in the file's key-value metadata under
the key ``logitscope`` (JSON ``{"classes": [...]}``). A file with index labels
and no stored class order is refused, as is a stored order that names other
classes than the columns. A null label marks a row without one (a partly
labelled batch).
"""

from __future__ import annotations

import json
import os
import re
import warnings
import zipfile
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._atomic import atomic_write
from .errors import FileFormatError, InputTypeError, LogitscopeError, LooksLikeProbabilitiesWarning, describe_rows

if TYPE_CHECKING:
    from .frame import LogitFrame

__all__ = ["read_frame", "write_frame"]

_META = "meta/"
#: key of the Parquet key-value metadata that stores the class order
_KEY = b"logitscope"
#: columns pandas adds for a DataFrame's index (not metadata of the samples)
_PANDAS_INDEX = re.compile(r"__index_level_\d+__")


def _kind(path: Path) -> str:
    suffix = path.suffix.lower()
    if suffix in (".npz",):
        return "npz"
    if suffix in (".parquet", ".pq"):
        return "parquet"
    if suffix == ".zarr":
        return "zarr"  # layout in logitscope.chunked.store
    raise FileFormatError(f"{path}: unknown file type {suffix!r}; use .npz, .parquet or .zarr")


def write_frame(frame: LogitFrame, path: str | os.PathLike[str]) -> None:
    """Write ``frame`` to ``path`` (``.npz`` or ``.parquet``) atomically.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from logitscope import LogitFrame
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "batch.npz"
    >>> write_frame(LogitFrame(np.eye(2) * 3.0, labels=[0, 1], classes=["invoice", "refund"]), p)
    >>> read_frame(p).classes
    ('invoice', 'refund')
    """
    target = Path(path)
    kind = _kind(target)
    if kind == "zarr":
        from .chunked.store import write_zarr

        write_zarr(frame, target)
        return
    if kind == "npz":
        arrays: dict[str, Any] = {"logits": np.asarray(frame.logits), "classes": np.array(frame.classes, dtype=str)}
        if frame.labels is not None:
            arrays["labels"] = np.asarray(frame.labels)
        arrays["ids"] = np.asarray(frame.ids)
        pay = frame.payload
        if pay is not None:
            arrays[pay.kind] = np.asarray(pay.data) if pay.kind == "images" else np.array(pay.data, dtype=str)
        for col in frame.meta.columns:
            values = frame.meta[col].to_numpy()
            if values.dtype.kind == "O":
                values = values.astype(str)
            arrays[_META + str(col)] = values
        with atomic_write(target, "wb") as fh:
            np.savez(fh, **arrays)
        return
    import pyarrow as pa
    import pyarrow.parquet as pq

    table = frame.meta
    data: dict[str, Any] = {"id": np.asarray(frame.ids)}
    if frame.labels is not None:
        y = np.asarray(frame.labels)
        names = np.asarray(frame.classes, dtype=object)[np.maximum(y, 0)]  # names: order-proof
        names[y < 0] = None  # a row without a label: a null
        data["label"] = names
    z = np.asarray(frame.logits)
    for j, name in enumerate(frame.classes):
        data[f"logit:{name}"] = z[:, j]
    pay = frame.payload
    if pay is not None:
        if pay.kind == "images":
            raise FileFormatError("image arrays are not stored in Parquet; write .npz or attach image_paths")
        data["text" if pay.kind == "texts" else "image_path"] = list(pay.data)
    clash = [c for c in table.columns if c in data]
    if clash:
        raise FileFormatError(f"metadata columns clash with reserved names: {clash}")
    out = pd.concat([pd.DataFrame(data), table], axis=1)
    try:
        arrow = pa.Table.from_pandas(out, preserve_index=False)
        stored = json.dumps({"classes": list(frame.classes)}, ensure_ascii=False).encode()
        arrow = arrow.replace_schema_metadata({**(arrow.schema.metadata or {}), _KEY: stored})
        with atomic_write(target, "wb") as fh:
            pq.write_table(arrow, fh, write_page_checksum=True)  # a damaged page is found when read
    except (TypeError, ValueError, pa.ArrowException) as exc:  # pyarrow's conversion errors
        raise FileFormatError(f"{target}: the frame cannot be stored as Parquet ({exc})") from exc


def _check_source(source: Path) -> None:
    """A readable regular file, or a FileFormatError that says what it is instead."""
    if not source.exists():
        raise FileFormatError(f"{source}: no such file")
    if source.is_dir():
        raise FileFormatError(f"{source}: is a directory, not a file")
    if not source.is_file():
        raise FileFormatError(f"{source}: not a regular file (a device, pipe or socket)")
    try:
        with open(source, "rb") as fh:
            fh.read(1)
    except OSError as exc:
        raise FileFormatError(f"{source}: the file cannot be read ({exc.strerror or exc})") from exc


def _as_names(arr: np.ndarray) -> Any:
    """A 1-D array of texts as a list of str (bytes decoded); any other shape is passed on to be refused."""
    if arr.ndim != 1:
        return arr
    return [t.decode("utf-8", "replace") if isinstance(t, bytes) else str(t) for t in arr.tolist()]


def _rows_of(mask: np.ndarray) -> str:
    return describe_rows(np.flatnonzero(mask))


def _prefixed(source: Path, exc: Exception) -> Exception:
    """The same error, naming the file."""
    return type(exc)(f"{source}: {exc}")


def read_frame(path: str | os.PathLike[str]) -> LogitFrame:
    """Read a frame written by :func:`write_frame` or laid out as the module documents.

    Raises
    ------
    FileFormatError
        When the file is missing, a directory, unreadable, or not laid out as
        documented (the message names the file, and the key, column or rows).
    LogitscopeError, InputTypeError
        When the content is refused by :class:`~logitscope.LogitFrame` (the
        message starts with the file's path).
    """
    source = Path(path)
    kind = _kind(source)
    if kind == "zarr":  # a chunked store read whole into memory (logitscope.chunked reads it lazily)
        from .chunked import open_chunked
        from .chunked.analysis import compute
        from .frame import LogitFrame

        if not source.is_dir():
            raise FileFormatError(f"{source}: no such Zarr store (a .zarr store is a folder)")
        cf = open_chunked(source)
        z, y, ids = compute(cf.logits, cf.labels, cf.ids)
        ids = np.array([str(i) for i in ids.tolist()]) if ids.dtype.kind not in "iu" else ids
        return LogitFrame(z, labels=y, classes=cf.classes, ids=ids)
    _check_source(source)
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", LooksLikeProbabilitiesWarning)
            frame = _read_npz(source) if kind == "npz" else _read_parquet(source)
    except FileFormatError:
        raise
    except (LogitscopeError, InputTypeError) as exc:
        raise _prefixed(source, exc) from exc
    for w in caught:  # said again, naming the file
        text = f"{source}: {w.message}" if issubclass(w.category, LooksLikeProbabilitiesWarning) else w.message
        warnings.warn(text, w.category, stacklevel=2)
    return frame


def _read_npz(source: Path) -> LogitFrame:
    from .frame import LogitFrame

    if not zipfile.is_zipfile(source):
        raise FileFormatError(f"{source}: not an .npz archive (no zip header); was it written by numpy.savez?")
    try:
        with np.load(source, allow_pickle=False) as npz:
            arrays = {k: npz[k] for k in npz.files}
    except Exception as exc:  # zipfile, numpy's header parser and the allocator raise many kinds
        raise FileFormatError(f"{source}: not a readable .npz file ({type(exc).__name__}: {exc})") from exc
    odd = [k for k, v in arrays.items() if not isinstance(v, np.ndarray)]
    if odd:
        raise FileFormatError(f"{source}: member {odd[0]!r} is not a numpy array (.npy)")
    if ("logits" in arrays) == ("probabilities" in arrays):
        raise FileFormatError(f"{source}: needs exactly one of the arrays 'logits' or 'probabilities'; "
                              f"found {sorted(arrays)[:10]}")  # fmt: skip
    matrix = arrays["logits"] if "logits" in arrays else arrays["probabilities"]
    n = matrix.shape[0] if matrix.ndim >= 1 else None
    meta_cols = {k[len(_META) :]: v for k, v in arrays.items() if k.startswith(_META)}
    for name, v in meta_cols.items():
        if v.ndim != 1 or (n is not None and v.shape[0] != n):
            raise FileFormatError(
                f"{source}: {_META}{name} must be 1-D with one value per sample ({n} samples), got shape {v.shape}"
            )
    meta = pd.DataFrame(meta_cols) if meta_cols else None
    classes = _as_names(arrays["classes"]) if "classes" in arrays else None
    payload: dict[str, Any] = {k: arrays[k] for k in ("images", "texts", "image_paths") if k in arrays}
    for k in ("texts", "image_paths"):
        if k in payload:
            payload[k] = _as_names(payload[k])
    common: dict[str, Any] = {
        "labels": arrays.get("labels"),
        "classes": classes,
        "ids": arrays.get("ids"),
        "meta": meta,
    }
    if "logits" in arrays:
        return LogitFrame(matrix, **common, **payload, copy=False)
    return LogitFrame.from_probabilities(matrix, **common, **payload, copy=False)


def _stored_classes(source: Path, metadata: dict[bytes, bytes] | None) -> list[str] | None:
    raw = (metadata or {}).get(_KEY)
    if raw is None:
        return None
    try:
        stored = json.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        raise FileFormatError(f"{source}: the class order stored under {_KEY.decode()!r} is not JSON ({exc})") from exc
    classes = stored.get("classes") if isinstance(stored, dict) else None
    if not isinstance(classes, list) or not all(isinstance(c, str) for c in classes):
        raise FileFormatError(f"{source}: the metadata {_KEY.decode()!r} must hold a list of class names")
    return classes


def _read_parquet(source: Path) -> LogitFrame:
    import pyarrow as pa
    import pyarrow.compute as pc
    import pyarrow.parquet as pq

    from .frame import LogitFrame

    try:
        arrow = pq.read_table(source, page_checksum_verification=True)
        names = [str(c) for c in arrow.column_names]  # a name that is not UTF-8 fails here
    except Exception as exc:  # pyarrow raises several kinds
        raise FileFormatError(f"{source}: not a readable Parquet file ({exc})") from exc
    if len(set(names)) != len(names):
        dup = next(c for c in names if names.count(c) > 1)
        raise FileFormatError(f"{source}: the column {dup!r} appears more than once")
    logit_cols = [c for c in names if c.startswith("logit:")]
    prob_cols = [c for c in names if c.startswith("probability:")]
    if bool(logit_cols) == bool(prob_cols):
        raise FileFormatError(f"{source}: needs columns 'logit:<class>' or 'probability:<class>' (one kind)")
    cols = logit_cols or prob_cols
    for c in cols:
        col = arrow.column(c)
        if not (pa.types.is_floating(col.type) or pa.types.is_integer(col.type)):
            raise FileFormatError(f"{source}: column {c!r} must hold numbers, but holds {col.type}")
        if col.null_count:
            mask = np.asarray(pc.is_null(col))
            raise FileFormatError(f"{source}: column {c!r} has missing values (null) at {_rows_of(mask)}")
    for c in ("id", "text", "image_path"):  # a null label is a row without a label (a partly labelled batch)
        if c in names and arrow.column(c).null_count:
            mask = np.asarray(pc.is_null(arrow.column(c)))
            raise FileFormatError(f"{source}: column {c!r} has missing values (null) at {_rows_of(mask)}")
    classes = [c.split(":", 1)[1] for c in cols]
    stored = _stored_classes(source, arrow.schema.metadata)
    if stored is not None:
        if sorted(stored) != sorted(classes):
            extra, absent = sorted(set(stored) - set(classes)), sorted(set(classes) - set(stored))
            raise FileFormatError(
                f"{source}: the class order stored in the file's metadata does not match the columns "
                f"(stored but no column: {extra[:5]}; column but not stored: {absent[:5]})"
            )
        by_name = dict(zip(classes, cols, strict=True))
        classes, cols = stored, [by_name[c] for c in stored]
    # every column the layout names is taken from Arrow as its type says (a file's pandas metadata may differ)
    labels = None
    if "label" in names:
        label = arrow.column("label")
        as_names = (
            pa.types.is_string(label.type)
            or pa.types.is_large_string(label.type)
            or (pa.types.is_dictionary(label.type) and pa.types.is_string(label.type.value_type))
        )
        if not as_names and stored is None:
            raise FileFormatError(
                f"{source}: the label column holds class indices ({label.type}) but the file does not store the "
                "class order, so which column an index means is unknown; write the labels as class names, "
                "or write the file with LogitFrame.write (it stores the order)"
            )
        labels = np.array(label.to_pylist(), dtype=object) if as_names else label.to_numpy(zero_copy_only=False)
    try:
        matrix = np.column_stack([arrow.column(c).to_numpy() for c in cols])
        reserved = set(cols) | {"id", "label", "text", "image_path"}
        kept = [c for c in names if c not in reserved and not _PANDAS_INDEX.fullmatch(c)]
        meta = arrow.select(kept).to_pandas(ignore_metadata=True) if kept else None
    except (pa.ArrowException, ValueError, TypeError) as exc:
        raise FileFormatError(f"{source}: the columns cannot be read as arrays ({exc})") from exc
    payload: dict[str, Any] = {}
    if "text" in names:
        payload["texts"] = [str(t) for t in arrow.column("text").to_pylist()]
    if "image_path" in names:
        payload["image_paths"] = [str(t) for t in arrow.column("image_path").to_pylist()]
    ids = None
    if "id" in names:
        column = arrow.column("id")
        numeric = pa.types.is_integer(column.type) or pa.types.is_floating(column.type)
        ids = column.to_numpy() if numeric else np.array([str(v) for v in column.to_pylist()], dtype=object)
    common: dict[str, Any] = {"labels": labels, "classes": classes, "ids": ids, "meta": meta}
    if logit_cols:
        return LogitFrame(matrix, **common, **payload, copy=False)
    return LogitFrame.from_probabilities(matrix, **common, **payload, copy=False)
