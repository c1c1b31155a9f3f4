"""The linked dashboard: every view on one frame and one shared state, in tabs.

"Explore" holds the score scatter, the confidence histogram, the confusion
heat map, the sample gallery and card, the temperature dial, the relabel
queue and the doubtful-label picker. "Calibrate and decide" holds the
calibration panel; it is built the first time the tab is opened (or
:attr:`Dashboard.calibration` is read), so the first view appears sooner.
"History" plots the set-level numbers of every frame the dashboard has shown
and lists the samples forgotten most often between the kept frames
(:meth:`Dashboard.forgetting`). Given a second frame (``compare_to``, or
:meth:`Dashboard.compare`), a "Compare" tab holds the checkpoint comparison on
the dashboard's own state, so a click there selects in the Explore tab too.

A dashboard opened before or during training follows the model:
:meth:`Dashboard.update` shows a new frame in place (also from inside a
running training loop), keeping the selection, the focused sample and the
relabel marks by sample id, and the temperature unless told otherwise.
"""

from __future__ import annotations

import html
import os
from collections import OrderedDict
from collections.abc import Sequence
from contextlib import ExitStack
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import ipywidgets as widgets
import numpy as np
import pandas as pd

from ..alignment import MissingIds
from ..analysis import check_temperature
from ..checkpoints import FrameForgetting, compare_frames, forgetting_across
from ..errors import ClassNameError, InputTypeError, LogitscopeError, ParameterError, ShapeError
from ..findings import Binning, count_selection, epoch_record
from ..findings.history import record_time as _now
from ..frame import LogitFrame
from .base import LinkedView
from .card import SampleCard
from .comparison import CheckpointComparisonView
from .confusion import ConfusionHeatmap
from .dial import TemperatureDial
from .forgetting import ForgettingList
from .gallery import SampleGallery
from .gate import ShownWhenVisible
from .histogram import ConfidenceHistogram
from .history import EpochHistoryView
from .relabel import DoubtfulLabelPicker, RelabelQueue
from .scatter import ScoreScatter
from .state import SharedState

if TYPE_CHECKING:
    from .calibration_panel import CalibrationPanel

__all__ = ["Dashboard"]

TAB_TITLES = ("Explore", "Calibrate and decide", "History")
#: Title of the tab :meth:`Dashboard.compare` adds.
COMPARE_TITLE = "Compare"
_HISTORY_TAB = 2
#: Names of the two frames in the comparison tab and its messages.
COMPARE_NAMES = ("this dashboard's frame", "the other frame")
#: Height of the sample card: fixed, so the layout does not move when it fills (its content scrolls).
CARD_HEIGHT = "520px"
#: Tiles per gallery page: three rows beside the card on a wide page.
GALLERY_PAGE = 12
#: Long side of the image in the card: small enough for the image and the scores to sit side by side.
CARD_IMAGE = 168
#: Frames kept for stepping back to an earlier update (the numbers of every update are kept).
KEEP_FRAMES = 10


def _panel(title: str | None, child: widgets.Widget, **layout: str) -> widgets.VBox:
    """A view in a padded box, under a bold title (None: the view shows its own title)."""
    parts = [child] if title is None else [widgets.HTML(f"<b>{html.escape(title)}</b>"), child]
    box = widgets.VBox(parts, layout=widgets.Layout(**{"padding": "4px 6px", "min_width": "0", **layout}))
    box.add_class("logitscope-panel")
    return box


@dataclass(frozen=True)
class _PendingRecord:
    """A frame shown whose history record is still to be made (see ``Dashboard._settle_records``)."""

    frame: LogitFrame
    update: int
    label: str | None
    binning: Binning
    shown_at: str


def _same_ids(a: LogitFrame, b: LogitFrame) -> bool:
    """Whether two frames hold the same ids in the same row order (then rows map to themselves)."""
    ia, ib = np.asarray(a.ids), np.asarray(b.ids)
    return ia is ib or (ia.shape == ib.shape and ia.dtype.kind == ib.dtype.kind and bool(np.array_equal(ia, ib)))


