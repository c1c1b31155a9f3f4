"""A file of samples marked for relabeling, kept safe across kernel restarts.

Each mark names a sample by its id and records the row it had, the label it
was given, the label suggested instead, a free note, and when it was made.
Every change is written at once and atomically (a temporary file renamed over
the old one), so the file on disk is always either the list before the change
or the list after it. Opening a store on an existing file restores its marks;
a file that cannot be read is never overwritten: the store refuses to open
and says why.

Several stores may share one file, in one process or in several (two
notebooks open on the same project): every change takes an inter-process lock
(``.<name>.lock`` beside the file, held through :mod:`filelock`), reads the
file again, applies itself to what it read and writes the result before the
lock is released. So a mark whose call returned is in the file whatever the
other writers do. When two stores change the same sample, the later change
wins and the store that made it says so with a :class:`RelabelConflictWarning`
naming the ids. Temporary files left by a writer that was killed mid-write are
removed the next time a store opens on the file.

The file is JSON::

    {"format": "logitscope-relabel", "version": 1,
     "classes": ["zero", "one", ...], "n_samples": 1797,
     "marks": [{"id": "card-00042", "row": 42, "given_label": "seven",
                "suggested_label": "one", "note": "", "marked_at": "2025-01-31T09:12:44+00:00"}, ...]}

This module is plain Python (no widgets); :class:`logitscope.widgets.RelabelQueue`
is its user interface.
"""

from __future__ import annotations

import contextlib
import csv
import hashlib
import json
import math
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
from filelock import FileLock, Timeout

from ._atomic import atomic_write, leftover_temp_files
from .errors import ClassNameError, FileFormatError, ParameterError

if TYPE_CHECKING:
    from .frame import LogitFrame

__all__ = [
    "FIELDS",
    "FORMAT",
    "VERSION",
    "RelabelConflictWarning",
    "RelabelStore",
    "RelabelStoreWarning",
    "default_path",
    "fingerprint",
]

FORMAT = "logitscope-relabel"
VERSION = 1
FIELDS = ("id", "row", "given_label", "suggested_label", "note", "marked_at")

#: seconds a change waits for another writer's lock before giving up
LOCK_TIMEOUT = 30.0
#: a relabel file nested deeper than this is refused (ours are 3 levels deep)
MAX_DEPTH = 32
_MAX_ROW = 2**63 - 1


class RelabelStoreWarning(UserWarning):
    """A relabel file does not match the frame (unknown ids or class names); its marks are kept."""


class RelabelConflictWarning(RelabelStoreWarning):
    """Another store changed a mark since this store last read the file; this store's later change replaced it."""


