"""Reading and writing frames as ``.npz`` and ``.parquet``.

NPZ layout (``numpy.savez``; no pickled objects):

==================  =========  ===========================================
key                 shape      meaning
==================  =========  ===========================================
``logits``          (N, K)     raw logits, any float dtype; or instead
``probabilities``   (N, K)     probabilities, rows summing to one
``labels``          (N,)       optional; class indices
``classes``         (K,)       optional; class names (strings)
``ids``             (N,)       optional; unique sample ids
``images``          (N, H, W)  optional; or (N, H, W, C)
``texts``           (N,)       optional; strings
``image_paths``     (N,)       optional; strings
``meta/<column>``   (N,)       optional; one metadata column each
==================  =========  ===========================================

Parquet layout: one row per sample; a column ``id``, optionally ``label``
(class index), one float column per class named ``logit:<class name>`` (or
``probability:<class name>``) in class order, optionally ``text`` or
``image_path``; every other column is metadata.
"""

from __future__ import annotations

import os
import zipfile
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._atomic import atomic_write
from .errors import FileFormatError, LogitscopeError

if TYPE_CHECKING:
    from .frame import LogitFrame

__all__ = ["read_frame", "write_frame"]

_META = "meta/"


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
    >>> write_frame(LogitFrame(np.eye(2), labels=[0, 1], classes=["invoice", "refund"]), p)
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
    table = frame.meta
    data: dict[str, Any] = {"id": np.asarray(frame.ids)}
    if frame.labels is not None:
        data["label"] = np.asarray(frame.labels)
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
        with atomic_write(target, "wb") as fh:
            out.to_parquet(fh, index=False)
    except (TypeError, ValueError) as exc:  # pyarrow's conversion errors subclass these
        raise FileFormatError(f"{target}: the frame cannot be stored as Parquet ({exc})") from exc


def read_frame(path: str | os.PathLike[str]) -> LogitFrame:
    """Read a frame written by :func:`write_frame` or laid out as the module documents."""
    from .frame import LogitFrame

    source = Path(path)
    if not source.exists():
        raise FileFormatError(f"{source}: no such file")
    kind = _kind(source)
    if kind == "zarr":
        from .chunked import open_chunked
        from .chunked.analysis import compute

        cf = open_chunked(source)
        z, y, ids = compute(cf.logits, cf.labels, cf.ids)
        ids = np.array([str(i) for i in ids.tolist()]) if ids.dtype.kind not in "iu" else ids
        return LogitFrame(z, labels=y, classes=cf.classes, ids=ids)
    if kind == "npz":
        if not zipfile.is_zipfile(source):
            raise FileFormatError(f"{source}: not an .npz archive (no zip header); was it written by numpy.savez?")
        try:
            with np.load(source, allow_pickle=False) as npz:
                arrays = {k: npz[k] for k in npz.files}
        except (zipfile.BadZipFile, OSError, ValueError, EOFError) as exc:
            raise FileFormatError(f"{source}: not a readable .npz file ({exc})") from exc
        if ("logits" in arrays) == ("probabilities" in arrays):
            raise FileFormatError(f"{source}: needs exactly one of the arrays 'logits' or 'probabilities'; "
                                  f"found {sorted(arrays)}")  # fmt: skip
        meta_cols = {k[len(_META) :]: v for k, v in arrays.items() if k.startswith(_META)}
        meta = pd.DataFrame(meta_cols) if meta_cols else None
        classes = arrays["classes"].tolist() if "classes" in arrays else None
        payload = {k: arrays[k] for k in ("images", "texts", "image_paths") if k in arrays}
        if "texts" in payload:
            payload["texts"] = [str(t) for t in payload["texts"].tolist()]
        if "image_paths" in payload:
            payload["image_paths"] = [str(t) for t in payload["image_paths"].tolist()]
        common: dict[str, Any] = {
            "labels": arrays.get("labels"),
            "classes": classes,
            "ids": arrays.get("ids"),
            "meta": meta,
        }
        try:
            if "logits" in arrays:
                return LogitFrame(arrays["logits"], **common, **payload)
            return LogitFrame.from_probabilities(arrays["probabilities"], **common, **payload)
        except LogitscopeError as exc:
            raise type(exc)(f"{source}: {exc}") from exc
    try:
        table = pd.read_parquet(source)
    except Exception as exc:  # pyarrow raises several kinds
        raise FileFormatError(f"{source}: not a readable Parquet file ({exc})") from exc
    logit_cols = [c for c in table.columns if str(c).startswith("logit:")]
    prob_cols = [c for c in table.columns if str(c).startswith("probability:")]
    if bool(logit_cols) == bool(prob_cols):
        raise FileFormatError(f"{source}: needs columns 'logit:<class>' or 'probability:<class>' (one kind)")
    cols = logit_cols or prob_cols
    classes = [str(c).split(":", 1)[1] for c in cols]
    matrix = table[cols].to_numpy()
    reserved = set(cols) | {"id", "label", "text", "image_path"}
    meta = table[[c for c in table.columns if c not in reserved]]
    payload = {}
    if "text" in table:
        payload["texts"] = table["text"].astype(str).tolist()
    if "image_path" in table:
        payload["image_paths"] = table["image_path"].astype(str).tolist()
    common = {
        "labels": table["label"].to_numpy() if "label" in table else None,
        "classes": classes,
        "ids": table["id"].to_numpy() if "id" in table else None,
        "meta": meta if len(meta.columns) else None,
    }
    try:
        if logit_cols:
            return LogitFrame(matrix, **common, **payload)
        return LogitFrame.from_probabilities(matrix, **common, **payload)
    except LogitscopeError as exc:
        raise type(exc)(f"{source}: {exc}") from exc
