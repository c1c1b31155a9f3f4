"""A file of samples marked for relabeling, kept safe across kernel restarts.

Each mark names a sample by its id and records the row it had, the label it
was given, the label suggested instead, a free note, and when it was made.
Every change is written at once and atomically (a temporary file renamed over
the old one), so the file on disk is always either the list before the change
or the list after it. Opening a store on an existing file restores its marks;
a file that cannot be read is never overwritten: the store refuses to open
and says why.

The file is JSON::

    {"format": "logitscope-relabel", "version": 1,
     "classes": ["zero", "one", ...], "n_samples": 1797,
     "marks": [{"id": "card-00042", "row": 42, "given_label": "seven",
                "suggested_label": "one", "note": "", "marked_at": "2025-01-31T09:12:44+00:00"}, ...]}

This module is plain Python (no widgets); :class:`logitscope.widgets.RelabelQueue`
is its user interface.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import unicodedata
import warnings
from collections.abc import Iterable, Iterator
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._atomic import atomic_write
from .errors import ClassNameError, FileFormatError, ParameterError

if TYPE_CHECKING:
    from .frame import LogitFrame

__all__ = ["FIELDS", "FORMAT", "VERSION", "RelabelStore", "RelabelStoreWarning", "default_path", "fingerprint"]

FORMAT = "logitscope-relabel"
VERSION = 1
FIELDS = ("id", "row", "given_label", "suggested_label", "note", "marked_at")


class RelabelStoreWarning(UserWarning):
    """A relabel file does not match the frame (unknown ids or class names); its marks are kept."""


def _plain(value: Any) -> Any:
    """A sample id as a plain JSON-able Python value (numpy scalars unwrapped)."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, bool) or not isinstance(value, int | float | str):
        return str(value)
    return value


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def fingerprint(frame: LogitFrame, length: int = 10) -> str:
    """A short hex digest of a frame's sample ids and class names (not of its numbers).

    Two frames with the same ids and classes share a fingerprint, so a relabel
    list made on one set of logits reopens with the next checkpoint's logits.

    Examples
    --------
    >>> import logitscope
    >>> f = logitscope.load_demo("mailroom")
    >>> fingerprint(f) == fingerprint(f.with_temperature(2.0)), len(fingerprint(f))
    (True, 10)
    """
    h = hashlib.sha1(usedforsecurity=False)
    h.update(f"{frame.n_samples}\x1e".encode())
    h.update("\x1f".join(frame.classes).encode())
    h.update(b"\x1e")
    ids = np.asarray(frame.ids)
    if ids.dtype.kind in "iuf":
        h.update(np.ascontiguousarray(ids.astype(np.float64 if ids.dtype.kind == "f" else np.int64)).tobytes())
    else:
        h.update("\x1f".join(str(v) for v in ids.tolist()).encode())
    return h.hexdigest()[:length]


def _slug(text: str, limit: int = 24) -> str:
    """``text`` as lower-case ASCII letters, digits and hyphens, at most ``limit`` characters."""
    plain = unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode("ascii")
    return re.sub(r"[^a-z0-9]+", "-", plain.lower()).strip("-")[:limit].strip("-")


