"""The Zarr store: a batch of logits on disk in row chunks, written at once or appended batch by batch.

Layout (a Zarr group, format 3; a directory ``NAME.zarr``):

===============  =========  ====================================================
node             shape      meaning
===============  =========  ====================================================
``logits``       (N, K)     raw logits, float16/32/64, chunked by rows only
``labels``       (N,)       optional; int64 class indices
``ids``          (N,)       int64 or string sample ids, unique
attributes       -          ``logitscope``: ``{"layout": 1, "rows": N,
                            "classes": [K names], "labelled": bool,
                            "source": "logits"}``
===============  =========  ====================================================

``rows`` in the attributes is the number of committed rows: an appender
writes a batch beyond it and only then raises it, so a reader never sees a
half-written batch, and a store whose writer died is readable up to its last
whole batch (arrays may be longer than ``rows``; the rest is ignored and
overwritten by the next append).

Examples
--------
>>> import numpy as np, tempfile, pathlib
>>> path = pathlib.Path(tempfile.mkdtemp()) / "tickets.zarr"
>>> with ZarrAppender(path, classes=["billing", "login", "outage"]) as out:
...     out.append(np.eye(3, dtype=np.float32), labels=[0, 1, 1])
...     out.append(np.ones((2, 3), dtype=np.float32), labels=[2, 2])
>>> store_info(path)["rows"], store_info(path)["classes"]
(5, ['billing', 'login', 'outage'])
"""

from __future__ import annotations

import os
import shutil
import uuid
from collections.abc import Sequence
from pathlib import Path
from types import TracebackType
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike

from ..analysis._validation import check_labels, check_logits
from ..errors import ClassNameError, FileFormatError, InputTypeError, LabelError, ShapeError

if TYPE_CHECKING:
    from ..frame import LogitFrame

__all__ = ["LAYOUT_VERSION", "ZarrAppender", "default_chunk_rows", "store_info", "write_zarr"]

LAYOUT_VERSION = 1
_ATTR = "logitscope"
#: Bytes of logits per chunk: large enough that a task is worth scheduling, small enough for many in memory.
CHUNK_BYTES = 32 << 20


