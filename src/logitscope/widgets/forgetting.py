"""The most-forgotten samples over a dashboard's updates (forgetting events, Toneva et al. 2019).

:class:`ForgettingList` renders a :class:`~logitscope.checkpoints.FrameForgetting`
(from :func:`logitscope.checkpoints.forgetting_across` over the frames a
dashboard keeps, in training order): the samples that went from right to
wrong most often between consecutive updates, with their label, their
forgetting and learning events and whether the frame on screen gets them
right. A click on a row selects that sample and shows it in the card; the
buttons select every forgotten sample, or the samples never right at any
kept update (the paper ranks those above all forgotten ones; here they are
kept apart so the list shows samples that flip).
"""

from __future__ import annotations

import html
from typing import Any

import ipywidgets as widgets
import numpy as np
import pandas as pd

from ..checkpoints import FrameForgetting
from ..errors import ParameterError
from ..frame import LogitFrame
from .base import LinkedView
from .pick_table import PickTable, column
from .state import SharedState
from .style import css

__all__ = ["ForgettingList"]


class ForgettingList(LinkedView, widgets.VBox):
    """A short table of the samples forgotten most often across checkpoints; a click selects one.

    Parameters
    ----------
    frame : LogitFrame
        The frame on screen; the view's selections are its rows (samples are matched by id).
    state : SharedState, optional
        Shared state; a new one is made when None.
    n : int, default 15
        Samples listed.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> from logitscope.checkpoints import forgetting_across
    >>> z = {0: [[2, 0], [0, 2], [2, 0]], 1: [[0, 2], [0, 2], [2, 0]], 2: [[2, 0], [0, 2], [0, 2]]}
    >>> epochs = [LogitFrame(np.array(z[e], dtype=float), labels=[0, 1, 0], ids=["a", "b", "c"]) for e in z]
    >>> view = ForgettingList(epochs[-1])
    >>> view.show(forgetting_across(epochs))
    >>> view.listed_ids, view.table.row_keys
    (['a', 'c'], ['0', '1'])
    >>> view.select_listed(0).tolist(), view.state.focus
    ([0], 0)
    """

    kind = "forgetting list"

    def __init__(self, frame: LogitFrame, state: SharedState | None = None, *, n: int = 15, **kwargs: Any) -> None:
        if isinstance(n, bool) or not isinstance(n, int | np.integer) or n < 1:
            raise ParameterError(f"n must be a positive integer, got {n!r}")
        self.link(frame, state)
        self.n = int(n)
        self.forgetting: FrameForgetting | None = None
        self._listed = np.zeros(0, dtype=np.int64)  # aligned positions of the listed samples, in rank order
        self.head = widgets.HTML(
            css("views") + "<div class='ls-head'>Samples forgotten most often</div>"
            "<div class='ls-muted'>a forgetting event: right at one kept update, wrong at the next "
            "(Toneva et al. 2019)</div>"
        )
        self.table = PickTable(
            [
                column("rank", "#"),
                column("id", "sample id", align="left"),
                column("label", "label", align="left"),
                column("forgotten", "forgetting events"),
                column("learned", "learning events"),
                column("now", "right now?", title="right under the frame on screen"),
            ],
            max_height=300,
            empty="Forgetting needs at least two updates with labels.",
        )
        self.table.add_class("logitscope-forgetting")
        self.table.layout.max_width = "760px"
        self.table.on_pick(self._on_pick)
        self.forgotten_button = widgets.Button(description="select all forgotten", layout={"width": "auto"})
        self.never_button = widgets.Button(description="select never right", layout={"width": "auto"})
        self.forgotten_button.on_click(lambda b: self.select_forgotten())
        self.never_button.on_click(lambda b: self.select_never_learned())
        self.note = widgets.HTML()
        buttons = widgets.HBox([self.forgotten_button, self.never_button])
        widgets.VBox.__init__(self, children=[self.head, self.table, buttons, self.note], **kwargs)
        self.add_class("logitscope-forgetting-list")
        self.show(None)

    # ------------------------------------------------------------------ content

    @property
    def listed_ids(self) -> list[Any]:
        """Ids of the samples listed, most-forgotten first."""
        if self.forgetting is None:
            return []
        return [v.item() if isinstance(v, np.generic) else v for v in np.asarray(self.forgetting.ids)[self._listed]]

    def show(self, forgetting: FrameForgetting | None, message: str = "") -> None:
        """Show a ranking (None: none yet, with ``message`` saying why)."""
        self.forgetting = forgetting
        if forgetting is None:
            self._listed = np.zeros(0, dtype=np.int64)
            self._rows = np.zeros(0, dtype=np.int64)
            self.table.rows = []
            if message:
                self.table.empty = message
            self.forgotten_button.disabled = self.never_button.disabled = True
            self.note.value = ""
            return
        r = forgetting.ranking
        # the ranking puts never-learned samples first; this list keeps them apart
        order = r.order[r.forgetting_events[r.order] > 0]
        self._listed = order[: self.n]
        self._map_rows()
        n_forgotten = int(np.count_nonzero(r.forgetting_events > 0))
        n_never = int(np.count_nonzero(r.never_learned))
        self.forgotten_button.description = f"select all {n_forgotten:,} forgotten"
        self.never_button.description = f"select the {n_never:,} never right"
        self.forgotten_button.disabled = n_forgotten == 0
        self.never_button.disabled = n_never == 0
        dropped = sum(int(d.size) for d in forgetting.aligned.dropped)
        text = (
            f"over {r.n_checkpoints} kept updates and {r.n_samples:,} samples: {n_forgotten:,} forgotten at least "
            f"once, {n_never:,} never right"
        )
        if dropped:
            text += f"; {dropped:,} ids not held by every kept update are left out"
        self.note.value = css("views") + f"<span class='ls-note'>{html.escape(text)}</span>"
        if not self._listed.size:
            self.table.empty = "No sample was forgotten between the kept updates."

    def _map_rows(self) -> None:
        """Frame rows of the listed samples (-1 where the frame on screen lacks the id), and the table."""
        f = self.forgetting
        if f is None:
            return
        ids = np.asarray(f.ids)[self._listed]
        self._rows = pd.Index(np.asarray(self.frame.ids)).get_indexer(pd.Index(ids)).astype(np.int64)
        correct = self.frame.sample_scores().correct
        classes = f.aligned.frames[0].classes
        labels = next((g.labels for g in f.aligned.frames if g.labels is not None), None)
        rows = []
        r = f.ranking
        for rank, (i, row) in enumerate(zip(self._listed.tolist(), self._rows.tolist(), strict=True), start=1):
            now = "—" if correct is None or row < 0 else ("yes" if bool(correct[row]) else "no")
            rows.append(
                {
                    "key": str(rank - 1),
                    "title": "click to select this sample" if row >= 0 else "not in the frame on screen",
                    "cells": {
                        "rank": {"text": str(rank), "sort": rank},
                        "id": str(ids[rank - 1]),
                        "label": "" if labels is None else classes[int(labels[i])],
                        "forgotten": {"text": str(int(r.forgetting_events[i])), "sort": int(r.forgetting_events[i])},
                        "learned": {"text": str(int(r.learning_events[i])), "sort": int(r.learning_events[i])},
                        "now": now,
                    },
                }
            )
        self.table.rows = rows

    # ------------------------------------------------------------------ selection out

    def _frame_rows_of(self, aligned: np.ndarray) -> np.ndarray:
        assert self.forgetting is not None
        rows = pd.Index(np.asarray(self.frame.ids)).get_indexer(pd.Index(np.asarray(self.forgetting.ids)[aligned]))
        return np.sort(rows[rows >= 0]).astype(np.int64)

    def select_listed(self, i: int) -> np.ndarray:
        """Select the ``i``-th listed sample (0 = the most forgotten) and show it in the card."""
        if not 0 <= int(i) < self._listed.size:
            raise ParameterError(f"the list holds {self._listed.size} samples; got {i}")
        row = int(self._rows[int(i)])
        if row < 0:
            raise ParameterError(f"sample {self.listed_ids[int(i)]!r} is not in the frame on screen")
        out = self.select([row])
        self.focus_row(row)
        self.table.active = {"row": str(int(i))}
        return out

    def select_forgotten(self) -> np.ndarray:
        """Select every sample forgotten at least once."""
        if self.forgetting is None:
            raise ParameterError("no forgetting ranking yet: it needs at least two updates with labels")
        r = self.forgetting.ranking
        self.table.active = {}
        return self.select(self._frame_rows_of(np.flatnonzero(r.forgetting_events > 0)))

    def select_never_learned(self) -> np.ndarray:
        """Select the samples wrong at every kept update."""
        if self.forgetting is None:
            raise ParameterError("no forgetting ranking yet: it needs at least two updates with labels")
        self.table.active = {}
        return self.select(self._frame_rows_of(np.flatnonzero(self.forgetting.ranking.never_learned)))

    def _on_pick(self, row: str, col: str) -> None:
        if int(self._rows[int(row)]) >= 0:  # a sample the frame on screen lacks cannot be selected
            self.select_listed(int(row))

    # ------------------------------------------------------------------ hooks

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        if not mine:
            self.table.active = {}

    def on_frame(self) -> None:
        self._map_rows()
