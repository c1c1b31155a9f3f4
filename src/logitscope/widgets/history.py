"""Epoch history: accuracy, NLL, ECE and the fitted temperature of every frame a dashboard has shown.

Each :meth:`~logitscope.widgets.Dashboard.update` adds one
:class:`~logitscope.findings.EpochRecord`; the view draws one small chart per
number against the update, rings the update on screen, and clicking a point
asks the dashboard to show that update again (when its frame is still kept).
"""

from __future__ import annotations

import html
from collections.abc import Callable, Sequence
from typing import Any

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import pandas as pd
import traitlets

from ..findings import EPOCH_COLUMNS, EpochRecord
from ..ticks import nice_ticks
from .style import MUTED, SELECTED, css, figure_layout

__all__ = ["EpochHistoryView"]

_SERIES = (
    ("accuracy", "accuracy", "#0f8a6d", ".3f"),
    ("nll", "NLL", "#0072b2", ".3f"),
    ("ece", "ECE", "#c26a00", ".3f"),
    ("fitted_temperature", "fitted T", "#6b5fa8", ".2f"),
)


class EpochHistoryView(widgets.VBox):
    """Small multiples of the set-level numbers over the updates of a dashboard.

    Parameters
    ----------
    records : sequence of EpochRecord
    current : int
        Index of the record on screen.
    on_pick : callable, optional
        Called with a record's index when its point is clicked.
    kept : callable, optional
        Tells whether the frame of a record is still kept (only those can be shown again).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> from logitscope.findings import epoch_record
    >>> frames = [LogitFrame(np.array([[s, 0.0], [0.0, 1.0]]), labels=[0, 0]) for s in (-1.0, 2.0)]
    >>> view = EpochHistoryView([epoch_record(f, i) for i, f in enumerate(frames)], current=1)
    >>> view.table()["accuracy"].tolist()
    [0.0, 0.5]
    """

    current = traitlets.Int(0, help="index of the record on screen")

    def __init__(
        self,
        records: Sequence[EpochRecord] = (),
        current: int = 0,
        on_pick: Callable[[int], None] | None = None,
        kept: Callable[[int], bool] | None = None,
        **kwargs: Any,
    ) -> None:
        self.records: list[EpochRecord] = list(records)
        self.on_pick = on_pick
        self.kept = kept
        self._sx = bq.LinearScale()
        self.figures: dict[str, bq.Figure] = {}
        self.lines: dict[str, bq.Lines] = {}
        self.points: dict[str, bq.Scatter] = {}
        self.rings: dict[str, bq.Scatter] = {}
        for key, label, color, fmt in _SERIES:
            sy = bq.LinearScale()
            sc = {"x": self._sx, "y": sy}
            line = bq.Lines(x=[0.0], y=[0.0], scales=sc, colors=[color], stroke_width=2)
            points = bq.Scatter(
                x=[0.0], y=[0.0], scales=sc, colors=[color], default_size=40, stroke="white",
                tooltip=bq.Tooltip(fields=["x", "y"], labels=["update", label], formats=[".0f", fmt]),
            )  # fmt: skip
            ring = bq.Scatter(
                x=[0.0], y=[0.0], scales=sc, colors=["white"], stroke=SELECTED, stroke_width=2.5, default_size=150,
                fill=False,
            )  # fmt: skip
            points.on_element_click(self._on_click)
            self.lines[key], self.points[key], self.rings[key] = line, points, ring
            self.figures[key] = bq.Figure(
                marks=[line, ring, points],
                axes=[
                    bq.Axis(scale=self._sx, label="update", tick_format=".0f", grid_lines="none"),
                    bq.Axis(scale=sy, side="left", tick_format=fmt, grid_lines="dashed"),
                ],
                title=label,
                title_style={"font-size": "12.5px"},
                fig_margin={"top": 28, "bottom": 40, "left": 52, "right": 10},
                padding_y=0.1,
                display_toolbar=False,
                layout=figure_layout("230px", "190px"),
            )
        self.note = widgets.HTML()
        widgets.VBox.__init__(
            self,
            children=[widgets.HBox(list(self.figures.values()), layout={"flex_flow": "row wrap"}), self.note],
            **kwargs,
        )
        self.add_class("logitscope-history")
        self.current = int(current)
        self.observe(lambda c: self._draw(), "current")
        self._draw()

    def add(self, record: EpochRecord) -> None:
        """Append a record and make it the current one."""
        self.extend([record])

    def extend(self, records: Sequence[EpochRecord], current: int | None = None) -> None:
        """Append records and draw once; ``current`` becomes the record on screen (default: the last)."""
        if not records:
            return
        self.records.extend(records)
        # the record on screen may not be made yet (records are made in order): then the last one made
        index = len(self.records) - 1 if current is None else min(int(current), len(self.records) - 1)
        if index == self.current:
            self._draw()
        else:
            self.current = index  # its observer draws

    def table(self) -> pd.DataFrame:
        """The records as a DataFrame, one row per frame shown."""
        return pd.DataFrame([r.to_dict() for r in self.records], columns=list(EPOCH_COLUMNS))

    def _draw(self) -> None:
        if not self.records:
            self.note.value = ""
            return
        x = np.arange(len(self.records), dtype=np.float64)
        lo, hi = (-0.5, 0.5) if x.size == 1 else (-0.2, float(x[-1]) + 0.2)
        self._sx.min, self._sx.max = lo, hi
        ticks = [t for t in nice_ticks(0.0, max(1.0, float(x[-1])), n=min(5, max(1, x.size - 1))) if t == int(t)]
        for key, _, _, _ in _SERIES:
            y = np.array([np.nan if getattr(r, key) is None else getattr(r, key) for r in self.records], dtype=float)
            fig = self.figures[key]
            fig.axes[0].tick_values = np.asarray(ticks)
            ok = np.isfinite(y)
            with fig.hold_sync():
                with self.lines[key].hold_sync():
                    self.lines[key].x, self.lines[key].y = (x[ok], y[ok]) if ok.any() else ([0.0], [0.0])
                with self.points[key].hold_sync():
                    self.points[key].x, self.points[key].y = (x[ok], y[ok]) if ok.any() else ([0.0], [0.0])
                i = self.current
                visible = 0 <= i < y.size and bool(np.isfinite(y[i]))
                if visible:
                    with self.rings[key].hold_sync():
                        self.rings[key].x, self.rings[key].y = [float(i)], [float(y[i])]
                self.rings[key].visible = visible
                self.points[key].visible = self.lines[key].visible = bool(ok.any())
        r = self.records[self.current]
        parts = [f"<b>{html.escape(r.label)}</b> on screen ({r.n_samples:,} samples)"]
        if r.accuracy is not None:
            parts.append(
                f"accuracy {r.accuracy:.4f}, NLL {r.nll:.4f}, ECE {r.ece:.4f}, fitted T {r.fitted_temperature:.3f}"
            )
        else:
            parts.append("no labels: accuracy, NLL, ECE and the fitted T need them")
        parts.append("click a point to show that update again")
        self.note.value = css("views") + f"<span class='ls-note' style='color:{MUTED}'>{' · '.join(parts)}</span>"

    def _on_click(self, mark: Any, content: dict) -> None:
        i = (content.get("data") or {}).get("index")
        if i is None or self.on_pick is None:
            return
        # the points of a series skip records without that number: map the point back to its record
        x = np.asarray(mark.x)
        if not 0 <= int(i) < x.size:
            return
        record = round(float(x[int(i)]))
        if self.kept is not None and not self.kept(record):
            self.note.value = (
                css("views") + f"<span class='ls-error'>The frame of update {record} is no longer kept "
                "(the dashboard keeps the most recent ones).</span>"
            )
            return
        self.on_pick(record)
