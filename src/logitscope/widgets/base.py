"""The base every linked view builds on: the wiring to the shared state, in one place.

A linked view shows one :class:`~logitscope.frame.LogitFrame` and follows one
:class:`SharedState`. :class:`LinkedView` owns what every view needs:

- the argument checks (a frame, and a state for the same number of rows);
- an *origin token* of its own (``state.register(name)``), so two views of the
  same kind on one state never take each other's selection for their own;
  ``name`` stays the readable label shown in readouts;
- :meth:`select` / :meth:`clear_selection` / :attr:`owns_selection`;
- a re-entry guard (:meth:`quietly`) for updates the view makes to its own
  controls, so they do not echo back as user actions;
- the observers of the state: a subclass overrides :meth:`on_selection`,
  :meth:`on_temperature`, :meth:`on_focus` and :meth:`on_frame` as it needs.

A new view is then one module: a class with a ``kind`` (its registration
line, which also puts it in :data:`VIEW_KINDS`) that draws in ``__init__``
and in the hooks. A view that draws in the browser adds one ES module in
``js/``. Views never call each other.

Examples
--------
>>> import numpy as np
>>> import ipywidgets as widgets
>>> from logitscope import LogitFrame
>>> class RowCount(LinkedView, widgets.HTML):
...     kind = "row count"
...     def __init__(self, frame, state=None):
...         widgets.HTML.__init__(self)
...         self.link(frame, state)
...     def on_selection(self, rows, mine):
...         self.value = f"{rows.size} rows"
>>> frame = LogitFrame(np.zeros((4, 2)))
>>> a = RowCount(frame); b = RowCount(frame, a.state)
>>> b.select([1, 2]).tolist(), a.value, a.owns_selection, b.owns_selection
([1, 2], '2 rows', False, True)
>>> a.state.origin, a.state.origin_name
('row count#2', 'row count')
"""

from __future__ import annotations

import html
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any, ClassVar

import numpy as np

from ..errors import InputTypeError, ParameterError
from ..frame import LogitFrame
from .state import SharedState

__all__ = ["VIEW_KINDS", "LinkedView", "check_view_args"]

#: Every view class by its ``kind``, filled as the classes are defined.
VIEW_KINDS: dict[str, type[LinkedView]] = {}


def check_view_args(frame: object, state: SharedState | None) -> SharedState:
    """Check a view's ``frame`` and ``state`` arguments; return the state to use (new when None).

    Examples
    --------
    >>> from logitscope import LogitFrame
    >>> check_view_args(LogitFrame(np.zeros((3, 2))), None).n_samples
    3
    """
    if not isinstance(frame, LogitFrame):
        raise InputTypeError(f"frame must be a LogitFrame, got {type(frame).__name__}")
    if state is None:
        return SharedState(frame.n_samples, frame.temperature)
    if not isinstance(state, SharedState):
        raise InputTypeError(f"state must be a SharedState, got {type(state).__name__}")
    if state.n_samples != frame.n_samples:
        raise ParameterError(f"the state is for {state.n_samples} samples but the frame has {frame.n_samples}")
    return state


class LinkedView:
    """Mixin for a view linked to a :class:`SharedState`; combine with an ipywidgets or anywidget class.

    Subclasses set ``kind`` (their readable kind, e.g. ``"reliability diagram"``),
    build their widget, then call :meth:`link` once. Hooks (all optional):

    - ``on_selection(rows, mine)``: the shared selection changed (``mine``: this view made it);
    - ``on_temperature(temperature)``: the shared temperature changed;
    - ``on_focus(row)``: the focused row changed (None: no focus);
    - ``on_frame()``: :meth:`show_frame` gave the view another frame.

    A hook never runs while the view itself is inside :meth:`quietly`.
    """

    kind: ClassVar[str] = "view"
    frame: LogitFrame
    state: SharedState
    name: str
    origin: str

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if "kind" in cls.__dict__:
            VIEW_KINDS[cls.kind] = cls

    # ------------------------------------------------------------------ wiring

    def link(self, frame: LogitFrame, state: SharedState | None = None, name: str | None = None) -> SharedState:
        """Attach the view to ``frame`` and ``state`` (a new state when None); return the state."""
        self.state = check_view_args(frame, state)
        self.frame = frame
        self.name = str(name) if name else self.kind
        self.origin = self.state.register(self.name, self)
        self._quiet_depth = 0
        self._seen_selection: tuple[int, str] | None = None
        self.state.observe(self._state_selection, ["rows", "origin"])
        self.state.observe(self._state_temperature, "temperature")
        self.state.observe(self._state_focus, "focus")
        return self.state

    @contextmanager
    def quietly(self) -> Iterator[None]:
        """Within this block the view's own hooks and control callbacks do not fire (re-entry guard)."""
        self._quiet_depth += 1
        try:
            yield
        finally:
            self._quiet_depth -= 1

    @property
    def is_quiet(self) -> bool:
        """True inside :meth:`quietly` (control callbacks check it to ignore their own echoes)."""
        return getattr(self, "_quiet_depth", 0) > 0

    # ------------------------------------------------------------------ selection

    @property
    def owns_selection(self) -> bool:
        """Whether the current shared selection was made by this view."""
        return self.state.origin == self.origin

    @property
    def selection_source(self) -> str:
        """Readable name of the view (or "Python") that made the current selection; "" when none."""
        return self.state.origin_name

    def selected_by(self) -> str:
        """``" by the <view>"``, ``" from Python"`` or ``""``: who made the selection, HTML-escaped, for readouts."""
        source = self.selection_source
        if not source:
            return ""
        if source == "Python":
            return " from Python"
        return f" by the {html.escape(source)}"

    def select(self, rows: Any) -> np.ndarray:
        """Make ``rows`` the shared selection, as this view; return the selected rows."""
        self.state.select(rows, origin=self.origin)
        return self.state.rows

    def clear_selection(self) -> None:
        """Clear the shared selection if this view made it."""
        if self.owns_selection:
            self.state.clear(origin=self.origin)

    def focus_row(self, row: int | None) -> None:
        """Show ``row`` large in the sample card (None: no focus)."""
        self.state.focus = None if row is None else int(row)

    def show_frame(self, frame: LogitFrame) -> None:
        """Show another frame (same classes); the state must already be resized to its rows."""
        check_view_args(frame, self.state)
        self.frame = frame
        self.on_frame()

    def held_widgets(self) -> list[Any]:
        """The widgets this view changes on a new selection, in the order their messages should leave.

        :meth:`SharedState.select` holds their messages to the browser until every view has
        followed the selection, then sends them together (see :meth:`SharedState.batch`).
        """
        return [self] if hasattr(self, "hold_sync") else []

    # ------------------------------------------------------------------ hooks (override)

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        """The shared selection changed."""

    def on_temperature(self, temperature: float) -> None:
        """The shared temperature changed."""

    def on_focus(self, row: int | None) -> None:
        """The focused row changed."""

    def on_frame(self) -> None:
        """The view was given another frame: redraw everything."""

    # ------------------------------------------------------------------ observers

    def _state_selection(self, change: Any = None) -> None:
        key = (id(self.state.rows), self.state.origin)
        if key == self._seen_selection:  # rows and origin changed together: one call
            return
        self._seen_selection = key
        if not self.is_quiet:
            self.on_selection(self.state.rows, self.owns_selection)

    def _state_temperature(self, change: Any) -> None:
        if not self.is_quiet:
            self.on_temperature(float(change["new"]))

    def _state_focus(self, change: Any) -> None:
        if not self.is_quiet:
            self.on_focus(change["new"])