def default_path(frame: LogitFrame, folder: str | os.PathLike[str] = ".") -> Path:
    """Where a relabel list goes when no path is given: a name that says which data it is about.

    The name is ``relabel-<first class>-to-<last class>-<N>-samples-<fingerprint>.json``,
    for the mail-room digits ``relabel-zero-to-nine-1797-samples-<8 hex>.json``. The
    classes and the sample count tell a reader of the folder which data set a list
    belongs to; the :func:`fingerprint` of the ids and classes keeps apart two data
    sets that share classes and size, and makes the same data (a later checkpoint's
    logits, say) reopen the same list. Class names are reduced to lower-case ASCII
    letters, digits and hyphens; with two classes the name reads ``<first>-and-<second>``,
    and ``<K>-classes`` stands in when nothing of a class name is left. A list already kept under the earlier name
    ``logitscope-relabel-<10 hex>.json`` in ``folder`` is used instead, so its marks stay
    in view.

    Examples
    --------
    >>> import logitscope, re
    >>> name = default_path(logitscope.load_demo("mailroom")).name
    >>> re.fullmatch(r"relabel-zero-to-nine-1797-samples-[0-9a-f]{8}[.]json", name) is not None
    True
    """
    base = Path(folder)
    earlier = base / f"logitscope-relabel-{fingerprint(frame)}.json"
    first, last = _slug(frame.classes[0]), _slug(frame.classes[-1])
    k = frame.n_classes
    if k == 1:
        classes = first or "1-class"
    elif first and last:
        classes = f"{first}-{'and' if k == 2 else 'to'}-{last}"
    else:
        classes = f"{k}-classes"
    path = base / f"relabel-{classes}-{frame.n_samples}-samples-{fingerprint(frame, 8)}.json"
    if not path.exists() and earlier.exists():
        return earlier
    return path


