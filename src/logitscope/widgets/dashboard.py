"""The linked dashboard: every view on one frame and one shared state, in two tabs.

"Explore" holds the score scatter, the confidence histogram, the confusion
heat map, the sample gallery and card, the temperature dial, the relabel
queue and the label-issue picker. "Calibrate and decide" holds the
calibration panel; it is built the first time the tab is opened (or
:attr:`Dashboard.calibration` is read), so the first view appears sooner.
"""

from __future__ import annotations

import html
import os
from typing import TYPE_CHECKING, Any

import ipywidgets as widgets
import numpy as np

from ..findings import calibration_summary, count_selection
from ..frame import LogitFrame
from .base import LinkedView
from .card import SampleCard
from .confusion import ConfusionHeatmap
from .dial import TemperatureDial
from .gallery import SampleGallery
from .histogram import ConfidenceHistogram
from .relabel import LabelIssuePicker, RelabelQueue
from .scatter import ScoreScatter
from .state import SharedState

if TYPE_CHECKING:
    from .calibration_panel import CalibrationPanel

__all__ = ["Dashboard"]

TAB_TITLES = ("Explore", "Calibrate and decide")


def _panel(title: str, child: widgets.Widget, **layout: str) -> widgets.VBox:
    head = widgets.HTML(f"<b>{html.escape(title)}</b>")
    box = widgets.VBox([head, child], layout=widgets.Layout(**{"padding": "4px 6px", "min_width": "0", **layout}))
    box.add_class("logitscope-panel")
    return box


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
        **kwargs: Any,
    ) -> None:
        st = self.link(frame, state)
        # Views are told of a new selection in the order they are made here. The histogram comes
        # first: bqplot moves bars on the next animation frame, so its update should leave early
        # (measured with bench/bench_dashboard.py: about 15 ms off the median brush).
        self.histogram = ConfidenceHistogram(frame, st)
        self.confusion = ConfusionHeatmap(frame, st, max_classes=max_classes)
        self.scatter = ScoreScatter(frame, st)
        self.gallery = SampleGallery(frame, st)
        self.card = SampleCard(frame, st)
        self.dial = TemperatureDial(frame, st)
        self.queue = RelabelQueue(frame, st, path=relabel_path)
        self.issues = LabelIssuePicker(frame, st, queue=self.queue)
        self._calibration: CalibrationPanel | None = None

        self._summary = widgets.Label()
        self._selection = widgets.Label()
        self._selection.add_class("logitscope-selection")
        self._clear = widgets.Button(description="clear selection", icon="times", layout={"width": "auto"})
        self._clear.on_click(lambda b: self.state.clear(origin=self.origin))
        title = widgets.HTML("<b>logitscope</b>")
        header = widgets.HBox(
            [title, self._summary, self.dial],
            layout=widgets.Layout(align_items="center", justify_content="space-between", flex_flow="row wrap"),
        )
        selection_bar = widgets.HBox([self._selection, self._clear], layout=widgets.Layout(align_items="center"))

        row1 = _row(
            _panel("Score scatter", self.scatter, flex="1.3 1 400px", min_width="360px"),
            _panel("Confidence histogram", self.histogram, flex="1 1 280px", min_width="270px"),
            # the card's own stylesheet asks for at least 400 px plus its padding
            _panel("Sample card", self.card, flex="0 0 440px", min_width="440px"),
        )
        row2 = _row(_panel("Samples", self.gallery, flex="1 1 100%"))
        side = widgets.VBox(
            [_panel("Relabel queue", self.queue), _panel("Label-issue candidates", self.issues)],
            layout=widgets.Layout(flex="1 1 380px", min_width="340px"),
        )
        row3 = _row(_panel("Confusion matrix", self.confusion, flex="1.4 1 640px"), side)
        self.explore = widgets.VBox([row1, row2, row3], layout=widgets.Layout(width="100%"))
        self._calibrate_box = widgets.VBox([widgets.Label("building the calibration views…")])
        self.tabs = widgets.Tab(children=[self.explore, self._calibrate_box], titles=list(TAB_TITLES))
        self.tabs.observe(self._on_tab, "selected_index")
        widgets.VBox.__init__(
            self, children=[header, selection_bar, self.tabs], layout=widgets.Layout(width="100%"), **kwargs
        )
        self.add_class("logitscope-dashboard")
        self._on_temperature()

    # ------------------------------------------------------------------ public

    @property
    def selected(self) -> np.ndarray:
        """Row positions of the current selection (sorted, unique); assign to select from Python."""
        return self.state.rows

    @selected.setter
    def selected(self, rows: Any) -> None:
        self.state.select(rows, origin="python")

    @property
    def calibration(self) -> CalibrationPanel:
        """The calibration panel of the second tab (built on first use)."""
        if self._calibration is None:
            from .calibration_panel import CalibrationPanel

            self._calibration = CalibrationPanel(self.frame, self.state)
            self._calibration.relabel_store = self.queue.store
            self._calibration.sweep.live = self.tabs.selected_index == 1
            self._calibrate_box.children = [self._calibration]
        return self._calibration

    # ------------------------------------------------------------------ callbacks

    def _on_tab(self, change: Any) -> None:
        # the sweep's selection curve costs a pass per temperature: keep it for when its tab is in sight
        if change["new"] == 1:
            self.calibration.sweep.live = True
        elif self._calibration is not None:
            self._calibration.sweep.live = False

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
            text += f"; {count.n_wrong:,} of them misclassified ({count.wrong_share:.0%})"
        self._selection.value = text
        self._clear.disabled = False

    def _on_temperature(self, change: Any = None) -> None:
        f = self.frame
        text = f"{f.n_samples:,} samples × {f.n_classes:,} classes"
        if f.has_labels:
            text += f", accuracy {calibration_summary(f, self.state.temperature).accuracy:.1%}"
        self._summary.value = text
        self._on_rows()

    # ------------------------------------------------------------------ hooks of the linked view

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        self._on_rows()

    def on_temperature(self, temperature: float) -> None:
        self._on_temperature()
