"""SampleGallery: a page of sample tiles for the current selection, sorted by a score column."""

from __future__ import annotations

from typing import Any

import anywidget
import numpy as np
import traitlets

from .. import analysis as an
from ..errors import ParameterError
from ..frame import LogitFrame
from ._assets import esm
from .base import LinkedView
from .state import SharedState
from .style import ENERGY
from .thumbnails import ThumbnailCache, snippet

__all__ = ["SampleGallery", "page_probabilities", "sort_columns"]

NAME = "gallery"


def page_probabilities(frame: LogitFrame, rows: np.ndarray, temperature: float) -> np.ndarray:
    """``softmax(z / T)`` of the given rows only, float64 ``(len(rows), K)`` (never the whole N x K).

    Examples
    --------
    >>> import logitscope
    >>> f = logitscope.load_demo("mailroom")
    >>> page_probabilities(f, np.array([0, 5]), 1.0).shape
    (2, 10)
    """
    with an.assume_valid():
        return an.softmax(frame.logits[np.asarray(rows, dtype=np.int64)], temperature=temperature, dtype=np.float64)


def top_classes(probs: np.ndarray, k: int) -> np.ndarray:
    """Column indices of the ``k`` largest probabilities of each row, largest first (ties: lower index first).

    Examples
    --------
    >>> top_classes(np.array([[0.1, 0.6, 0.3], [0.5, 0.0, 0.5]]), 2).tolist()
    [[1, 2], [0, 2]]
    """
    order = np.argsort(-probs, axis=1, kind="stable")
    return order[:, : min(k, probs.shape[1])]


def first_in_order(keys: np.ndarray, m: int) -> np.ndarray:
    """Positions of the ``m`` smallest ``keys`` in the order of a stable sort, without sorting them all.

    ``np.argpartition`` finds the ``m``-th smallest value in linear time; only the keys below it
    and the first ties at it are sorted, so a gallery page of a 10M-row selection costs a pass,
    not a sort. Equal to ``np.argsort(keys, kind="stable")[:m]`` (NaN keys: that sort, in full).

    Examples
    --------
    >>> keys = np.array([0.5, 0.1, 0.5, 0.3, 0.5, 0.2])
    >>> first_in_order(keys, 4).tolist(), np.argsort(keys, kind="stable")[:4].tolist()
    ([1, 5, 3, 0], [1, 5, 3, 0])
    """
    n = keys.size
    if m >= n or np.isnan(keys).any():
        return np.argsort(keys, kind="stable")[:m]
    cut = keys[np.argpartition(keys, m - 1)[:m]].max()
    below = np.flatnonzero(keys < cut)
    tied = np.flatnonzero(keys == cut)[: m - below.size]
    picked = np.concatenate([below, tied])  # each part in row order: a stable sort keeps it for ties
    return picked[np.argsort(keys[picked], kind="stable")]