def _row(*panels: widgets.Widget) -> widgets.HBox:
    return widgets.HBox(list(panels), layout=widgets.Layout(width="100%", flex_flow="row wrap", align_items="stretch"))


class Dashboard(LinkedView, widgets.VBox):
    """All linked views on one frame: brush, click or set ``selected`` and every view follows.

    Parameters
    ----------
    frame : LogitFrame
        The data.
    state : SharedState, optional
        Shared state; a new one is made when None.
    relabel_path : str or path-like, optional
        JSON file of the relabel queue (see :class:`RelabelQueue`); the
        queue's default file name when None.
    max_classes : int, default 30
        Classes the confusion heat map draws on their own (the rest are "other").
    label : str, optional
        Name of the first frame in the history (default ``"update 0"``).
    keep_frames : int, default 10
        How many of the most recent frames are kept to step back to (each holds its logit matrix).
    compare_to : LogitFrame, optional
        Another checkpoint's frame of the same samples (any row order): adds the
        "Compare" tab (see :meth:`compare`).
    compare_missing : {"raise", "drop"}, default "raise"
        Ids that only one of the two frames holds: an error naming them, or shown apart in the tab.

    Examples
    --------
    >>> import tempfile, pathlib, logitscope
    >>> frame = logitscope.load_demo("mailroom")
    >>> dash = Dashboard(frame, relabel_path=pathlib.Path(tempfile.mkdtemp()) / "marks.json")
    >>> dash.selected = [4, 8, 15]
    >>> dash.state.origin_name, sorted(dash.gallery.page_rows.tolist())
    ('Python', [4, 8, 15])
    >>> int(dash.confusion.select_cell("four", "nine").size) == int(dash.confusion.counts[4, 9])
    True
    """

    kind = "dashboard"

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        relabel_path: str | os.PathLike[str] | None = None,
        *,
        max_classes: int = 30,
        label: str | None = None,
        keep_frames: int = KEEP_FRAMES,
        compare_to: LogitFrame | None = None,
        compare_missing: MissingIds = "raise",
        **kwargs: Any,
    ) -> None:
        if isinstance(keep_frames, bool) or not isinstance(keep_frames, int | np.integer) or keep_frames < 1:
            raise ParameterError(f"keep_frames must be a positive integer, got {keep_frames!r}")
        st = self.link(frame, state)
        self.keep_frames = int(keep_frames)
        self._frames: OrderedDict[int, LogitFrame] = OrderedDict([(0, frame)])
        # Views are told of a new selection in the order they are made here. The histogram comes
        # first: bqplot moves bars on the next animation frame, so its update should leave early
        # (measured with bench/bench_dashboard.py: about 15 ms off the median brush).
        self.histogram = ConfidenceHistogram(frame, st)
        self.confusion = ConfusionHeatmap(frame, st, max_classes=max_classes)
        self.scatter = ScoreScatter(frame, st)
        self.gallery = SampleGallery(frame, st, page_size=GALLERY_PAGE)
        self.card = SampleCard(frame, st, image_size=CARD_IMAGE)
        self.dial = TemperatureDial(frame, st)
        self.queue = RelabelQueue(frame, st, path=relabel_path)
        self.doubtful = DoubtfulLabelPicker(frame, st, queue=self.queue)
        self._calibration: CalibrationPanel | None = None
        self.comparison: CheckpointComparisonView | None = None
        self.forgetting_list = ForgettingList(frame, st)
        self._forgetting: tuple[tuple[int, ...], FrameForgetting | None, str] | None = None

        self._summary = widgets.Label()
        self._selection = widgets.Label()
        self._selection.add_class("logitscope-selection")
        self._clear = widgets.Button(description="clear selection", icon="times", layout={"width": "auto"})
        self._clear.on_click(lambda b: self.state.clear(origin=self.origin))
        title = widgets.HTML("<b>logitscope</b>")
        header = widgets.HBox(
            [title, self._summary], layout=widgets.Layout(align_items="center", flex_flow="row wrap", gap="0 16px")
        )
        # the selection line and the temperature dial share a row; the dial wraps below on a narrow page
        selection_bar = widgets.HBox(
            [widgets.HBox([self._selection, self._clear], layout=widgets.Layout(align_items="center")), self.dial],
            layout=widgets.Layout(align_items="center", justify_content="space-between", flex_flow="row wrap"),
        )
        # The card sits beside the gallery at a fixed height (its content scrolls inside), so a click on
        # a tile never moves the tiles: the layout stays put whatever the card shows.
        self.card.layout.height = CARD_HEIGHT
        row1 = _row(
            _panel("Score scatter", self.scatter, flex="1.3 1 420px", min_width="360px"),
            _panel("Confidence histogram", self.histogram, flex="1 1 300px", min_width="280px"),
        )
        row2 = _row(
            _panel(None, self.gallery, flex="1 1 330px", min_width="310px"),
            # the card's own stylesheet asks for at least 360 px plus its padding
            _panel("Sample card", self.card, flex="0 0 380px", min_width="380px"),
        )
        side = widgets.VBox(
            [_panel(None, self.queue), _panel(None, self.doubtful)],
            layout=widgets.Layout(flex="1 1 380px", min_width="340px"),
        )
        row3 = _row(_panel("Confusion matrix", self.confusion, flex="1.4 1 640px"), side)
        self.explore = widgets.VBox([row1, row2, row3], layout=widgets.Layout(width="100%"))
        self._calibrate_box = widgets.VBox([widgets.Label("building the calibration views…")])
        # A frame's history record (a temperature fit and a sort of the confidences: 0.3 s at 100k x 100,
        # seconds at 10M rows) is made when the history is needed: its tab in sight, ``history`` or
        # ``history_view`` read, or the frame about to leave the kept frames. An update out of the
        # History tab's sight then costs only the redraw of the views on screen.
        self._pending: list[_PendingRecord] = [_PendingRecord(frame, 0, label, st.binning, _now())]
        self._n_updates = 1
        self._on_screen = 0  # the update whose frame the views show
        self._history_view = EpochHistoryView([], on_pick=self.show_update, kept=lambda i: i in self._frames)
        self.history_tab = widgets.VBox([self._history_view, self.forgetting_list], layout=widgets.Layout(width="100%"))
        # Each tab holds its content only while it is shown: a bqplot figure drawn inside a hidden tab
        # (also after a page reload) has no size and fills the console with negative-size errors.
        self._tab_contents: list[widgets.Widget] = [self.explore, self._calibrate_box, self.history_tab]
        self._tab_holders = [widgets.VBox(layout=widgets.Layout(width="100%")) for _ in self._tab_contents]
        self.tabs = widgets.Tab(children=self._tab_holders, titles=list(TAB_TITLES))
        self._attach_tab(0)
        self.tabs.observe(self._on_tab, "selected_index")
        # drawn by the browser only once the dashboard is on screen (see ShownWhenVisible)
        self.gate = ShownWhenVisible(
            widgets.VBox([header, selection_bar, self.tabs], layout=widgets.Layout(width="100%"))
        )
        widgets.VBox.__init__(self, children=[self.gate], layout=widgets.Layout(width="100%"), **kwargs)
        self.add_class("logitscope-dashboard")
        self._on_temperature()
        if compare_to is not None:
            try:
                self.compare(compare_to, missing=compare_missing)
            except ShapeError as exc:
                drop = compare_missing == "raise"
                hint = " (Dashboard(..., compare_missing='drop') shows them apart)" if drop else ""
                raise ShapeError(f"{exc}{hint}") from exc

    # ------------------------------------------------------------------ public

    @property
    def selected(self) -> np.ndarray:
        """Row positions of the current selection (sorted, unique); assign to select from Python."""
        return self.state.rows

    @selected.setter
    def selected(self, rows: Any) -> None:
        self.state.select(rows, origin="python")

    @property
    def views(self) -> list[LinkedView]:
        """Every linked view of the dashboard (the calibration panel's once it is built), panel last."""
        out: list[LinkedView] = [
            self.histogram, self.confusion, self.scatter, self.gallery, self.card, self.dial, self.queue,
            self.doubtful, self.forgetting_list,
        ]  # fmt: skip
        if self.comparison is not None:
            out.append(self.comparison)
        if self._calibration is not None:
            c = self._calibration
            out += [c.diagram, c.held_diagram, c.sweep, c.picker, c]
        return out

    def compare(
        self, other: LogitFrame, *, missing: MissingIds = "raise", names: Sequence[str] = COMPARE_NAMES
    ) -> CheckpointComparisonView:
        """Compare the frame on screen with another checkpoint's frame in a "Compare" tab; return the view.

        ``other`` is aligned to this dashboard's frame by sample id (any row
        order). The view is on the dashboard's state: a click on a flip-table
        cell, a class or a brushed rectangle selects those samples in the
        Explore tab's gallery and card too. After :meth:`update` the tab
        compares the new frame with ``other``. Calling again replaces the tab's view.

        Parameters
        ----------
        other : LogitFrame
            Same classes in the same order.
        missing : {"raise", "drop"}, default "raise"
            Ids held by one frame only: a :class:`~logitscope.ShapeError` naming
            them, or left out of the comparison and named apart in the tab.
        names : two str
            Names of the two frames in the tab and in messages.

        Examples
        --------
        >>> import tempfile, pathlib, logitscope
        >>> frame = logitscope.load_demo("mailroom")
        >>> other = frame.subset(np.arange(frame.n_samples)[::-1])  # same samples, another order
        >>> dash = Dashboard(frame, relabel_path=pathlib.Path(tempfile.mkdtemp()) / "m.json")
        >>> view = dash.compare(other)
        >>> dash.tabs.get_title(3), int(view.flip_table.loc["fixed", "count"])
        ('Compare', 0)
        >>> rows = view.select_cell("wrong_same")  # wrong under both, same class: the Explore gallery shows them
        >>> dash.gallery.n_shown == rows.size == int(view.flip_table.loc["wrong_same", "count"])
        True
        """
        if not isinstance(other, LogitFrame):
            raise InputTypeError(f"other must be a LogitFrame, got {type(other).__name__}")
        result = compare_frames(self.frame, other, missing=missing, names=names)
        view = CheckpointComparisonView(result, self.state, frame=self.frame)
        old = self.comparison
        self.comparison = view
        titles = [self.tabs.get_title(i) for i in range(len(self.tabs.children))]
        if old is None:
            self._tab_contents.append(view)
            self._tab_holders.append(widgets.VBox(layout=widgets.Layout(width="100%")))
            self.tabs.children = [*self.tabs.children, self._tab_holders[-1]]
            self.tabs.titles = [*titles, COMPARE_TITLE]
        else:
            self._tab_contents[self._compare_index] = view
            old.close()
        # out of sight the view neither redraws on each selection nor recompares on each update
        view.live = self.tabs.selected_index == self._compare_index
        if view.live:
            self._attach_tab(self._compare_index)
        return view

    def forgetting(self) -> FrameForgetting:
        """Samples ranked by forgetting events over the kept frames, in update order (Toneva et al. 2019).

        Uses :func:`logitscope.checkpoints.forgetting_across` on the frames kept
        for stepping back (``keep_frames``), matched by id; ids some kept frame
        lacks are left out.

        Raises
        ------
        ParameterError
            With fewer than two kept frames.
        LabelError
            If the kept frames have no labels, or their labels disagree.

        Examples
        --------
        >>> import tempfile, pathlib, logitscope
        >>> frame = logitscope.load_demo("mailroom")
        >>> dash = Dashboard(frame, relabel_path=pathlib.Path(tempfile.mkdtemp()) / "m.json")
        >>> dash.update(frame.with_temperature(2.0))
        >>> int(dash.forgetting().ranking.forgetting_events.sum())  # the same predictions twice: nothing forgotten
        0
        """
        key = tuple(self._frames)
        if self._forgetting is not None and self._forgetting[0] == key and self._forgetting[1] is not None:
            return self._forgetting[1]
        result = forgetting_across(list(self._frames.values()), missing="drop")
        self._forgetting = (key, result, "")
        return result

    def _refresh_forgetting(self) -> None:
        """Show the forgetting ranking of the kept frames in the History tab (when it is out of date)."""
        key = tuple(self._frames)
        if self._forgetting is not None and self._forgetting[0] == key:
            cached, message = self._forgetting[1], self._forgetting[2]
        else:
            if len(key) < 2:
                cached, message = None, "Forgetting needs at least two updates: call dash.update(frame) each epoch."
            else:
                try:
                    cached, message = forgetting_across(list(self._frames.values()), missing="drop"), ""
                except LogitscopeError as exc:
                    cached, message = None, f"No forgetting ranking: {exc}"
            self._forgetting = (key, cached, message)
        if self.forgetting_list.forgetting is not cached or cached is None:
            self.forgetting_list.show(cached, message)

    @property
    def history(self) -> pd.DataFrame:
        """One row per frame shown (the first included): accuracy, NLL, ECE, fitted T, ..."""
        return self.history_view.table()

    @property
    def history_view(self) -> EpochHistoryView:
        """The History tab's plots of every update, with every record made."""
        self._settle_records()
        return self._history_view

    @property
    def pending_records(self) -> int:
        """Frames shown whose history record is not made yet (it is made when the history is needed)."""
        return len(self._pending)

    def update(self, frame: LogitFrame, label: str | None = None, *, temperature: float | None = None) -> None:
        """Show ``frame`` (a new epoch's outputs, say) in every view, in place.

        The selection, the focused sample and the relabel marks follow by sample id
        (rows whose id the new frame lacks drop out of the selection); the
        temperature stays as it is unless ``temperature`` is given. The new frame
        is added to :attr:`history`; its record (a temperature fit among others) is
        made when the history is needed (the History tab in sight, :attr:`history`
        read, or the frame about to leave the kept ones), so an update redraws the
        views on screen and nothing else. Callable from inside a running training
        loop: the views update while the cell runs.

        Parameters
        ----------
        frame : LogitFrame
            Same classes, in the same order.
        label : str, optional
            Its name in the history (default ``"update <n>"``).
        temperature : float, optional
            Set the shared temperature to this value.
        """
        shown_at = _now()
        self._show(frame, temperature)
        n = self._n_updates
        self._n_updates += 1
        self._on_screen = n
        self._frames[n] = frame
        self._pending.append(_PendingRecord(frame, n, label, self.state.binning, shown_at))
        while len(self._frames) > self.keep_frames:
            dropped, _ = self._frames.popitem(last=False)
            # a record is made before its frame is let go (the views are redrawn by now)
            self._settle_records(upto=dropped)
        if self.tabs.selected_index == _HISTORY_TAB:
            self._settle_records()
            self._refresh_forgetting()

    def show_update(self, index: int) -> None:
        """Show again the frame of an earlier update (if it is still kept; see ``keep_frames``)."""
        if index not in self._frames:
            kept = ", ".join(str(i) for i in self._frames)
            raise ParameterError(f"the frame of update {index} is not kept; kept: {kept}")
        self._show(self._frames[index], None)
        self._on_screen = int(index)
        if self.tabs.selected_index == _HISTORY_TAB or not self._pending:
            self._settle_records()
            self._history_view.current = int(index)

    def _show(self, frame: LogitFrame, temperature: float | None) -> None:
        if not isinstance(frame, LogitFrame):
            raise InputTypeError(f"frame must be a LogitFrame, got {type(frame).__name__}")
        if frame.classes != self.frame.classes:
            raise ClassNameError("the new frame must have the same classes in the same order as the dashboard's")
        t = None if temperature is None else check_temperature(temperature)
        old = self.frame
        if _same_ids(old, frame):  # the same samples in the same order (an epoch over one fixed batch)
            rows, focus = self.state.rows, self.state.focus
        else:
            index = pd.Index(np.asarray(frame.ids))
            rows = index.get_indexer(pd.Index(np.asarray(old.ids[self.state.rows])))
            rows = np.sort(rows[rows >= 0])
            focus = None
            if self.state.focus is not None:
                hit = int(index.get_indexer(pd.Index(np.asarray(old.ids[[self.state.focus]])))[0])
                focus = hit if hit >= 0 else None
        views = self.views
        with ExitStack() as quiet:
            for v in [*views, self]:
                quiet.enter_context(v.quietly())
            origin = self.state.origin
            self.state.resize(frame.n_samples, rows, focus)
            self.state.origin = origin if rows.size else ""
            if t is not None:
                self.state.temperature = t
            for v in [*views, self]:
                v.frame = frame
        for v in views:
            v.on_frame()
        self.on_frame()

    def on_frame(self) -> None:
        self._on_temperature()

    @property
    def calibration(self) -> CalibrationPanel:
        """The calibration panel of the second tab (built on first use)."""
        if self._calibration is None:
            from .calibration_panel import CalibrationPanel

            self._calibration = CalibrationPanel(self.frame, self.state)
            self._calibration.relabel_store = self.queue.store
            self._calibration.sweep.live = self.tabs.selected_index == 1
            self._tab_contents[1] = self._calibration
            if self.tabs.selected_index == 1:
                self._attach_tab(1)
        return self._calibration

    # ------------------------------------------------------------------ callbacks

    @property
    def _compare_index(self) -> int:
        return len(TAB_TITLES)

    def _attach_tab(self, index: int | None) -> None:
        """Put the content of tab ``index`` in its holder and take every other tab's content out."""
        for i, holder in enumerate(self._tab_holders):
            want: tuple[widgets.Widget, ...] = (self._tab_contents[i],) if i == index else ()
            if holder.children != want:
                holder.children = want

    def _on_tab(self, change: Any) -> None:
        index = change["new"]
        if index == 1:
            self.calibration  # noqa: B018 (built on first use)
        self._attach_tab(index)
        # the sweep's selection curve costs a pass per temperature: keep it for when its tab is in sight
        if index == 1:
            self.calibration.sweep.live = True
        elif self._calibration is not None:
            self._calibration.sweep.live = False
        # the forgetting ranking costs a pass over every kept frame: made when its tab is in sight
        if index == _HISTORY_TAB:
            self._settle_records()
            self._refresh_forgetting()
        if self.comparison is not None:
            self.comparison.live = index == self._compare_index

    def _on_rows(self, change: Any = None) -> None:
        rows = self.state.rows
        n = self.frame.n_samples
        if rows.size == 0:
            self._selection.value = f"nothing selected: views show all {n:,} samples"
            self._clear.disabled = True
            return
        text = f"{rows.size:,} of {n:,} samples selected{self.selected_by()}"
        count = count_selection(self.frame, rows, self.state.temperature)
        if count.n_wrong is not None and count.wrong_share is not None:
            of = "them" if count.n_labelled == count.n else f"the {count.n_labelled:,} labelled"
            text += f"; {count.n_wrong:,} of {of} misclassified ({count.wrong_share:.0%})"
        self._selection.value = text
        self._clear.disabled = False

    def _settle_records(self, upto: int | None = None) -> None:
        """Make the pending history records (those of updates up to ``upto``; all when None), in order."""
        if not self._pending:
            return
        take = [p for p in self._pending if upto is None or p.update <= upto]
        if not take:
            return
        self._pending = self._pending[len(take) :]
        records = [epoch_record(p.frame, p.update, p.label, p.binning, shown_at=p.shown_at) for p in take]
        self._history_view.extend(records, current=self._on_screen)

    def _on_temperature(self, change: Any = None) -> None:
        f = self.frame
        text = f"{f.n_samples:,} samples × {f.n_classes:,} classes"
        if f.has_labels:
            # the share right among the labelled rows (the calibration summary's accuracy, without its sorts)
            every = count_selection(f, np.arange(f.n_samples), self.state.temperature)
            assert every.wrong_share is not None
            text += f", accuracy {1.0 - every.wrong_share:.1%}"
            if not f.fully_labelled:
                text += f" on the {f.n_labelled:,} labelled rows"
        self._summary.value = text
        self._on_rows()

    # ------------------------------------------------------------------ hooks of the linked view

    def held_widgets(self) -> list[Any]:
        return [self._selection, self._clear]

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        self._on_rows()

    def on_temperature(self, temperature: float) -> None:
        self._on_temperature()
