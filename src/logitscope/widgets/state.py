"""The shared state that links every view: selected rows, focus row, temperature, threshold.

Views never talk to each other. Each one observes a :class:`SharedState`
and writes to it: brushing a scatter sets ``rows`` (with ``origin`` naming
the view), and every other view redraws its own highlight. Moving the
temperature dial sets ``temperature`` and every view re-reads the cached
scores of its frame at that temperature.
"""

from __future__ import annotations

import weakref
from collections.abc import Iterator
from contextlib import ExitStack, contextmanager
from typing import TYPE_CHECKING, Any

import numpy as np
import traitlets

from ..findings import Binning
from ..parameters import check as check_parameter
from ..rows import as_rows, rows_or_all

if TYPE_CHECKING:
    from .bundle import SyncBundle

__all__ = ["SharedState", "as_rows", "rows_or_all"]


class SharedState(traitlets.HasTraits):
    """Selection and temperature shared by linked views.

    Parameters
    ----------
    n_samples : int
        Rows of the frame the views show.
    temperature : float
        Starting temperature.

    Examples
    --------
    >>> state = SharedState(5)
    >>> seen = []
    >>> state.observe(lambda change: seen.append(change["new"].tolist()), "rows")
    >>> state.select([3, 1], origin="test")
    >>> seen, state.origin
    ([[1, 3]], 'test')
    """

    rows = traitlets.Instance(np.ndarray, help="selected row positions, sorted and unique")
    origin = traitlets.Unicode("", help="token of the view that made the current selection (see register)")
    temperature = traitlets.Float(1.0, help="softmax temperature every view follows")
    threshold = traitlets.Float(None, allow_none=True, help="confidence threshold chosen for review, if any")
    focus = traitlets.Int(None, allow_none=True, help="the one row shown large in the sample card, if any")
    binning = traitlets.Instance(Binning, help="the one binning every calibration number of the views uses")

    def __init__(self, n_samples: int, temperature: float = 1.0, **kwargs: Any) -> None:
        self.n_samples = int(n_samples)
        self._names: dict[str, str] = {"": "", "python": "Python"}
        self._counts: dict[str, int] = {}
        self._views: list[weakref.ref[Any]] = []
        self._bundle: SyncBundle | None = None  # made when the first view registers
        self._batching = False
        kwargs.setdefault("binning", Binning())
        super().__init__(rows=np.zeros(0, dtype=np.int64), temperature=float(temperature), **kwargs)

    def register(self, name: str, view: Any = None) -> str:
        """A new origin token for a view called ``name``; two views of one name get two tokens.

        Examples
        --------
        >>> state = SharedState(3)
        >>> state.register("reliability diagram"), state.register("reliability diagram")
        ('reliability diagram#1', 'reliability diagram#2')
        >>> state.name_of("reliability diagram#2")
        'reliability diagram'
        """
        k = self._counts.get(name, 0) + 1
        self._counts[name] = k
        token = f"{name}#{k}"
        self._names[token] = name
        if view is not None:
            self._views.append(weakref.ref(view))
            if self._bundle is None:
                from .bundle import SyncBundle

                self._bundle = SyncBundle()
        return token

    @contextmanager
    def batch(self) -> Iterator[None]:
        """Hold the browser messages of every registered view's widgets; send them together at the end.

        The views' numbers are computed one after the other in the kernel; had each view's messages
        left as soon as they were made, the browser would redraw views while the kernel still computes
        others (two processes busy, and the server relaying the messages waits for a free core on a
        small machine). Held, they leave together at the end, the first view's first: as one message
        (:class:`~logitscope.widgets.bundle.SyncBundle`) once a page has loaded the module that applies
        it, which the browser handles in one task and draws once; else one message per widget.
        :meth:`select` runs inside it; each view names its widgets in ``held_widgets()``.

        Examples
        --------
        >>> state = SharedState(3)
        >>> with state.batch():
        ...     state.select([2], origin="test")
        >>> state.rows.tolist()
        [2]
        """
        alive = [v for v in (ref() for ref in self._views) if v is not None]
        self._views = [weakref.ref(v) for v in alive]
        held = [w for v in alive for w in v.held_widgets()]
        outermost = not self._batching
        self._batching = True
        try:
            with ExitStack() as stack:
                for w in reversed(held):  # held contexts close last-in first-out: the first widget's message first
                    stack.enter_context(w.hold_sync())
                yield
                if outermost and self._bundle is not None:
                    self._bundle.send_held(held)  # one message for all, once a page can apply it
        finally:
            if outermost:
                self._batching = False

    @property
    def bundle(self) -> SyncBundle | None:
        """The :class:`~logitscope.widgets.bundle.SyncBundle` that sends a selection's updates as one
        message (None until a view registers); its ``ready`` says whether a page can apply them."""
        return self._bundle

    def name_of(self, token: str) -> str:
        """The readable name behind an origin token (the token itself when unknown)."""
        return self._names.get(token, token)

    @property
    def origin_name(self) -> str:
        """Readable name of whoever made the current selection ("" when nobody did)."""
        return self.name_of(self.origin)

    def resize(self, n_samples: int, rows: Any = None, focus: int | None = None) -> None:
        """Follow a new frame of ``n_samples`` rows: the selection becomes ``rows``, the focus ``focus``.

        Used when a dashboard shows another frame; the caller maps the old
        selection to the new rows (by sample id).
        """
        new = as_rows(rows, int(n_samples))
        with self.hold_trait_notifications():
            self.focus = None
            self.n_samples = int(n_samples)
            self.rows = new
            if focus is not None:
                self.focus = int(focus)

    @traitlets.validate("rows")
    def _valid_rows(self, proposal: Any) -> np.ndarray:
        return as_rows(proposal["value"], self.n_samples)

    @traitlets.validate("focus")
    def _valid_focus(self, proposal: Any) -> int | None:
        v = proposal["value"]
        if v is not None and not 0 <= int(v) < self.n_samples:
            raise traitlets.TraitError(f"focus row must lie in [0, {self.n_samples}), got {v}")
        return v

    @traitlets.validate("temperature")
    def _valid_temperature(self, proposal: Any) -> float:
        # the one accepted range of every layer (logitscope.parameters): outside it, a ParameterError
        return float(check_parameter(proposal["value"], "temperature"))

    def select(self, rows: Any, origin: str = "") -> None:
        """Replace the selection; ``origin`` is the token of the view making it.

        Observers of ``rows`` fire only when the rows change; ``origin`` is set first.
        """
        new = as_rows(rows, self.n_samples)
        with self.batch(), self.hold_trait_notifications():
            self.origin = origin
            if not np.array_equal(new, self.rows):
                self.rows = new

    def clear(self, origin: str = "") -> None:
        """Select nothing."""
        self.select(None, origin)
