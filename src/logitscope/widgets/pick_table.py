"""PickTable (js/pick_table.js): a small table whose rows, and chosen cells, select samples when clicked.

The views that show a table of groups of samples (the flip table and the
per-class change of the checkpoint comparison, the most-forgotten samples of
the history) build one. Python sends the columns and the rows as plain
values (the text is formatted here; the browser sets it with ``textContent``),
a click sends the row's key and, for a column marked ``pick``, the column's
key back, and :meth:`PickTable.pick` hands them to the callbacks the view
registered. Clicking a column header sorts the rows in the browser.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

import anywidget
import traitlets

from ..errors import ParameterError
from ._assets import esm

__all__ = ["PickTable", "column"]


def column(key: str, label: str, *, align: str = "right", pick: bool = False, title: str = "") -> dict[str, Any]:
    """One column of a :class:`PickTable`: ``pick`` makes its cells clickable apart from their row.

    Examples
    --------
    >>> column("fixed", "fixed", pick=True)["pick"]
    True
    """
    if align not in ("left", "right"):
        raise ParameterError(f"align must be 'left' or 'right', got {align!r}")
    return {"key": str(key), "label": str(label), "align": align, "pick": bool(pick), "title": str(title)}


class PickTable(anywidget.AnyWidget):
    """A table of rows keyed by strings; a click on a row (or a ``pick`` cell) calls the registered callbacks.

    A cell is a string, or a dict with ``text`` and optionally ``sort`` (the
    number the header click sorts by), ``swatch`` (a colour square before the
    text), ``bar`` (a value in [-1, 1] drawn as a bar from the middle, in
    ``color``), ``title`` (a tooltip) and ``off`` (a ``pick`` cell that does
    not react, e.g. a count of 0).

    Parameters
    ----------
    columns : sequence of dict
        Made with :func:`column`.
    caption : str
        Shown above the table.
    max_height : int, default 320
        Height in pixels beyond which the table scrolls.

    Examples
    --------
    >>> t = PickTable([column("name", "class", align="left"), column("n", "samples", pick=True)])
    >>> t.rows = [{"key": "3", "cells": {"name": "three", "n": "12"}}]
    >>> seen = []
    >>> t.on_pick(lambda row, col: seen.append((row, col)))
    >>> t.pick("3", "n"); seen
    [('3', 'n')]
    """

    _esm = esm("pick_table.js")

    columns = traitlets.List(traitlets.Dict(), help="column specs (see column())").tag(sync=True)
    rows = traitlets.List(traitlets.Dict(), help="rows: {'key': str, 'cells': {column key: cell}}").tag(sync=True)
    active = traitlets.Dict(help="the row (and column) whose samples are selected: {'row', 'column'}").tag(sync=True)
    caption = traitlets.Unicode("").tag(sync=True)
    note = traitlets.Unicode("", help="a line of text below the table").tag(sync=True)
    max_height = traitlets.Int(320).tag(sync=True)
    empty = traitlets.Unicode("Nothing to show.", help="shown instead of an empty table").tag(sync=True)

    def __init__(self, columns: Sequence[dict[str, Any]], **kwargs: Any) -> None:
        self._callbacks: list[Callable[[str, str], None]] = []
        super().__init__(columns=list(columns), **kwargs)
        self.on_msg(self._on_msg)

    @property
    def row_keys(self) -> list[str]:
        """The row keys, in the order Python sent them."""
        return [str(r["key"]) for r in self.rows]

    def on_pick(self, callback: Callable[[str, str], None]) -> None:
        """Call ``callback(row_key, column_key)`` on every click (``column_key`` is "" for the row itself)."""
        self._callbacks.append(callback)

    def pick(self, row: str, column: str = "") -> None:
        """Act as a click on row ``row`` (and on its cell in ``column``, a ``pick`` column)."""
        if str(row) not in self.row_keys:
            raise ParameterError(f"no row {row!r} in this table")
        if column and column not in [c["key"] for c in self.columns if c.get("pick")]:
            raise ParameterError(f"column {column!r} is not a clickable column of this table")
        for callback in list(self._callbacks):
            callback(str(row), str(column))

    def _on_msg(self, widget: Any, content: Any, buffers: Any) -> None:
        if not isinstance(content, dict) or content.get("action") != "pick":
            return
        row, column = str(content.get("row", "")), str(content.get("column") or "")
        if row in self.row_keys:  # a click on a row the kernel has since replaced is dropped
            self.pick(row, column)