def _plain(value: Any) -> Any:
    """A sample id as a plain JSON-able Python value (numpy scalars unwrapped)."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, bool) or not isinstance(value, int | float | str):
        value = str(value)
    if isinstance(value, float) and not math.isfinite(value):
        raise ParameterError(f"a sample id must be a finite number or a string, got {value!r}")
    if isinstance(value, str) and not _is_unicode(value):
        raise ParameterError(f"sample id {value!r} is not valid Unicode text (it holds a lone surrogate)")
    return value


_SURROGATE_ESCAPE = re.compile(r"\\u[dD][89a-fA-F]")


def _refuse_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a number this file may hold")


def _finite_float(text: str) -> float:
    value = float(text)
    if not math.isfinite(value):
        raise ValueError(f"the number {text[:40]} is too large")
    return value


def _is_unicode(text: str) -> bool:
    """True when ``text`` can be written as UTF-8 (no lone surrogates)."""
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        return False
    return True


def _depth(doc: Any) -> int:
    """How deeply lists and dicts nest in ``doc`` (0 for a scalar), without recursion."""
    deepest = 0
    stack = [(doc, 1)]
    while stack:
        node, level = stack.pop()
        if isinstance(node, dict):
            children: Iterable[Any] = node.values()
        elif isinstance(node, list):
            children = node
        else:
            continue
        deepest = max(deepest, level)
        if deepest > MAX_DEPTH:
            break
        stack.extend((c, level + 1) for c in children)
    return deepest


def _bad_text(doc: Any) -> bool:
    """True when a string anywhere in ``doc`` (keys too) is not valid Unicode."""
    stack = [doc]
    while stack:
        node = stack.pop()
        if isinstance(node, str):
            if not _is_unicode(node):
                return True
        elif isinstance(node, dict):
            stack.extend(node.keys())
            stack.extend(node.values())
        elif isinstance(node, list):
            stack.extend(node)
    return False


def _bad_mark(m: dict[str, Any]) -> str:
    """Why a mark read from a file cannot be used ('' when it can)."""
    sid = m["id"]
    if isinstance(sid, bool) or not isinstance(sid, int | float | str):
        return f"has an id of type {type(sid).__name__} (a string or a number is needed)"
    if isinstance(sid, float) and not math.isfinite(sid):
        return f"has the id {sid!r} (not a finite number)"
    row = m.get("row")
    if row is not None and (isinstance(row, bool) or not isinstance(row, int) or not 0 <= row <= _MAX_ROW):
        shown = repr(row) if len(repr(row)) <= 40 else repr(row)[:40] + "..."
        return f"has the row {shown} (a row is a whole number from 0, or null)"
    for field in ("given_label", "note", "marked_at"):
        if m.get(field) is not None and not isinstance(m[field], str):
            return f"has a {field} of type {type(m[field]).__name__} (text or null is needed)"
    return ""


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

    Notes
    -----
    Other stores may write the same file at the same time, in this process or
    in others. Each change holds the file's lock while it reads the file,
    applies itself and writes, so no acknowledged mark of any store is lost;
    a store's own view (``len``, :attr:`ids`, :meth:`to_frame`) catches up
    with the others' marks at its next change or :meth:`refresh`.
    :meth:`export_csv` reads the file first. A change waits at most
    :data:`LOCK_TIMEOUT` seconds for another writer and then raises
    :class:`TimeoutError`.

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
        self._lock = FileLock(self.lock_path, timeout=LOCK_TIMEOUT)
        self._digest: bytes | None = None  # of the file's bytes as this store last read or wrote them
        #: ids of loaded marks that the frame does not have (kept, never dropped)
        self.unmatched: list[Any] = []
        self._remove_leftovers()
        self._marks = self._read(warn=True)

    @property
    def lock_path(self) -> Path:
        """The lock file beside the store (``.<name>.lock``); it stays there, empty, between changes."""
        return self.path.with_name(f".{self.path.name}.lock")

    @contextlib.contextmanager
    def _locked(self) -> Iterator[None]:
        try:
            self._lock.acquire()
        except Timeout as exc:
            raise TimeoutError(
                f"{self.path}: another process has held the lock {self.lock_path.name} for over "
                f"{LOCK_TIMEOUT:g} s; nothing was changed. Try again, or close the other notebook."
            ) from exc
        try:
            yield
        finally:
            self._lock.release()

    def _remove_leftovers(self) -> None:
        """Remove temporary files that writers killed mid-write left beside the store.

        Every writer holds the lock while its temporary file exists, so with the
        lock held every temporary file of ours is a leftover. When another
        process holds the lock right now (it is writing), nothing is removed;
        the next store to open does it.
        """
        if not self.path.parent.is_dir():
            return
        try:
            self._lock.acquire(blocking=False)
        except (Timeout, OSError):  # a live writer, or a folder we may not write in
            return
        try:
            for leftover in leftover_temp_files(self.path):
                with contextlib.suppress(OSError):
                    leftover.unlink()
        finally:
            self._lock.release()

    # ------------------------------------------------------------------ reading

    @property
    def classes(self) -> tuple[str, ...]:
        """Class names the suggested labels are checked against (the frame's, else the file's)."""
        return self._classes

    def _fail(self, why: str) -> FileFormatError:
        return FileFormatError(
            f"{self.path} is not a relabel list this version can read: {why}. "
            "The file was left untouched; fix or move it, or give another path."
        )

    def _parse(self, text: str) -> tuple[dict[Any, dict[str, Any]], list[str]]:
        """The marks and class names of a relabel file's text; FileFormatError for anything else."""
        try:
            doc = json.loads(text, parse_constant=_refuse_constant, parse_float=_finite_float)
        except json.JSONDecodeError as exc:
            raise self._fail(f"invalid JSON at line {exc.lineno}, column {exc.colno} ({exc.msg})") from exc
        except RecursionError as exc:
            raise self._fail("it is nested too deeply to be a relabel list") from exc
        except ValueError as exc:  # e.g. an integer of more digits than Python converts
            raise self._fail(f"a value cannot be read ({exc})") from exc
        # only an escape such as \\udc80 can put a lone surrogate into text decoded from UTF-8
        if _SURROGATE_ESCAPE.search(text) and _bad_text(doc):
            raise self._fail("it holds text that is not valid Unicode (a lone surrogate escape)")
        if not isinstance(doc, dict) or doc.get("format") != FORMAT:
            raise self._fail(f"it does not say format {FORMAT!r}")
        version = doc.get("version")
        if not isinstance(version, int) or isinstance(version, bool) or not 1 <= version <= VERSION:
            shown = repr(version) if len(repr(version)) <= 40 else repr(version)[:40] + "..."
            raise self._fail(f"version {shown} (this version reads 1 to {VERSION})")
        raw = doc.get("marks")
        file_classes = doc.get("classes", [])
        if not isinstance(raw, list) or not isinstance(file_classes, list):
            raise self._fail("'marks' and 'classes' must be lists")
        if not all(isinstance(c, str) for c in file_classes):
            raise self._fail("'classes' must list class names as strings")
        marks: dict[Any, dict[str, Any]] = {}
        for i, m in enumerate(raw):
            if not isinstance(m, dict) or "id" not in m or not isinstance(m.get("suggested_label"), str):
                raise self._fail(f"mark {i} lacks an id or a suggested_label")
            why = _bad_mark(m)
            if why:
                raise self._fail(f"mark {i} {why}")
            rec = {f: m.get(f) for f in FIELDS}
            rec["note"] = "" if rec["note"] is None else rec["note"]
            extra = {k: v for k, v in m.items() if k not in FIELDS}  # keep fields a later version added
            if extra and _depth(extra) > MAX_DEPTH:
                raise self._fail(f"mark {i} is nested more than {MAX_DEPTH} levels deep")
            rec.update(extra)
            if rec["id"] in marks:
                raise self._fail(f"sample id {rec['id']!r} is marked twice")
            marks[rec["id"]] = rec
        return marks, file_classes

    def _read(self, warn: bool) -> dict[Any, dict[str, Any]]:
        """The marks in the file now ({} when there is none); unchanged bytes are not parsed again."""
        try:
            data = self.path.read_bytes()
        except FileNotFoundError:
            self._digest = None
            return {}
        except OSError as exc:
            raise self._fail(f"it cannot be read ({exc})") from exc
        digest = hashlib.blake2b(data, digest_size=16).digest()
        if digest == self._digest:  # the bytes this store last read or wrote: the marks it holds
            return self._marks
        try:
            text = data.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise self._fail(f"it is not UTF-8 text ({exc})") from exc
        marks, file_classes = self._parse(text)
        if self.frame is None:
            self._classes = tuple(file_classes)
        else:
            self._check_against_frame(marks, file_classes, warn)
        self._digest = digest
        return marks

    def refresh(self) -> None:
        """Read the file again, so marks other stores wrote since this one last read it show here.

        Examples
        --------
        >>> import tempfile, pathlib
        >>> path = pathlib.Path(tempfile.mkdtemp()) / "m.json"
        >>> first, second = RelabelStore(path), RelabelStore(path)
        >>> _ = first.add("T-7", "billing")
        >>> len(second), (second.refresh(), len(second))[1]
        (0, 1)
        """
        self._marks = self._read(warn=False)

    def _rows_of(self, ids: list[Any]) -> np.ndarray:
        """Row positions of sample ids in the frame (-1 where absent), one vectorised look-up."""
        assert self.frame is not None
        if self._index is None:
            # object dtype with plain Python values: look-ups of any id type stay on the fast path
            self._index = pd.Index(np.asarray(self.frame.ids).tolist(), dtype=object)
        if not ids:
            return np.zeros(0, dtype=np.int64)
        return np.asarray(self._index.get_indexer(pd.Index(ids, dtype=object)), dtype=np.int64)

    def _check_against_frame(self, marks: dict[Any, dict[str, Any]], file_classes: list[str], warn: bool) -> None:
        assert self.frame is not None
        rows = self._rows_of(list(marks))
        missing = []
        for rec, r in zip(marks.values(), rows, strict=True):
            if r < 0:
                missing.append(rec["id"])  # keep the row it had in the frame it was made on
            else:
                rec["row"] = int(r)
        self.unmatched = missing
        if not warn:
            return
        if missing:
            shown = ", ".join(repr(v) for v in missing[:5])
            warnings.warn(
                f"{self.path}: {len(missing)} of {len(marks)} marks name sample ids this frame does not have "
                f"({shown}{' ...' if len(missing) > 5 else ''}); they are kept in the file as they are",
                RelabelStoreWarning,
                stacklevel=4,
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
                stacklevel=4,
            )
        elif file_classes and file_classes != list(self._classes):
            warnings.warn(
                f"{self.path} was written for other class names ({len(file_classes)} classes); "
                "its marks are kept and the file will list this frame's classes",
                RelabelStoreWarning,
                stacklevel=4,
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
        # one mark per line, each encoded by the json module's C encoder (indent= would use the slow one)
        encode = json.JSONEncoder(ensure_ascii=False, allow_nan=False).encode
        head = encode({k: v for k, v in doc.items() if k != "marks"})[:-1]
        lines = [head + ', "marks": [', ",\n".join(" " + encode(m) for m in doc["marks"]), "]}", ""]
        data = "\n".join(line for i, line in enumerate(lines) if line or i != 1).encode()
        with atomic_write(self.path, "wb") as fh:
            fh.write(data)
        self._digest = hashlib.blake2b(data, digest_size=16).digest()

    def _commit(self, change: Any) -> Any:
        """Under the file's lock: read the file, apply ``change`` to its marks, write, and only then keep them.

        ``change`` edits a dict of marks in place and returns the caller's
        result. It runs on the marks as they are on disk now (other stores'
        changes included), not on this store's possibly older view, so no
        other store's mark is written over unless ``change`` itself replaces
        it; then the later change (this one) wins and a
        :class:`RelabelConflictWarning` names the ids.
        """
        self.path.parent.mkdir(parents=True, exist_ok=True)
        with self._locked():
            disk = self._read(warn=False)
            new = {k: dict(v) for k, v in disk.items()}
            try:
                result = change(new)
            except BaseException:
                self._marks = disk  # refused: nothing written, but the view is now current
                raise
            touched = [k for k in set(new) | set(disk) if new.get(k) != disk.get(k)]
            # a mark this change replaces or removes that is not the one this store last saw: another store's edit
            conflicts = [k for k in touched if k in disk and disk[k] != self._marks.get(k)]
            self._write(new)  # raises before anything is kept if the write fails
            self._marks = new
        if conflicts:
            shown = ", ".join(repr(k) for k in conflicts[:5])
            warnings.warn(
                f"{self.path}: another store changed the mark of sample {shown}"
                f"{f' and {len(conflicts) - 5} more' if len(conflicts) > 5 else ''} since this store last read "
                "the file; this later change replaced it",
                RelabelConflictWarning,
                stacklevel=4,
            )
        return result

    def save(self) -> None:
        """Write the file now (every change already does); other stores' marks in the file are kept."""
        self._commit(lambda marks: None)

    # ------------------------------------------------------------------ marks

    def _label_name(self, label: Any, what: str) -> str | None:
        if label is None:
            return None
        if isinstance(label, int | np.integer) and not isinstance(label, bool) and self._classes:
            if not 0 <= int(label) < len(self._classes):
                raise ClassNameError(f"{what} {int(label)} is not a class index in [0, {len(self._classes)})")
            return self._classes[int(label)]
        name = str(label)
        if not self._classes and not _is_unicode(name):
            raise ParameterError(f"{what} {name!r} is not valid Unicode text (a lone surrogate)")
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
        if row is not None:
            if isinstance(row, bool) or not isinstance(row, int | np.integer) or not 0 <= int(row) <= _MAX_ROW:
                raise ParameterError(f"the row of sample {sid!r} must be a whole number from 0, got {row!r}")
        if self.frame is not None:
            if found < 0:
                raise ParameterError(f"sample id {sid!r} is not in the frame")
            if row is not None and int(row) != found:
                raise ParameterError(f"sample id {sid!r} is at row {found}, not row {int(row)}")
            row = found
            labels = self.frame.labels
            # an unlabelled row (-1) has no given label: the mark gives it its first one
            given = None if labels is None or labels[found] < 0 else self.frame.classes[int(labels[found])]
        else:
            given = self._label_name(given, "given label")
        suggested = self._label_name(spec.get("suggested_label"), "suggested label")
        if suggested is None:
            raise ParameterError(f"the mark of sample {sid!r} needs a suggested label")
        note = str(spec.get("note") or "")
        for what, text in (("note", note), ("given label", given), ("suggested label", suggested)):
            if text is not None and not _is_unicode(text):
                raise ParameterError(f"the {what} of sample {sid!r} is not valid Unicode text (a lone surrogate)")
        return {
            "id": sid,
            "row": None if row is None else int(row),
            "given_label": given,
            "suggested_label": suggested,
            "note": note,
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
        """Remove every mark this store shows, and save.

        Marks that another store added since this one last read the file were
        never shown here, so they are kept (and show after the call).
        """
        self.remove_many(list(self._marks), missing_ok=True)

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
        """Write the marks in the file (other stores' too: it is read first) to a CSV file atomically.

        Every field is quoted, so a carriage return or line break inside a
        note or an id stays inside its cell (RFC 4180). With
        ``spreadsheet_safe`` (the default) a text cell that a spreadsheet would
        run as a formula (starting with ``= + - @``, a tab, a carriage return
        or a line break, and not a plain number) is prefixed with ``'``, as
        OWASP's advice on CSV injection recommends. Returns the path.

        Examples
        --------
        >>> import tempfile, pathlib, csv
        >>> folder = pathlib.Path(tempfile.mkdtemp())
        >>> store = RelabelStore(folder / "m.json")
        >>> _ = store.add("T-1", "billing", note="=1+1")
        >>> rows = list(csv.reader(store.export_csv(folder / "m.csv").open(newline="", encoding="utf-8")))
        >>> len(rows), rows[1][4]
        (2, "'=1+1")
        """
        target = Path(path)
        self.refresh()
        df = self.to_frame()
        if spreadsheet_safe:
            for col in df.columns:
                if df[col].dtype == object or pd.api.types.is_string_dtype(df[col]):
                    df[col] = df[col].map(_defuse_formula)
        with atomic_write(target, "w") as fh:
            df.to_csv(fh, index=False, lineterminator="\n", quoting=csv.QUOTE_ALL)
        return target


_PLAIN_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")


def _defuse_formula(value: object) -> object:
    """Prefix ``'`` to a string a spreadsheet would evaluate as a formula.

    Examples
    --------
    >>> _defuse_formula("=HYPERLINK(1)"), _defuse_formula("-3.5"), _defuse_formula("card-1")
    ("'=HYPERLINK(1)", '-3.5', 'card-1')
    """
    if not isinstance(value, str) or not value or value[0] not in "=+-@\t\r\n":
        return value
    if _PLAIN_NUMBER.fullmatch(value):  # "-3.5" stays a number; "-1+cmd" or "\t1" do not
        return value
    return "'" + value
