"""RelabelQueue (marks for relabeling, saved to a file) and DoubtfulLabelPicker (select the most doubtful labels)."""

from __future__ import annotations

import os
import warnings
from pathlib import Path
from typing import Any

import anywidget
import numpy as np
import pandas as pd
import traitlets

from ..errors import ClassNameError, InputTypeError, LabelError, LogitscopeError, ParameterError
from ..findings import SuspectLabels, suspect_labels
from ..frame import LogitFrame
from ..parameters import RANGES
from ..parameters import check as check_parameter
from ..relabel_store import RelabelStore, RelabelStoreWarning, default_path
from ._assets import esm
from .base import LinkedView
from .state import SharedState

__all__ = ["DoubtfulLabelPicker", "RelabelQueue"]

QUEUE_NAME = "relabel queue"
PICKER_NAME = "doubtful-label picker"
#: The ranking methods and how the picker's menu names them.
METHODS = {
    "confident_learning": "confident learning",
    "given_probability": "given-label probability",
    "label_margin": "label margin",
}
#: Most samples one click on "mark selection" marks; more is likely a slip (Python's mark() has no limit).
UI_MARK_LIMIT = 5000


class RelabelQueue(LinkedView, anywidget.AnyWidget):
    """Mark samples for relabeling with a suggested label and a note; the list lives in a JSON file.

    Marks are made on the current selection or on the focused sample. Every
    change is saved atomically to ``path``; opening a queue again on the same
    path (after a kernel restart, say) restores the list. "Export CSV" writes
    the list beside the JSON file.

    The suggested label defaults, per sample, to the most probable class other
    than the given label (the prediction when the model disagrees with the
    label), or, for samples flagged by the latest pick of a linked
    :class:`DoubtfulLabelPicker`, the class that pick suggested.

    Parameters
    ----------
    frame : LogitFrame
    state : SharedState, optional
    path : str or path-like, optional
        The JSON file; by default one in the current folder named after the
        data, e.g. ``relabel-zero-to-nine-1797-samples-<fingerprint>.json``
        (see :func:`logitscope.relabel_store.default_path`; the same data
        reopens the same list).

    Examples
    --------
    >>> import tempfile, pathlib, logitscope
    >>> frame = logitscope.load_demo("mailroom")
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "marks.json"
    >>> queue = RelabelQueue(frame, path=path)
    >>> queue.mark([5, 7], note="smudged")
    >>> queue.marks[["id", "given_label", "note"]].values.tolist()
    [['card-00005', 'five', 'smudged'], ['card-00007', 'seven', 'smudged']]
    >>> len(RelabelQueue(frame, path=path).marks)  # reopened from the file
    2
    """

    _esm = esm("relabel.js")
    kind = "relabel list"

    _kind = traitlets.Unicode("queue").tag(sync=True)
    path = traitlets.Unicode("", help="the JSON file the marks are saved to").tag(sync=True)
    classes = traitlets.List(traitlets.Unicode()).tag(sync=True)
    items = traitlets.List(traitlets.Dict(), help="marks shown, latest first").tag(sync=True)
    n_marks = traitlets.Int(0).tag(sync=True)
    n_selected = traitlets.Int(0).tag(sync=True)
    focus_id = traitlets.Unicode("", help="id of the focused sample, '' when none").tag(sync=True)
    focus_default = traitlets.Unicode("", help="default suggestion for the focused sample").tag(sync=True)
    status = traitlets.Unicode("").tag(sync=True)
    max_items = traitlets.Int(500, help="how many marks the list shows (all are kept)").tag(sync=True)

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        path: str | os.PathLike[str] | None = None,
        **kwargs: Any,
    ) -> None:
        self.link(frame, state)
        target = default_path(frame) if path is None else Path(path)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", RelabelStoreWarning)
            self.store = RelabelStore(target, frame)  # a corrupt file raises here and is left alone
        notes = [str(w.message) for w in caught if issubclass(w.category, RelabelStoreWarning)]
        for w in caught:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        self._suggestions: dict[int, int] = {}
        super().__init__(path=str(target.resolve()), classes=list(frame.classes), **kwargs)
        loaded = len(self.store)
        if notes:
            self.status = " ".join(notes)
        elif loaded:
            self.status = f"reopened {loaded:,} mark{'s' if loaded != 1 else ''} from the file"
        else:
            self.status = "no marks yet; the list is saved to the file on every change"
        self.on_msg(self._on_msg)
        self._on_state()
        self._show()

    # ------------------------------------------------------------------ Python API

    @property
    def marks(self) -> pd.DataFrame:
        """The marks as a DataFrame (``id, row, given_label, suggested_label, note, marked_at``)."""
        return self.store.to_frame()

    def suggest(self, rows: Any) -> np.ndarray:
        """Default suggested class index for each row (see the class docstring)."""
        r = np.asarray(rows, dtype=np.int64).ravel()
        if r.size == 0:
            return np.zeros(0, dtype=np.int64)
        z = np.array(self.frame.logits[r], dtype=np.float64)
        labels = self.frame.labels
        if labels is not None:
            known = labels[r] >= 0  # an unlabelled row's suggestion is simply its predicted class
            z[np.flatnonzero(known), labels[r][known]] = -np.inf  # the argmax is the same at every temperature
        out = z.argmax(axis=1)
        for i, row in enumerate(r.tolist()):
            if row in self._suggestions:
                out[i] = self._suggestions[row]
        return out.astype(np.int64)

    def set_suggestions(self, rows: Any, classes: Any) -> None:
        """Use these suggested class indices for these rows (a doubtful-label pick calls this)."""
        r = np.asarray(rows, dtype=np.int64).ravel()
        c = np.asarray(classes, dtype=np.int64).ravel()
        if r.shape != c.shape:
            raise ParameterError(f"{r.size} rows but {c.size} suggested classes")
        self._suggestions = dict(zip(r.tolist(), c.tolist(), strict=True))
        self._on_state()

    def mark(self, rows: Any, suggested: Any = None, note: str = "") -> None:
        """Mark rows for relabeling and save.

        Parameters
        ----------
        rows : int, sequence of int or boolean mask
            Row positions in the frame.
        suggested : str or int, optional
            The suggested class (name or index) for all rows; by default each
            row's own suggestion (:meth:`suggest`).
        note : str
            A free note stored with each mark.
        """
        r = self._as_rows(rows)
        if r.size == 0:
            raise ParameterError("nothing to mark: no rows given")
        if suggested is None or suggested == "":
            names = [self.frame.classes[int(j)] for j in self.suggest(r)]
        else:
            names = [self._class_name(suggested)] * r.size
        ids = self.frame.ids[r]
        self.store.add_many(
            {"id": sid, "suggested_label": name, "note": note} for sid, name in zip(ids.tolist(), names, strict=True)
        )
        self.status = f"marked {r.size:,} sample{'s' if r.size != 1 else ''}; saved"
        self._show()

    def unmark(self, ids: Any) -> None:
        """Remove the marks of these sample ids and save."""
        seq = [ids] if isinstance(ids, str | int | np.integer) else list(ids)
        removed = self.store.remove_many(seq)
        self.status = f"removed {removed:,} mark{'s' if removed != 1 else ''}; saved"
        self._show()

    def export_csv(self, path: str | os.PathLike[str] | None = None) -> Path:
        """Write the marks to CSV (by default beside the JSON file) and return the path."""
        target = self.store.path.with_suffix(".csv") if path is None else Path(path)
        out = self.store.export_csv(target)
        self.status = f"exported {len(self.store):,} marks to {out.resolve()}"
        return out

    # ------------------------------------------------------------------ internals

    def _as_rows(self, rows: Any) -> np.ndarray:
        if isinstance(rows, int | np.integer) and not isinstance(rows, bool):
            rows = [int(rows)]
        r = np.asarray(rows)
        if r.dtype == bool:
            if r.shape != (self.frame.n_samples,):
                raise ParameterError(f"a boolean mask must have shape ({self.frame.n_samples},), got {r.shape}")
            return np.flatnonzero(r)
        if r.size and r.dtype.kind not in "iu":
            raise ParameterError(f"rows must be integer positions, got dtype {r.dtype}")
        r = r.astype(np.int64).ravel()
        bad = r[(r < 0) | (r >= self.frame.n_samples)]
        if bad.size:
            raise ParameterError(f"rows must lie in [0, {self.frame.n_samples}); got {bad[:5].tolist()}")
        return np.unique(r)

    def _class_name(self, value: Any) -> str:
        classes = self.frame.classes
        if isinstance(value, int | np.integer) and not isinstance(value, bool):
            if not 0 <= int(value) < len(classes):
                raise ParameterError(f"class index {int(value)} is outside [0, {len(classes)})")
            return classes[int(value)]
        name = str(value)
        if name not in classes:
            raise ClassNameError(f"{name!r} is not one of the frame's {len(classes)} classes")
        return name

    def _on_state(self, change: dict[str, Any] | None = None) -> None:
        focus = self.state.focus
        with self.hold_sync():
            self.n_selected = int(self.state.rows.size)
            if focus is None:
                self.focus_id = ""
                self.focus_default = ""
            else:
                self.focus_id = str(self.frame.ids[focus])
                self.focus_default = self.frame.classes[int(self.suggest([focus])[0])]

    def _show(self) -> None:
        marks = list(self.store)
        latest = marks[::-1][: self.max_items]
        items = [
            {
                "id": m["id"],
                "id_text": str(m["id"]),
                "row": m.get("row"),
                "given_label": m.get("given_label") or "",
                "suggested_label": m.get("suggested_label") or "",
                "note": m.get("note") or "",
                "marked_at": (m.get("marked_at") or "").replace("T", " ").replace("+00:00", " UTC"),
            }
            for m in latest
        ]
        with self.hold_sync():
            self.n_marks = len(marks)
            self.items = items

    def _on_msg(self, widget: Any, content: Any, buffers: Any) -> None:
        if not isinstance(content, dict):
            return
        action = content.get("action")
        try:
            if action == "mark":
                scope = content.get("scope")
                rows = self.state.rows if scope == "selection" else self.state.focus
                if rows is None or (isinstance(rows, np.ndarray) and rows.size == 0):
                    self.status = "nothing to mark: select samples or click one in the gallery first"
                    return
                if isinstance(rows, np.ndarray) and rows.size > UI_MARK_LIMIT:
                    self.status = (
                        f"not marked: the selection holds {rows.size:,} samples, more than {UI_MARK_LIMIT:,} "
                        "at once from here; narrow it, or call queue.mark(rows) in Python"
                    )
                    return
                self.mark(rows, suggested=content.get("suggested") or None, note=str(content.get("note") or ""))
            elif action == "unmark":
                self.unmark([content.get("id")])
            elif action == "export":
                self.export_csv()
            elif action == "focus":
                row = content.get("row")
                if isinstance(row, int) and 0 <= row < self.frame.n_samples:
                    self.state.focus = row
        except (LogitscopeError, OSError) as exc:
            self.status = f"not done: {exc}"

    # ------------------------------------------------------------------ hooks of the linked view

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        self._on_state()

    def on_focus(self, row: int | None) -> None:
        self._on_state()

    def on_frame(self) -> None:
        self.store.use_frame(self.frame)
        self._suggestions = {}
        self.classes = list(self.frame.classes)
        self._on_state()
        self._show()