def default_chunk_rows(n_classes: int, itemsize: int) -> int:
    """Rows per chunk so that a chunk of logits holds about 32 MiB.

    Examples
    --------
    >>> default_chunk_rows(10, 4)
    838860
    """
    return max(1, CHUNK_BYTES // max(1, n_classes * itemsize))


def _zarr() -> Any:
    try:
        import zarr
    except ImportError as exc:  # pragma: no cover - a declared dependency
        raise InputTypeError("reading or writing a Zarr store needs the zarr package (pip install zarr)") from exc
    return zarr


def store_info(path: str | os.PathLike[str]) -> dict[str, Any]:
    """The ``logitscope`` attributes of a store, checked against its arrays.

    Raises
    ------
    FileFormatError
        If ``path`` is no Zarr group in this layout.
    """
    zarr = _zarr()
    source = Path(path)
    if not source.is_dir():
        raise FileFormatError(f"{source}: no such Zarr store (a directory)")
    try:
        group = zarr.open_group(source, mode="r")
    except Exception as exc:  # zarr raises several kinds
        raise FileFormatError(f"{source}: not a readable Zarr group ({exc})") from exc
    info = dict(group.attrs.get(_ATTR) or {})
    if not info or "logits" not in group:
        raise FileFormatError(f"{source}: a Zarr group without logitscope attributes or a 'logits' array")
    logits = group["logits"]
    rows = int(info.get("rows", -1))
    if logits.ndim != 2 or not 0 <= rows <= logits.shape[0]:
        raise FileFormatError(f"{source}: 'logits' has shape {logits.shape} but the attributes commit {rows} rows")
    classes = list(info.get("classes") or [])
    if len(classes) != logits.shape[1]:
        raise FileFormatError(f"{source}: {len(classes)} class names for {logits.shape[1]} logit columns")
    for name in ("labels", "ids"):
        if name in group and group[name].shape[0] < rows:
            raise FileFormatError(f"{source}: '{name}' holds {group[name].shape[0]} rows, fewer than {rows}")
    if bool(info.get("labelled")) != ("labels" in group):
        raise FileFormatError(f"{source}: the attributes and the arrays disagree on whether labels are stored")
    return info


def _check_names(classes: Sequence[str]) -> list[str]:
    names = [str(c) for c in classes]
    if len(set(names)) != len(names):
        raise ClassNameError("class names must be unique")
    return names


class ZarrAppender:
    """Append batches of logits (with labels and ids) to a Zarr store while a model predicts.

    Parameters
    ----------
    path : path-like
        The store (a directory, conventionally ``NAME.zarr``). If it exists
        and ``overwrite`` is False, batches are appended after its committed
        rows; its classes, dtype and labelling must match.
    classes : sequence of str
        Class names in logit-column order.
    dtype : numpy dtype, default float32
        Stored logit dtype (float16, float32 or float64).
    labelled : bool, default True
        Whether every batch comes with labels.
    string_ids : bool, default False
        Store ids as strings rather than int64; without ids the row numbers
        are used.
    chunk_rows : int, optional
        Rows per chunk (default about 32 MiB of logits).
    overwrite : bool, default False
        Start a new store in place of an existing one.

    Every :meth:`append` checks its batch (shape, finiteness, label range)
    before writing, and commits it by raising ``rows`` in the attributes.
    """

    def __init__(
        self,
        path: str | os.PathLike[str],
        classes: Sequence[str],
        dtype: Any = np.float32,
        *,
        labelled: bool = True,
        string_ids: bool = False,
        chunk_rows: int | None = None,
        overwrite: bool = False,
    ) -> None:
        zarr = _zarr()
        self.path = Path(path)
        names = _check_names(classes)
        k = len(names)
        if k < 2:
            raise ShapeError(f"at least 2 classes are needed, got {k}")
        dt = np.dtype(dtype)
        if dt.kind != "f":
            raise InputTypeError(f"logits are stored as float16, float32 or float64, not {dt}")
        if self.path.exists() and not overwrite:
            info = store_info(self.path)
            group = zarr.open_group(self.path, mode="r+")
            if list(info["classes"]) != names:
                raise ClassNameError(f"{self.path}: the store holds classes {info['classes']}, not {names}")
            if group["logits"].dtype != dt:
                raise InputTypeError(f"{self.path}: the store holds {group['logits'].dtype} logits, not {dt}")
            if bool(info["labelled"]) != labelled:
                raise LabelError(f"{self.path}: the store is {'' if info['labelled'] else 'un'}labelled")
            self._rows = int(info["rows"])
            self._group = group
        else:
            if self.path.exists():
                shutil.rmtree(self.path)
            rows = chunk_rows or default_chunk_rows(k, dt.itemsize)
            group = zarr.open_group(self.path, mode="w")
            # logits compress poorly (noise in the low mantissa bits): stored raw, read at disk speed
            group.create_array("logits", shape=(0, k), dtype=dt, chunks=(rows, k), compressors=None)
            if labelled:
                group.create_array("labels", shape=(0,), dtype=np.int64, chunks=(rows,))
            group.create_array("ids", shape=(0,), dtype=str if string_ids else np.int64, chunks=(rows,))
            group.attrs[_ATTR] = {
                "layout": LAYOUT_VERSION, "rows": 0, "classes": names, "labelled": labelled, "source": "logits",
            }  # fmt: skip
            self._rows = 0
            self._group = group
        self._classes = names
        self._labelled = labelled

    @property
    def rows(self) -> int:
        """Rows committed so far."""
        return self._rows

    def append(self, logits: ArrayLike, labels: ArrayLike | None = None, ids: ArrayLike | None = None) -> None:
        """Check one batch and append it; it is committed when this returns."""
        z = check_logits(logits)
        n, k = z.shape
        if k != len(self._classes):
            raise ShapeError(f"the batch has {k} logit columns but the store has {len(self._classes)} classes")
        if self._labelled and labels is None:
            raise LabelError("this store is labelled: every batch needs labels")
        if not self._labelled and labels is not None:
            raise LabelError("this store is unlabelled: a batch cannot bring labels")
        y = None if labels is None else check_labels(labels, n, k)
        ids_array = self._group["ids"]
        if ids is None:
            if ids_array.dtype.kind != "i":
                raise InputTypeError("this store keeps string ids: every batch needs ids")
            ident: np.ndarray = np.arange(self._rows, self._rows + n, dtype=np.int64)
        else:
            ident = np.asarray(ids)
            if ident.shape != (n,):
                raise ShapeError(f"ids must be 1-D of length {n}, got shape {ident.shape}")
            ident = ident.astype(str) if ids_array.dtype.kind != "i" else ident.astype(np.int64)
        start, stop = self._rows, self._rows + n
        for name, values in (("logits", z), ("labels", y), ("ids", ident)):
            if values is None:
                continue
            arr = self._group[name]
            if arr.shape[0] < stop:
                arr.resize((stop, *arr.shape[1:]))
            arr[start:stop] = values.astype(arr.dtype, copy=False) if name == "logits" else values
        info = dict(self._group.attrs[_ATTR])
        info["rows"] = stop
        self._group.attrs[_ATTR] = info
        self._rows = stop

    def close(self) -> None:
        """Trim the arrays to the committed rows (nothing else to flush: every append is on disk)."""
        for name in ("logits", "labels", "ids"):
            if name in self._group and self._group[name].shape[0] != self._rows:
                arr = self._group[name]
                arr.resize((self._rows, *arr.shape[1:]))

    def __enter__(self) -> ZarrAppender:
        return self

    def __exit__(
        self, exc_type: type[BaseException] | None, exc: BaseException | None, tb: TracebackType | None
    ) -> None:
        if exc_type is None:
            self.close()


def write_zarr(
    frame: LogitFrame,
    path: str | os.PathLike[str],
    chunk_rows: int | None = None,
    *,
    drop_extras: bool = False,
) -> None:
    """Write a frame's logits, labels, ids and class names as a Zarr store, atomically.

    The store is built in a temporary directory beside ``path`` and renamed
    into place; an existing store at ``path`` is replaced only once the new
    one is complete. Metadata columns and payloads have no place in the
    store: a frame holding some is refused (write Parquet or npz) unless
    ``drop_extras=True``.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from logitscope import LogitFrame
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "postcodes.zarr"
    >>> write_zarr(LogitFrame(np.eye(3), labels=[0, 1, 2]), p)
    >>> store_info(p)["rows"]
    3
    """
    if not drop_extras and (len(frame.meta.columns) or frame.payload is not None):
        raise FileFormatError(
            "the frame carries metadata or a payload, which a Zarr store does not keep; "
            "write .parquet or .npz, or pass drop_extras=True"
        )
    target = Path(path)
    tmp = target.with_name(f".{target.name}.tmp-{uuid.uuid4().hex[:8]}")
    string_ids = np.asarray(frame.ids).dtype.kind not in "iu"
    try:
        out = ZarrAppender(
            tmp, frame.classes, frame.logits.dtype, labelled=frame.has_labels, string_ids=string_ids,
            chunk_rows=chunk_rows,
        )  # fmt: skip
        rows = out._group["logits"].chunks[0]
        ids = np.asarray(frame.ids)
        for start in range(0, frame.n_samples, rows):
            stop = min(frame.n_samples, start + rows)
            labels = None if frame.labels is None else frame.labels[start:stop]
            out.append(frame.logits[start:stop], labels=labels, ids=ids[start:stop])
        out.close()
        _replace_dir(tmp, target)
    finally:
        if tmp.exists():
            shutil.rmtree(tmp, ignore_errors=True)


def _replace_dir(new: Path, target: Path) -> None:
    """Move directory ``new`` to ``target``; an old ``target`` is kept aside until the move succeeded."""
    if not target.exists():
        os.replace(new, target)
        return
    if not target.is_dir() or not (target / "zarr.json").exists():
        raise FileFormatError(f"{target}: exists and is not a Zarr store; not replaced")
    old = target.with_name(f".{target.name}.old-{uuid.uuid4().hex[:8]}")
    os.replace(target, old)
    try:
        os.replace(new, target)
    except OSError:
        os.replace(old, target)
        raise
    shutil.rmtree(old, ignore_errors=True)