class SampleGallery(LinkedView, anywidget.AnyWidget):
    """Tiles of the selected samples (all samples when nothing is selected), one page at a time.

    Each tile shows the sample's image thumbnail or the start of its text, its
    id, the given label, the predicted class (marked right or wrong) and the
    three most probable classes at the shared temperature. Clicking a tile
    sets ``state.focus``. Only the visible page is computed and sent to the
    browser; thumbnails are encoded on demand and cached.

    Parameters
    ----------
    frame : LogitFrame
    state : SharedState, optional
        Shared with other views; a new one when omitted.
    page_size : int, default 24
        Tiles per page.
    sort_by : str, default "confidence"
        A score column (see :attr:`sort_columns`) or ``"row"`` for frame order.
    descending : bool, default False
        Sort high values first (False shows the least confident first).
    thumbnail_size : int, default 64
        Long side of a thumbnail in pixels; small images are enlarged to it.

    Examples
    --------
    >>> import logitscope
    >>> frame = logitscope.load_demo("mailroom")
    >>> gallery = SampleGallery(frame, page_size=12)
    >>> gallery.n_pages, len(gallery.tiles)
    (150, 12)
    >>> gallery.state.select([3, 9, 40], origin="python")
    >>> sorted(gallery.page_rows.tolist()), gallery.scope
    ([3, 9, 40], '3 selected (Python)')
    """

    _esm = esm("gallery.js")
    kind = "gallery"

    tiles = traitlets.List(traitlets.Dict(), help="the visible page, one dict per tile").tag(sync=True)
    page = traitlets.Int(0, help="visible page, from 0").tag(sync=True)
    n_pages = traitlets.Int(1).tag(sync=True)
    n_shown = traitlets.Int(0, help="samples in the gallery (selected, or all)").tag(sync=True)
    scope = traitlets.Unicode("").tag(sync=True)
    sort_by = traitlets.Unicode("confidence").tag(sync=True)
    descending = traitlets.Bool(False).tag(sync=True)
    sort_columns = traitlets.List(traitlets.Unicode()).tag(sync=True)
    focus = traitlets.Int(None, allow_none=True, help="the focused row (mirrors state.focus)").tag(sync=True)

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        page_size: int = 24,
        sort_by: str = "confidence",
        descending: bool = False,
        thumbnail_size: int = 64,
        **kwargs: Any,
    ) -> None:
        st = self.link(frame, state)
        if isinstance(page_size, bool) or not isinstance(page_size, int | np.integer) or page_size < 1:
            raise ParameterError(f"page_size must be a positive integer, got {page_size!r}")
        self.page_size = int(page_size)
        self._thumbnail_size = int(thumbnail_size)
        self.thumbnails = ThumbnailCache(frame.payload, size=thumbnail_size)
        cols = sort_columns(frame)
        self._check_sort(sort_by, cols)
        self._order_key: tuple[Any, ...] | None = None
        self._order_rows: np.ndarray | None = None
        self._order = np.zeros(0, dtype=np.int64)  # the first rows in display order (``_ranked`` of them)
        self._base = np.zeros(0, dtype=np.int64)
        self._keys = np.zeros(0, dtype=np.float64)
        self._page_rows = np.zeros(0, dtype=np.int64)
        self._busy = False
        super().__init__(sort_columns=cols, sort_by=sort_by, descending=bool(descending), focus=st.focus, **kwargs)
        self.observe(self._on_page, "page")
        self.observe(self._back_to_first_page, ["sort_by", "descending"])
        self.observe(self._on_focus, "focus")
        self.refresh()

    # ------------------------------------------------------------------ public

    @property
    def page_rows(self) -> np.ndarray:
        """Row positions shown on the current page, in display order."""
        return self._page_rows.copy()

    @property
    def order(self) -> np.ndarray:
        """Every row in the gallery, in display order (the selection, or all rows)."""
        self._ensure_order()
        self._rank_first(self._base.size)
        return self._order.copy()

    def next_page(self) -> None:
        """Show the next page (no-op on the last)."""
        self.page = min(self.page + 1, self.n_pages - 1)

    def prev_page(self) -> None:
        """Show the previous page (no-op on the first)."""
        self.page = max(self.page - 1, 0)

    def refresh(self) -> None:
        """Recompute the visible page from the state."""
        self._ensure_order()
        n = int(self._base.size)
        n_pages = max(1, -(-n // self.page_size))
        page = min(max(int(self.page), 0), n_pages - 1)
        self._rank_first((page + 1) * self.page_size)  # a page needs only the rows up to its own
        rows = self._order[page * self.page_size : (page + 1) * self.page_size]
        self._page_rows = rows
        tiles = self._tiles(rows)
        k = int(self.state.rows.size)
        if k:
            origin = self.selection_source
            scope = f"{k:,} selected" + (f" ({origin})" if origin else "")
        else:
            scope = f"all {n:,} samples"
        self._busy = True
        try:
            with self.hold_sync():
                self.n_shown = n
                self.n_pages = n_pages
                self.page = page
                self.scope = scope
                self.tiles = tiles
        finally:
            self._busy = False

    # ------------------------------------------------------------------ internals

    @staticmethod
    def _check_sort(sort_by: str, cols: list[str]) -> None:
        if sort_by not in cols:
            raise ParameterError(f"sort_by must be one of {', '.join(cols)}; got {sort_by!r}")

    def _sort_values(self) -> np.ndarray:
        if self.sort_by == "row":
            return np.arange(self.frame.n_samples, dtype=np.float64)
        values = getattr(self.frame.sample_scores(self.state.temperature), self.sort_by)
        return np.asarray(values, dtype=np.float64)

    def _ensure_order(self) -> None:
        rows = self.state.rows
        key = (self.sort_by, self.descending, self.state.temperature)
        if rows is self._order_rows and key == self._order_key:
            return
        base = rows if rows.size else np.arange(self.frame.n_samples, dtype=np.int64)
        v = self._sort_values()[base]
        self._base, self._keys = base, (-v if self.descending else v)
        self._order = base[:0]
        self._order_rows = rows
        self._order_key = key

    def _rank_first(self, m: int) -> None:
        """Make ``_order`` hold at least the first ``m`` rows in display order (a stable sort by the key)."""
        if self._order.size >= min(m, self._base.size):
            return
        self._order = self._base[first_in_order(self._keys, max(m, 4 * self.page_size))]

    def _tiles(self, rows: np.ndarray) -> list[dict[str, Any]]:
        if rows.size == 0:
            return []
        frame = self.frame
        t = self.state.temperature
        scores = frame.sample_scores(t)
        probs = page_probabilities(frame, rows, t)
        top = top_classes(probs, 3)
        values = self._sort_values()[rows]
        classes = frame.classes
        labels = frame.labels
        payload = frame.payload
        out = []
        for i, r in enumerate(rows.tolist()):
            pred = int(scores.predicted[r])
            tile: dict[str, Any] = {
                "row": r,
                "id": str(frame.ids[r]),
                "label": None if labels is None or labels[r] < 0 else classes[int(labels[r])],
                "predicted": classes[pred],
                "correct": None if labels is None or labels[r] < 0 else bool(int(labels[r]) == pred),
                "top": [[classes[int(j)], float(probs[i, j])] for j in top[i]],
                "value": float(values[i]),
                "png": None,
                "width": 0,
                "height": 0,
                "text": None,
                "error": None,
            }
            if payload is not None and payload.kind == "texts":
                tile["text"] = snippet(payload.data[r])
            else:
                thumb = self.thumbnails.get(r)
                if thumb is not None:
                    tile.update(png=thumb.png, width=thumb.width, height=thumb.height, error=thumb.error)
            out.append(tile)
        return out

    def _back_to_first_page(self, change: dict[str, Any]) -> None:
        """A new selection or sort order starts again at page 0, with one refresh."""
        self._busy = True
        try:
            self.page = 0
        finally:
            self._busy = False
        self.refresh()

    def _on_page(self, change: dict[str, Any]) -> None:
        if not self._busy:
            self.refresh()

    @traitlets.validate("sort_by")
    def _valid_sort(self, proposal: Any) -> str:
        value = str(proposal["value"])
        if self.sort_columns:
            self._check_sort(value, list(self.sort_columns))
        return value

    def _on_focus(self, change: dict[str, Any]) -> None:
        if self.is_quiet:
            return
        new = change["new"]
        if new is not None and not 0 <= int(new) < self.frame.n_samples:
            self.focus = change["old"]
            return
        self.state.focus = new

    # ------------------------------------------------------------------ hooks of the linked view

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        self._back_to_first_page({})

    def on_temperature(self, temperature: float) -> None:
        self.refresh()

    def on_focus(self, row: int | None) -> None:
        self.focus = row

    def on_frame(self) -> None:
        self.thumbnails = ThumbnailCache(self.frame.payload, size=self._thumbnail_size)
        self._order_key = None
        self._order_rows = None
        with self.quietly():
            self.focus = self.state.focus
        self._back_to_first_page({})


_UNLABELLED = {"confidence", "entropy", "margin", "logit_margin", "energy"}


def sort_columns(frame: LogitFrame) -> list[str]:
    """The columns a gallery of ``frame`` can sort by: its scores (no energy for probabilities), then ``"row"``.

    Examples
    --------
    >>> import logitscope
    >>> frame = logitscope.load_demo("mailroom")
    >>> "energy" in sort_columns(frame), "energy" in sort_columns(LogitFrame.from_probabilities(frame.probabilities()))
    (True, False)
    """
    cols = [
        c
        for c in an.SCORE_COLUMNS
        if c != "predicted"
        and (frame.has_labels or c in _UNLABELLED)
        and not (c == ENERGY and frame.source == "probabilities")
    ]
    return [*cols, "row"]