class DoubtfulLabelPicker(LinkedView, anywidget.AnyWidget):
    """Select the samples whose given label the model doubts most.

    Ranks the frame with :func:`logitscope.analysis.rank_doubtful_labels` at
    the shared temperature, by one of three methods:

    - ``"confident_learning"`` (Northcutt, Jiang and Chuang 2021): flags the
      samples that confidently count for another class than their label;
    - ``"given_probability"``: every sample, lowest probability of its given label first;
    - ``"label_margin"``: every sample, lowest given-label probability minus the best other class's first;

    and selects the top ``n`` in the state, so the gallery shows them. With
    ``queue`` given, the pick's suggested labels become that queue's defaults
    for these samples.

    Parameters
    ----------
    frame : LogitFrame
        Needs labels.
    state : SharedState, optional
    method : str, default "confident_learning"
    n : int, default 24
        How many to select, in the range of ``n_candidates`` (:mod:`logitscope.parameters`).
    queue : RelabelQueue, optional

    Examples
    --------
    >>> import logitscope
    >>> frame = logitscope.load_demo("mailroom")
    >>> picker = DoubtfulLabelPicker(frame, n=10)
    >>> picker.pick()
    >>> picker.state.rows.size, picker.state.origin_name
    (10, 'doubtful-label picker')
    """

    _esm = esm("relabel.js")
    kind = PICKER_NAME

    _kind = traitlets.Unicode("picker").tag(sync=True)
    methods = traitlets.List(traitlets.List(traitlets.Unicode()), help="[value, text] of each method").tag(sync=True)
    method = traitlets.Unicode("confident_learning").tag(sync=True)
    n = traitlets.Int(24).tag(sync=True)
    n_min = traitlets.Int(1, help="smallest n the box accepts (from the parameter range)").tag(sync=True)
    n_max = traitlets.Int(100_000, help="largest n the box accepts (from the parameter range)").tag(sync=True)
    status = traitlets.Unicode("").tag(sync=True)
    enabled = traitlets.Bool(True).tag(sync=True)

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        method: str = "confident_learning",
        n: int = 24,
        queue: RelabelQueue | None = None,
        **kwargs: Any,
    ) -> None:
        self.link(frame, state)
        self.queue = queue
        self.ranking: SuspectLabels | None = None
        self._cache: dict[tuple[str, float], SuspectLabels] = {}
        lo, hi, _ = RANGES["n_candidates"].control_bounds()
        super().__init__(
            methods=[[m, t] for m, t in METHODS.items()], method=method, n=n, n_min=int(lo), n_max=int(hi),
            enabled=frame.has_labels, **kwargs,
        )  # fmt: skip
        self.status = (
            "choose a method and how many, then select"
            if frame.has_labels
            else "this frame has no labels: doubtful labels cannot be ranked"
        )
        self.on_msg(self._on_msg)

    @traitlets.validate("method")
    def _valid_method(self, proposal: Any) -> str:
        if proposal["value"] not in METHODS:
            raise ParameterError(f"method must be one of {', '.join(METHODS)}; got {proposal['value']!r}")
        return str(proposal["value"])

    @traitlets.validate("n")
    def _valid_n(self, proposal: Any) -> int:
        return int(check_parameter(proposal["value"], "n_candidates"))

    def rank(self) -> SuspectLabels:
        """The full ranking for the current method at the shared temperature (cached; labelled rows only)."""
        if self.frame.labels is None:
            raise LabelError("ranking doubtful labels needs labels; this frame has none (use with_labels)")
        key = (self.method, float(self.state.temperature))
        hit = self._cache.get(key)
        if hit is None:
            hit = suspect_labels(self.frame, self.method, key[1])
            self._cache = {key: hit}
        return hit

    def pick(self) -> None:
        """Select the ``n`` most doubtful samples in the state (origin: this picker)."""
        ranking = self.rank()
        top = ranking.top(self.n)
        self.ranking = top
        if self.queue is not None:
            self.queue.set_suggestions(top.rows, top.suggested)
        self.select(top.rows)
        t = self.state.temperature
        how = f"{METHODS[self.method]}, T = {t:.3g}"
        if ranking.n_flagged == 0:
            self.status = f"no sample is flagged ({how})"
            return
        verb = "flagged" if self.method == "confident_learning" else "ranked"
        self.status = f"selected {len(top):,} of {ranking.n_flagged:,} {verb} ({how})"

    def set_count(self, value: Any) -> bool:
        """Set ``n`` from the number box (text or number); return whether it was taken.

        A value outside the range of ``n_candidates`` is refused with a message
        in ``status`` and the box shows the kept value again: never clamped.
        """
        try:
            number: Any = float(value)
            number = int(number) if number.is_integer() else number
        except (TypeError, ValueError, OverflowError):
            number = value
        try:
            self.n = number
        except (LogitscopeError, InputTypeError, traitlets.TraitError) as exc:
            self.status = f"not changed: {exc}"
            self.send_state("n")  # the box shows the kept value again
            return False
        return True

    def _on_msg(self, widget: Any, content: Any, buffers: Any) -> None:
        if not isinstance(content, dict):
            return
        action = content.get("action")
        try:
            if action == "pick":
                self.pick()
            elif action == "n":
                self.set_count(content.get("value"))
        except LogitscopeError as exc:
            self.status = f"not done: {exc}"

    def on_frame(self) -> None:
        self.ranking = None
        self._cache = {}
        self.enabled = self.frame.has_labels
