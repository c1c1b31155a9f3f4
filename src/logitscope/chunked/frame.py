"""A batch of logits read lazily in row chunks: a Zarr store, a folder of Parquet files or numpy memmaps.

:class:`ChunkedFrame` holds dask arrays and reads nothing until a result is
asked for. Every chunk is read by the task that needs it, from the file
itself, so on a dask.distributed cluster the workers read their own chunks
and the client never holds the matrix. Validation (finite logits, labels in
range) happens chunk by chunk in the same passes that compute the numbers;
errors name global row numbers.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

from ..analysis._validation import check_temperature
from ..errors import FileFormatError, InputTypeError, LabelError, ShapeError

__all__ = ["ChunkedFrame", "is_chunked_source", "open_chunked"]


def _da() -> Any:
    import dask.array as da

    return da


@dataclass(frozen=True)
class ChunkedFrame:
    """Logits (N, K) as a dask array chunked by rows, with labels, ids and class names.

    Build one with :func:`open_chunked`, :meth:`from_zarr`, :meth:`from_parquet`
    or :meth:`from_memmap`. The analysis methods (:meth:`summary`,
    :meth:`fit_temperature`, :meth:`reliability_bins`, ...) return the same
    dataclasses as the in-memory analysis layer.
    """

    logits: Any
    labels: Any | None
    ids: Any
    classes: tuple[str, ...]
    temperature: float = 1.0
    source: str = "logits"
    origin: str = ""

    def __post_init__(self) -> None:
        z = self.logits
        if z.ndim != 2 or z.shape[1] < 2:
            raise ShapeError(f"logits must be (N, K) with K >= 2, got shape {z.shape}")
        if len(z.chunks[1]) != 1:
            raise ShapeError("logits must be chunked by rows only (one chunk across the classes)")
        if len(self.classes) != z.shape[1]:
            raise ShapeError(f"{len(self.classes)} class names for {z.shape[1]} logit columns")
        for name in ("labels", "ids"):
            a = getattr(self, name)
            if a is not None and (a.ndim != 1 or a.shape[0] != z.shape[0]):
                raise ShapeError(f"{name} must be 1-D with {z.shape[0]} rows, got shape {a.shape}")
        if self.labels is not None and self.labels.chunks[0] != z.chunks[0]:
            object.__setattr__(self, "labels", self.labels.rechunk((z.chunks[0],)))

    # ------------------------------------------------------------------ shape

    @property
    def n_samples(self) -> int:
        return int(self.logits.shape[0])

    @property
    def n_classes(self) -> int:
        return int(self.logits.shape[1])

    @property
    def has_labels(self) -> bool:
        return self.labels is not None

    @property
    def n_chunks(self) -> int:
        return len(self.logits.chunks[0])

    @property
    def offsets(self) -> np.ndarray:
        """First row of each chunk."""
        return np.r_[0, np.cumsum(self.logits.chunks[0])[:-1]].astype(np.int64)

    def __len__(self) -> int:
        return self.n_samples

    def __repr__(self) -> str:
        lab = "labelled" if self.has_labels else "unlabelled"
        return (
            f"<ChunkedFrame {self.n_samples} samples x {self.n_classes} classes, {self.logits.dtype}, {lab}, "
            f"{self.n_chunks} chunks, T={self.temperature:g}{', ' + self.origin if self.origin else ''}>"
        )

    def with_temperature(self, temperature: float) -> ChunkedFrame:
        """The same data with another default temperature."""
        return replace(self, temperature=check_temperature(temperature))

    def blocks(self) -> list[tuple[Any, Any | None, int]]:
        """``(logits block, labels block or None, first row)`` per chunk, as dask delayed objects."""
        zs = self.logits.to_delayed().ravel().tolist()
        ys = self.labels.to_delayed().ravel().tolist() if self.labels is not None else [None] * len(zs)
        return list(zip(zs, ys, self.offsets.tolist(), strict=True))

    # ------------------------------------------------------------------ constructors

    @classmethod
    def from_zarr(cls, path: str | os.PathLike[str]) -> ChunkedFrame:
        """Open a store in the layout of :mod:`logitscope.chunked.store` (rows up to the committed count)."""
        import zarr

        from .store import store_info

        source = Path(path).absolute()
        info = store_info(source)
        group = zarr.open_group(source, mode="r")
        rows = int(info["rows"])
        if rows == 0:
            raise ShapeError(f"{source}: the store holds no rows yet")
        da = _da()
        z = da.from_zarr(group["logits"])[:rows]
        y = da.from_zarr(group["labels"])[:rows] if info.get("labelled") else None
        ids = da.from_zarr(group["ids"])[:rows] if "ids" in group else da.arange(rows, chunks=z.chunks[0])
        return cls(z, y, ids, tuple(info["classes"]), source=str(info.get("source", "logits")), origin=str(source))

    @classmethod
    def from_parquet(cls, path: str | os.PathLike[str]) -> ChunkedFrame:
        """Open a folder of Parquet files in the layout of :mod:`logitscope.io` (one chunk per row group).

        Files are taken in name order; all must have the same class columns.
        Only the footers are read here.
        """
        import dask
        import pyarrow as pa
        import pyarrow.parquet as pq

        folder = Path(path).absolute()
        files = (
            sorted(p for p in folder.iterdir() if p.suffix.lower() in (".parquet", ".pq")) if folder.is_dir() else []
        )
        if not files:
            raise FileFormatError(
                f"{folder}: is a directory with no .parquet files (a folder is read as a batch of Parquet files)"
            )
        pieces: list[tuple[Path, int, int]] = []
        columns: list[str] | None = None
        dtypes: set[np.dtype[Any]] = set()
        has_label = has_id = labels_as_names = False
        for f in files:
            try:
                pf = pq.ParquetFile(f)
            except Exception as exc:  # pyarrow raises several kinds
                raise FileFormatError(f"{f}: not a readable Parquet file ({exc})") from exc
            schema = pf.schema_arrow
            names = [str(c) for c in schema.names]
            cols = [c for c in names if c.startswith("logit:")]
            if not cols:
                raise FileFormatError(f"{f}: needs columns 'logit:<class>' (probability columns: read it in memory)")
            if columns is None:
                columns, has_label, has_id = cols, "label" in names, "id" in names
                lt = schema.field("label").type if has_label else None
                labels_as_names = lt is not None and (
                    pa.types.is_string(lt)
                    or pa.types.is_large_string(lt)
                    or (pa.types.is_dictionary(lt) and pa.types.is_string(lt.value_type))
                )
                if has_label and not labels_as_names:
                    from ..io import _stored_classes

                    stored = _stored_classes(f, schema.metadata)
                    if stored is None or stored != [c.split(":", 1)[1] for c in cols]:
                        raise FileFormatError(
                            f"{f}: the label column holds class indices but the file does not store the class "
                            "order of its logit columns; write the labels as class names"
                        )
            elif cols != columns or ("label" in names) != has_label:
                raise FileFormatError(f"{f}: its columns differ from those of {files[0].name}")
            dtypes |= {np.dtype(schema.field(c).type.to_pandas_dtype()) for c in cols}
            pieces += [(f, g, pf.metadata.row_group(g).num_rows) for g in range(pf.metadata.num_row_groups)]
        assert columns is not None
        pieces = [p for p in pieces if p[2] > 0]
        dtype = np.result_type(*dtypes)
        da = _da()

        def column(fn: Any, shape: tuple[int, ...], dt: Any) -> Any:
            parts = [da.from_delayed(dask.delayed(fn)(str(f), g), shape=(n, *shape), dtype=dt) for f, g, n in pieces]
            return da.concatenate(parts, axis=0)

        k = len(columns)
        z = column(_ParquetColumns(tuple(columns), dtype.str), (k,), dtype)
        classes = tuple(c.split(":", 1)[1] for c in columns)
        y = column(_ParquetLabels(classes, labels_as_names), (), np.int64) if has_label else None
        ids = column(_ParquetColumns(("id",), ""), (), object) if has_id else da.arange(z.shape[0], chunks=z.chunks[0])
        return cls(z, y, ids, classes, origin=str(folder))

    @classmethod
    def from_memmap(
        cls,
        logits: Any,
        labels: Any | None = None,
        ids: Any | None = None,
        classes: Sequence[str] | None = None,
        chunk_rows: int | None = None,
    ) -> ChunkedFrame:
        """Logits (and labels, ids) from ``.npy`` files or numpy memmaps, read by row ranges.

        Each argument is a path to an ``.npy`` file or a :class:`numpy.memmap`
        (for example ``np.load(path, mmap_mode="r")``); tasks reopen the file
        themselves, so nothing is copied into the task graph.
        """
        from .store import default_chunk_rows

        spec = _MemmapSpec.of(logits, "logits")
        if len(spec.shape) != 2:
            raise ShapeError(f"logits must be 2-D, got shape {spec.shape}")
        n, k = spec.shape
        rows = chunk_rows or default_chunk_rows(k, np.dtype(spec.dtype).itemsize)
        z = spec.dask(rows)
        y = None
        if labels is not None:
            ys = _MemmapSpec.of(labels, "labels")
            if ys.shape != (n,):
                raise ShapeError(f"labels must have shape ({n},), got {ys.shape}")
            y = ys.dask(rows)
        if ids is not None:
            ids_spec = _MemmapSpec.of(ids, "ids")
            if ids_spec.shape != (n,):
                raise ShapeError(f"ids must have shape ({n},), got {ids_spec.shape}")
            ident = ids_spec.dask(rows)
        else:
            ident = _da().arange(n, chunks=z.chunks[0])
        names = tuple(str(c) for c in classes) if classes is not None else tuple(str(i) for i in range(k))
        return cls(z, y, ident, names, origin=spec.path)

    @classmethod
    def from_dask(
        cls, logits: Any, labels: Any | None = None, ids: Any | None = None, classes: Sequence[str] | None = None
    ) -> ChunkedFrame:
        """Wrap dask arrays (logits rechunked to whole rows)."""
        da = _da()
        z = da.asarray(logits)
        if z.ndim == 2 and len(z.chunks[1]) != 1:
            z = z.rechunk({1: -1})
        y = None if labels is None else da.asarray(labels)
        ident = da.arange(z.shape[0], chunks=z.chunks[0]) if ids is None else da.asarray(ids)
        names = tuple(str(c) for c in classes) if classes is not None else tuple(str(i) for i in range(z.shape[1]))
        return cls(z, y, ident, names)

    # ------------------------------------------------------------------ analysis

    def summary(self, **options: Any) -> dict[str, Any]:
        """The summary dict of :func:`logitscope.summary.summarize` (see :func:`.analysis.summarize_chunked`)."""
        from .analysis import summarize_chunked

        return summarize_chunked(self, **options)

    def fit_temperature(self, rtol: float = 1e-5, max_iter: int = 50, seed: int = 0) -> Any:
        """:class:`~logitscope.analysis.TemperatureFit`, each Newton step one reduction over the chunks."""
        from .analysis import fit_temperature

        return fit_temperature(self, rtol=rtol, max_iter=max_iter, seed=seed)


class _ParquetLabels:
    """Reads the label column of one row group as class indices: names matched to the classes, or indices in
    the class order stored in the file (a picklable task function)."""

    def __init__(self, classes: tuple[str, ...], as_names: bool) -> None:
        self.classes = classes
        self.as_names = as_names

    def __call__(self, path: str, group: int) -> np.ndarray:
        import pyarrow.parquet as pq

        col = pq.ParquetFile(path).read_row_group(group, columns=["label"]).column(0)
        if col.null_count:
            raise LabelError(f"{path}: the label column has missing values; a chunked store must be fully labelled")
        if not self.as_names:
            return np.asarray(col.to_numpy(), dtype=np.int64)
        index = {c: i for i, c in enumerate(self.classes)}
        values = col.to_pylist()
        unknown = sorted({str(v) for v in values if v not in index})
        if unknown:
            raise LabelError(f"{path}: labels name classes the columns do not have: {', '.join(unknown[:5])}")
        return np.fromiter((index[v] for v in values), dtype=np.int64, count=len(values))


class _ParquetColumns:
    """Reads some columns of one row group as a numpy array (a picklable task function)."""

    def __init__(self, columns: tuple[str, ...], dtype: str) -> None:
        self.columns = columns
        self.dtype = dtype

    def __call__(self, path: str, group: int) -> np.ndarray:
        import pyarrow.parquet as pq

        table = pq.ParquetFile(path).read_row_group(group, columns=list(self.columns))
        if len(self.columns) == 1:
            col = table.column(0).to_numpy()
            return col.astype(self.dtype) if self.dtype else np.asarray(col, dtype=object)
        return np.column_stack([table.column(i).to_numpy() for i in range(table.num_columns)]).astype(self.dtype)


@dataclass(frozen=True)
class _MemmapSpec:
    path: str
    dtype: str
    shape: tuple[int, ...]
    offset: int
    fortran: bool

    @classmethod
    def of(cls, obj: Any, what: str) -> _MemmapSpec:
        if isinstance(obj, str | os.PathLike):
            obj = np.load(os.fspath(obj), mmap_mode="r", allow_pickle=False)
        if not isinstance(obj, np.memmap) or obj.filename is None:
            raise InputTypeError(f"{what} must be a path to an .npy file or a numpy memmap, got {type(obj).__name__}")
        if obj.base is not None and isinstance(obj.base, np.memmap) and obj.shape != obj.base.shape:
            raise InputTypeError(f"{what}: pass the whole memmap, not a slice of it")
        return cls(str(Path(obj.filename).absolute()), obj.dtype.str, tuple(obj.shape), int(obj.offset),
                   bool(obj.flags.f_contiguous and not obj.flags.c_contiguous))  # fmt: skip

    def read(self, start: int, stop: int) -> np.ndarray:
        m = np.memmap(self.path, mode="r", dtype=np.dtype(self.dtype), shape=self.shape, offset=self.offset,
                      order="F" if self.fortran else "C")  # fmt: skip
        return np.array(m[start:stop])

    def dask(self, rows: int) -> Any:
        import dask

        da = _da()
        n = self.shape[0]
        parts = []
        for start in range(0, n, rows):
            stop = min(n, start + rows)
            part = dask.delayed(self.read)(start, stop)
            parts.append(da.from_delayed(part, shape=(stop - start, *self.shape[1:]), dtype=np.dtype(self.dtype)))
        return da.concatenate(parts, axis=0)


def is_chunked_source(path: str | os.PathLike[str]) -> bool:
    """True for what :func:`open_chunked` reads: a ``.zarr`` store, a folder of Parquet files, an ``.npy`` file.

    Examples
    --------
    >>> is_chunked_source("batch.npz"), is_chunked_source("batch.zarr")
    (False, True)
    """
    p = Path(path)
    if p.suffix.lower() in (".zarr", ".npy"):
        return True
    return p.is_dir() and p.suffix.lower() != ".npz"  # a folder named .npz is a mistake the in-memory reader names


def open_chunked(path: str | os.PathLike[str], **options: Any) -> ChunkedFrame:
    """Open a Zarr store, a folder of Parquet files or an ``.npy`` file lazily.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from logitscope import LogitFrame
    >>> from logitscope.chunked import write_zarr
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "postcodes.zarr"
    >>> write_zarr(LogitFrame(np.eye(3), labels=[0, 1, 1]), p)
    >>> cf = open_chunked(p)
    >>> cf.n_samples, cf.summary()["accuracy"]
    (3, 0.6666666666666666)
    """
    p = Path(path)
    if not p.exists():
        raise FileFormatError(f"{p}: no such file or directory")
    if p.suffix.lower() == ".npy":
        return ChunkedFrame.from_memmap(p, **options)
    if p.is_dir() and ((p / "zarr.json").exists() or p.suffix.lower() == ".zarr"):
        return ChunkedFrame.from_zarr(p)
    if p.is_dir():
        return ChunkedFrame.from_parquet(p)
    raise FileFormatError(f"{p}: not a Zarr store, a folder of Parquet files or an .npy file")