class RelabelStore:
    """Marks for relabeling keyed by sample id, saved to ``path`` atomically after every change.

    Parameters
    ----------
    path : str or path-like
        The JSON file. If it exists its marks are loaded (and checked against
        ``frame``); it is created on the first change.
    frame : LogitFrame, optional
        The frame the marks refer to. With a frame, marks are made by id alone:
        the row and the given label are looked up, the suggested label must be
        one of its classes, and marks loaded from the file are checked against
        its ids and class names (a mismatch warns with
        :class:`RelabelStoreWarning` and keeps the marks).

    Raises
    ------
    FileFormatError
        When ``path`` exists but is not a relabel file this version can read.
        The file is left as it is.

    Examples
    --------
    >>> import tempfile, pathlib, logitscope
    >>> frame = logitscope.load_demo("mailroom")
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "marks.json"
    >>> store = RelabelStore(path, frame)
    >>> store.add("card-00005", "three", note="looks like a 3")["given_label"]
    'five'
    >>> len(RelabelStore(path, frame))  # a new store on the same file: the mark is back
    1
    """

    def __init__(self, path: str | os.PathLike[str], frame: LogitFrame | None = None) -> None:
        self.path = Path(path)
        self.frame = frame
        self._classes: tuple[str, ...] = tuple(frame.classes) if frame is not None else ()
        self._index: pd.Index | None = None
        self._marks: dict[Any, dict[str, Any]] = {}
        self._stamp: tuple[int, int] | None = None
        #: ids of loaded marks that the frame does not have (kept, never dropped)
        self.unmatched: list[Any] = []
        if self.path.exists():
            self._marks = self._read()

    # ------------------------------------------------------------------ reading

    @property
    def classes(self) -> tuple[str, ...]:
        """Class names the suggested labels are checked against (the frame's, else the file's)."""
        return self._classes

    def _stat(self) -> tuple[int, int] | None:
        try:
            st = self.path.stat()
        except FileNotFoundError:
            return None
        return (st.st_mtime_ns, st.st_size)

    def _fail(self, why: str) -> FileFormatError:
        return FileFormatError(
            f"{self.path} is not a relabel list this version can read: {why}. "
            "The file was left untouched; fix or move it, or give another path."
        )

    def _read(self) -> dict[Any, dict[str, Any]]:
        stamp = self._stat()
        try:
            text = self.path.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError) as exc:
            raise self._fail(f"it cannot be read ({exc})") from exc
        try:
            doc = json.loads(text)
        except json.JSONDecodeError as exc:
            raise self._fail(f"invalid JSON at line {exc.lineno}, column {exc.colno} ({exc.msg})") from exc
        if not isinstance(doc, dict) or doc.get("format") != FORMAT:
            raise self._fail(f"it does not say format {FORMAT!r}")
        version = doc.get("version")
        if not isinstance(version, int) or isinstance(version, bool) or not 1 <= version <= VERSION:
            raise self._fail(f"version {version!r} (this version reads 1 to {VERSION})")
        raw = doc.get("marks")
        file_classes = doc.get("classes", [])
        if not isinstance(raw, list) or not isinstance(file_classes, list):
            raise self._fail("'marks' and 'classes' must be lists")
        marks: dict[Any, dict[str, Any]] = {}
        for i, m in enumerate(raw):
            if not isinstance(m, dict) or "id" not in m or not isinstance(m.get("suggested_label"), str):
                raise self._fail(f"mark {i} lacks an id or a suggested_label")
            rec = {f: m.get(f) for f in FIELDS}
            rec["id"] = _plain(rec["id"])
            rec["note"] = "" if rec["note"] is None else str(rec["note"])
            rec.update({k: v for k, v in m.items() if k not in FIELDS})  # keep fields a later version added
            if rec["id"] in marks:
                raise self._fail(f"sample id {rec['id']!r} is marked twice")
            marks[rec["id"]] = rec
        if self.frame is None:
            self._classes = tuple(str(c) for c in file_classes)
        else:
            self._check_against_frame(marks, [str(c) for c in file_classes])
        self._stamp = stamp
        return marks

    def _rows_of(self, ids: list[Any]) -> np.ndarray:
        """Row positions of sample ids in the frame (-1 where absent), one vectorised look-up."""
        assert self.frame is not None
        if self._index is None:
            # object dtype with plain Python values: look-ups of any id type stay on the fast path
            self._index = pd.Index(np.asarray(self.frame.ids).tolist(), dtype=object)
        if not ids:
            return np.zeros(0, dtype=np.int64)
        return np.asarray(self._index.get_indexer(pd.Index(ids, dtype=object)), dtype=np.int64)

    def _check_against_frame(self, marks: dict[Any, dict[str, Any]], file_classes: list[str]) -> None:
        assert self.frame is not None
        rows = self._rows_of(list(marks))
        missing = []
        for rec, r in zip(marks.values(), rows, strict=True):
            if r < 0:
                missing.append(rec["id"])  # keep the row it had in the frame it was made on
            else:
                rec["row"] = int(r)
        self.unmatched = missing
        if missing:
            shown = ", ".join(repr(v) for v in missing[:5])
            warnings.warn(
                f"{self.path}: {len(missing)} of {len(marks)} marks name sample ids this frame does not have "
                f"({shown}{' ...' if len(missing) > 5 else ''}); they are kept in the file as they are",
                RelabelStoreWarning,
                stacklevel=3,
            )
        known = set(self._classes)
        used = {rec[f] for rec in marks.values() for f in ("given_label", "suggested_label") if rec.get(f)}
        unknown = sorted(used - known)
        if unknown:
            warnings.warn(
                f"{self.path}: marks use class names this frame does not have: "
                f"{', '.join(repr(c) for c in unknown[:5])}{' ...' if len(unknown) > 5 else ''}; "
                "the marks are kept as written",
                RelabelStoreWarning,
                stacklevel=3,
            )
        elif file_classes and file_classes != list(self._classes):
            warnings.warn(
                f"{self.path} was written for other class names ({len(file_classes)} classes); "
                "its marks are kept and the file will list this frame's classes",
                RelabelStoreWarning,
                stacklevel=3,
            )

    # ------------------------------------------------------------------ writing

    def _document(self, marks: dict[Any, dict[str, Any]]) -> dict[str, Any]:
        return {
            "format": FORMAT,
            "version": VERSION,
            "classes": list(self._classes),
            "n_samples": None if self.frame is None else self.frame.n_samples,
            "saved_at": _now(),
            "marks": list(marks.values()),
        }

    def _write(self, marks: dict[Any, dict[str, Any]]) -> None:
        doc = self._document(marks)
        with atomic_write(self.path, "w") as fh:
            json.dump(doc, fh, indent=1, ensure_ascii=False)
            fh.write("\n")
        self._stamp = self._stat()

    def _commit(self, change: Any) -> Any:
        """Apply ``change`` to a copy of the marks, save it, and only then keep it.

        If the file changed on disk since this store last read or wrote it
        (another store on the same path), it is read again first, so the
        other store's marks are not written over.
        """
        base = self._marks
        current = self._stat()
        if current is not None and current != self._stamp:
            base = self._read()
        new = {k: dict(v) for k, v in base.items()}
        result = change(new)
        self._write(new)  # raises before anything is kept if the write fails
        self._marks = new
        return result

    def save(self) -> None:
        """Write the marks now (every change already does)."""
        self._write(self._marks)

    # ------------------------------------------------------------------ marks

    def _label_name(self, label: Any, what: str) -> str | None:
        if label is None:
            return None
        if isinstance(label, int | np.integer) and not isinstance(label, bool) and self._classes:
            if not 0 <= int(label) < len(self._classes):
                raise ClassNameError(f"{what} {int(label)} is not a class index in [0, {len(self._classes)})")
            return self._classes[int(label)]
        name = str(label)
        if self._classes and name not in self._classes:
            raise ClassNameError(
                f"{what} {name!r} is not one of the {len(self._classes)} classes "
                f"({', '.join(repr(c) for c in self._classes[:5])}{' ...' if len(self._classes) > 5 else ''})"
            )
        return name

    def _record(self, spec: dict[str, Any], found: int) -> dict[str, Any]:
        sid = spec["id"]
        row = spec.get("row")
        given = spec.get("given_label")
        if self.frame is not None:
            if found < 0:
                raise ParameterError(f"sample id {sid!r} is not in the frame")
            if row is not None and int(row) != found:
                raise ParameterError(f"sample id {sid!r} is at row {found}, not row {int(row)}")
            row = found
            labels = self.frame.labels
            given = None if labels is None else self.frame.classes[int(labels[found])]
        else:
            given = self._label_name(given, "given label")
        suggested = self._label_name(spec.get("suggested_label"), "suggested label")
        if suggested is None:
            raise ParameterError(f"the mark of sample {sid!r} needs a suggested label")
        note = spec.get("note") or ""
        return {
            "id": sid,
            "row": None if row is None else int(row),
            "given_label": given,
            "suggested_label": suggested,
            "note": str(note),
            "marked_at": _now(),
        }

    def add(
        self,
        id: Any,
        suggested_label: Any,
        note: str = "",
        *,
        row: int | None = None,
        given_label: Any = None,
    ) -> dict[str, Any]:
        """Mark one sample (a mark of the same id is replaced), save, and return the mark.

        ``suggested_label`` is a class name or index. With a frame, ``row`` and
        ``given_label`` are looked up from ``id``.
        """
        return self.add_many([{"id": id, "suggested_label": suggested_label, "note": note, "row": row,
                               "given_label": given_label}])[0]  # fmt: skip

    def add_many(self, specs: Iterable[dict[str, Any]]) -> list[dict[str, Any]]:
        """Mark several samples with one save; each spec is a dict with the fields of :meth:`add`."""
        items = [dict(s) for s in specs]
        for spec in items:
            if "id" not in spec:
                raise ParameterError("a mark needs the sample id")
            spec["id"] = _plain(spec["id"])
        found = self._rows_of([s["id"] for s in items]) if self.frame is not None else np.full(len(items), -1)
        records = [self._record(spec, int(r)) for spec, r in zip(items, found.tolist(), strict=True)]

        def change(marks: dict[Any, dict[str, Any]]) -> list[dict[str, Any]]:
            for rec in records:
                marks.pop(rec["id"], None)  # a re-mark moves to the end: the latest mark is last
                marks[rec["id"]] = rec
            return [dict(r) for r in records]

        return self._commit(change) if records else []

    def update(self, id: Any, *, suggested_label: Any = None, note: str | None = None) -> dict[str, Any]:
        """Change the suggested label and/or the note of an existing mark, save, and return it."""
        sid = _plain(id)
        name = self._label_name(suggested_label, "suggested label")

        def change(marks: dict[Any, dict[str, Any]]) -> dict[str, Any]:
            if sid not in marks:
                raise ParameterError(f"sample id {sid!r} is not marked")
            rec = marks[sid]
            if name is not None:
                rec["suggested_label"] = name
            if note is not None:
                rec["note"] = str(note)
            rec["marked_at"] = _now()
            return dict(rec)

        return self._commit(change)

    def remove(self, id: Any) -> None:
        """Remove the mark of one sample id and save."""
        self.remove_many([id])

    def remove_many(self, ids: Iterable[Any], missing_ok: bool = False) -> int:
        """Remove the marks of several ids with one save; returns how many were removed."""
        keys = [_plain(i) for i in ids]

        def change(marks: dict[Any, dict[str, Any]]) -> int:
            unknown = [k for k in keys if k not in marks]
            if unknown and not missing_ok:
                raise ParameterError(f"sample id {unknown[0]!r} is not marked")
            for k in keys:
                marks.pop(k, None)
            return len(keys) - len(unknown)

        return self._commit(change) if keys else 0

    def clear(self) -> None:
        """Remove every mark and save."""
        self._commit(lambda marks: marks.clear())

    # ------------------------------------------------------------------ views

    def use_frame(self, frame: LogitFrame) -> None:
        """Check new marks against another frame (a new epoch's outputs): marks stay keyed by sample id."""
        self.frame = frame
        self._index = None

    def __len__(self) -> int:
        return len(self._marks)

    def __contains__(self, id: object) -> bool:
        return _plain(id) in self._marks

    def __iter__(self) -> Iterator[dict[str, Any]]:
        return (dict(m) for m in list(self._marks.values()))

    @property
    def ids(self) -> list[Any]:
        """Marked sample ids, oldest mark first."""
        return list(self._marks)

    def get(self, id: Any) -> dict[str, Any] | None:
        """The mark of ``id`` (a copy), or None."""
        m = self._marks.get(_plain(id))
        return None if m is None else dict(m)

    def to_frame(self) -> pd.DataFrame:
        """The marks as a DataFrame with columns ``id, row, given_label, suggested_label, note, marked_at``.

        Examples
        --------
        >>> import tempfile, pathlib
        >>> store = RelabelStore(pathlib.Path(tempfile.mkdtemp()) / "m.json")
        >>> _ = store.add("T-1", "billing", row=0, given_label="shipping")
        >>> store.to_frame()[["id", "given_label", "suggested_label"]].values.tolist()
        [['T-1', 'shipping', 'billing']]
        """
        rows = [[m.get(f) for f in FIELDS] for m in self._marks.values()]
        df = pd.DataFrame(rows, columns=list(FIELDS))
        df["row"] = df["row"].astype("Int64")
        for col in ("given_label", "suggested_label", "note", "marked_at"):
            df[col] = df[col].astype(object)
        return df

    def export_csv(self, path: str | os.PathLike[str], spreadsheet_safe: bool = True) -> Path:
        """Write the marks to a CSV file atomically and return its path.

        With ``spreadsheet_safe`` (the default) a text cell that a spreadsheet
        would run as a formula (starting with ``= + - @``, tab or carriage
        return, and not a plain number) is prefixed with ``'``, as OWASP's
        advice on CSV injection recommends.
        """
        target = Path(path)
        df = self.to_frame()
        if spreadsheet_safe:
            for col in df.columns:
                if df[col].dtype == object or pd.api.types.is_string_dtype(df[col]):
                    df[col] = df[col].map(_defuse_formula)
        with atomic_write(target, "w") as fh:
            df.to_csv(fh, index=False, lineterminator="\n")
        return target


def _defuse_formula(value: object) -> object:
    """Prefix ``'`` to a string a spreadsheet would evaluate as a formula.

    Examples
    --------
    >>> _defuse_formula("=HYPERLINK(1)"), _defuse_formula("-3.5"), _defuse_formula("card-1")
    ("'=HYPERLINK(1)", '-3.5', 'card-1')
    """
    if not isinstance(value, str) or not value or value[0] not in "=+-@\t\r":
        return value
    try:
        float(value)
    except ValueError:
        return "'" + value
    return value
