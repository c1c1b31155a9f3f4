"""Confusion heat map: counts or row shares, click a cell, a row or a column to select its samples.

With many classes only the ``max_classes`` classes with the most errors
(as true class plus as predicted class) get their own row and column; the
rest are summed into one "other" row and column, so a 1,000-class frame
still draws a small grid. Beside the grid, the largest confusions (a true
class read as another, also within the top k); each entry selects its samples.

A selection made anywhere is drawn as an outline around every cell that
holds selected rows, with the number of selected rows written under the
cell's own number (for grids of up to 12 classes). The numbers are a label
mark of their own, so a hidden diagonal leaves its cells blank. Long class
names are cut on the axes; the cell's tooltip names both classes in full.

The predicted class (the arg max of the logits) does not depend on the
temperature, so neither does this view.
"""

from __future__ import annotations

from typing import Any

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets

from .. import analysis as an
from ..errors import ClassNameError, ParameterError
from ..findings import ConfusionSummary, confusion_summary
from ..frame import LogitFrame
from ..parameters import check as check_parameter
from ..text import shorten, unique_keys
from .base import LinkedView
from .state import SharedState
from .style import INK, MUTED, SELECTED, css, figure_layout

__all__ = ["ConfusionHeatmap", "short_label"]

_LABEL_CHARS = 24
_ZERO_COLOR = "#f7fbff"
_FULL_COLOR = "#3d85c6"  # light enough for the dark cell numbers
#: Grids with at most this many rows and columns carry numbers in their cells.
MAX_NUMBERED = 12
#: Entries of the "within" menu beyond top 1.
_K_MENU = 5
_ROW_BUTTON = "whole row of the clicked cell"
_COL_BUTTON = "whole column of the clicked cell"


def short_label(name: str, limit: int = _LABEL_CHARS) -> str:
    """A class name cut in the middle to ``limit`` characters (with an ellipsis) for axis ticks and buttons.

    Examples
    --------
    >>> short_label("parcel")
    'parcel'
    >>> short_label("a" * 40, limit=10)
    'aaaaa…aaaa'
    """
    return shorten(name, limit, where="middle")


def _squares(cells: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """x and y of one path round the cells numbered ``cells`` (row * n + column) of an n x n grid.

    Each cell is a closed unit square on scales of cell edges (x from 0 at the left, y from 0 at the
    bottom: the first row is drawn at the top); NaN between squares breaks the path. No NaN at the end:
    bqplot puts a line's label at its last point.
    """
    i, j = (cells // n).astype(np.float32), (cells % n).astype(np.float32)  # whole numbers: float32 is exact
    top = n - i
    gap = np.full_like(i, np.nan)
    x = np.stack([j, j + 1, j + 1, j, j, gap], axis=1).ravel()[:-1]
    y = np.stack([top, top, top - 1, top - 1, top, gap], axis=1).ravel()[:-1]
    return x, y


class ConfusionHeatmap(LinkedView, widgets.VBox):
    """Heat map of the confusion matrix (rows true class, columns predicted class).

    Parameters
    ----------
    frame : LogitFrame
        The data; it needs labels.
    state : SharedState, optional
        Shared state; a new one is made when None.
    max_classes : int, default 30
        Classes drawn individually (in the range of ``max_classes``, :mod:`logitscope.parameters`);
        with more classes the ones with the most errors are drawn and the rest summed into "other".
    normalize : bool, default False
        Colour by row share (recall per true class) instead of counts.
    n_pairs : int, default 8
        Entries in the list of largest confusions.
    k : int, default 1
        Largest confusions counted within the top ``k`` (1 = the confusion matrix).
    name : str, optional
        Readable name shown where the view's selection is described.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> z = np.array([[2.0, 0.0, 0.0], [0.0, 2.0, 0.0], [2.0, 0.0, 1.0], [0.0, 0.0, 2.0]])
    >>> view = ConfusionHeatmap(LogitFrame(z, labels=[0, 1, 2, 2], classes=["north", "south", "east"]))
    >>> view.matrix().tolist()
    [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [1.0, 0.0, 1.0]]
    >>> view.select_cell("east", "north").tolist()  # true east, predicted north
    [2]
    >>> view.outlined, view.cell_text[2][0]  # the selected cell is outlined and says how many it holds
    ([(2, 0)], '1')
    >>> [(p.true, p.other, p.count) for p in view.pairs]
    [(2, 0, 1)]
    """

    kind = "confusion matrix"
    normalize = traitlets.Bool(False, help="colour by row share instead of counts")
    hide_diagonal = traitlets.Bool(False, help="leave the diagonal (correct samples) out: blank cells")
    k = traitlets.Int(1, help="largest confusions within the top k")

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        max_classes: int = 30,
        normalize: bool = False,
        n_pairs: int = 8,
        k: int = 1,
        name: str | None = None,
        **kwargs: Any,
    ) -> None:
        self.link(frame, state, name)
        max_classes = int(check_parameter(max_classes, "max_classes"))
        self.n_pairs = int(check_parameter(n_pairs, "n_pairs"))
        self.pairs: list[an.ConfusedPair] = []
        self.clicked: tuple[int, int] | None = None
        self.outlined: list[tuple[int, int]] = []
        self.cell_text: list[list[str]] = []
        self._text_key: tuple[bytes, bytes, bool] | None = None
        if not frame.has_labels:
            widgets.VBox.__init__(
                self, children=[widgets.Label("The confusion matrix needs labels; this frame has none.")]
            )
            self._ready = False
            return
        kk = frame.n_classes
        k = int(check_parameter(k, "k", upper=kk))
        self._ready = True
        self._max_classes = max_classes
        self._compute_structure()
        # no scale is padded (the labels would pad theirs, the outline its own by other amounts): the cells
        # fill the plot area, and the outline's edges 0 to n fall on theirs
        self._s_row = bq.OrdinalScale(reverse=True, allow_padding=False)
        self._s_col = bq.OrdinalScale(allow_padding=False)
        self._s_color = bq.ColorScale(colors=[_ZERO_COLOR, _FULL_COLOR], min=0.0)
        self._tooltip = bq.Tooltip(
            fields=["row", "column", "color"], labels=["true class", "predicted", "samples"], formats=["", "", ".0f"]
        )
        self._grid = bq.GridHeatMap(
            row=np.asarray(self._keys, dtype=object),
            column=np.asarray(self._keys, dtype=object),
            color=np.zeros((self.n_positions, self.n_positions)),
            scales={"row": self._s_row, "column": self._s_col, "color": self._s_color},
            stroke="white",
            display_format=None,
            tooltip=self._tooltip,
        )
        # a selection is an outline round each cell holding selected rows, all of them one path on scales
        # of cell edges (0 to n, the grid fills the plot): a selection redraws that one path, where the heat
        # map's own "selected" cells would restyle every cell of the grid
        n0 = float(self.n_positions)
        self._s_edge_x = bq.LinearScale(min=0.0, max=n0, allow_padding=False)
        self._s_edge_y = bq.LinearScale(min=0.0, max=n0, allow_padding=False)
        x0, y0 = _squares(np.zeros(1, dtype=np.int64), self.n_positions)  # hidden until a selection
        self._outline = bq.Lines(
            x=x0, y=y0, scales={"x": self._s_edge_x, "y": self._s_edge_y},
            colors=[SELECTED], stroke_width=3, apply_clip=False, interactions={}, visible=False,
        )  # fmt: skip
        self._grid.on_element_click(self._on_cell_click)
        label_scales = {"x": self._s_col, "y": self._s_row}
        size = 11 if self.n_positions <= 8 else 10
        self._numbers = bq.Label(
            x=np.zeros(0), y=np.zeros(0), text=[], scales=label_scales, align="middle", default_size=size,
            colors=[INK], apply_clip=False,
        )  # fmt: skip
        self._selected_numbers = bq.Label(
            x=np.zeros(0), y=np.zeros(0), text=[], scales=label_scales, align="middle", default_size=size - 1,
            colors=[SELECTED], font_weight="bold", y_offset=8, visible=False,
        )  # fmt: skip
        self._ax_col = bq.Axis(scale=self._s_col, label="predicted class", grid_lines="none")
        self._ax_row = bq.Axis(scale=self._s_row, side="left", label="true class", grid_lines="none")
        self.figure = bq.Figure(
            display_toolbar=False,
            marks=[self._grid, self._outline, self._numbers, self._selected_numbers],
            axes=[self._ax_col, self._ax_row],
            padding_x=0.0,
            padding_y=0.0,
            layout=figure_layout("100%", "430px", "300px"),
        )
        self._place_ticks()

        self._color_buttons = widgets.ToggleButtons(
            options=["counts", "row share"],
            value="row share" if normalize else "counts",
            style={"button_width": "86px"},
        )
        self._diag_box = widgets.Checkbox(
            value=False, description="hide diagonal", indent=False, layout={"width": "auto"}
        )
        self._row_button = widgets.Button(description=_ROW_BUTTON, disabled=True, layout={"width": "auto"})
        self._col_button = widgets.Button(description=_COL_BUTTON, disabled=True, layout={"width": "auto"})
        self._row_button.on_click(lambda b: self._select_clicked("row"))
        self._col_button.on_click(lambda b: self._select_clicked("column"))
        self._k_menu = widgets.Dropdown(
            options=self._k_options(k), value=k, description="within", style={"description_width": "50px"},
            layout={"width": "190px"},
        )  # fmt: skip
        self._pair_box = widgets.VBox(layout={"width": "100%"})
        self._pair_buttons: list[widgets.Button] = []
        self._no_pairs = widgets.Label("no sample is read as another class")
        self._note = widgets.HTML()
        pair_panel = widgets.VBox(
            [widgets.HTML(css("views") + "<div class='ls-subhead'>Where the model mixes classes up</div>"),
             self._k_menu, self._pair_box],
            layout={"width": "250px", "min_width": "220px"},
        )  # fmt: skip
        controls = widgets.HBox([self._color_buttons, self._diag_box], layout={"flex_flow": "row wrap"})
        click_row = widgets.HBox([self._row_button, self._col_button], layout={"flex_flow": "row wrap"})
        grid_panel = widgets.VBox(
            [controls, self.figure, click_row, self._note], layout={"flex": "1 1 300px", "min_width": "0"}
        )
        widgets.VBox.__init__(
            self, children=[widgets.HBox([grid_panel, pair_panel], layout={"flex_flow": "row wrap"})], **kwargs
        )
        self.add_class("logitscope-confusion")

        self.normalize, self.k = bool(normalize), k
        widgets.link((self._diag_box, "value"), (self, "hide_diagonal"))
        widgets.link((self._k_menu, "value"), (self, "k"))
        self._color_buttons.observe(lambda c: setattr(self, "normalize", c["new"] == "row share"), "value")
        self.observe(self._recolor, ["normalize", "hide_diagonal"])
        self.observe(self._on_k, "k")
        self._recolor()
        self._on_k()
        self._on_rows()

    # ------------------------------------------------------------------ readouts

    @property
    def tick_labels(self) -> list[str]:
        """The class names as the axes show them (cut to a few characters), in position order."""
        return [short_label(n) for n in self.position_names]

    def _k_options(self, k: int) -> list[tuple[str, int]]:
        kk = self.frame.n_classes
        values = sorted(set(range(1, min(_K_MENU, kk) + 1)) | {int(k)})
        return [(f"top {i}" if i > 1 else "top 1 (errors)", i) for i in values]

    @traitlets.validate("k")
    def _valid_k(self, proposal: Any) -> int:
        k = int(check_parameter(proposal["value"], "k", upper=self.frame.n_classes))
        menu = getattr(self, "_k_menu", None)
        if menu is not None and k not in [v for _, v in menu.options]:
            menu.options = self._k_options(k)
        return k

    def _place_ticks(self) -> None:
        """Tick labels cut to a few characters, rotated when they would not fit under their column."""
        n_pos = self.n_positions
        ticks = dict(zip(self._keys, self.tick_labels, strict=True))
        longest = max(len(t) for t in ticks.values())
        char_px = 6.5 if n_pos > 12 else 7.0  # width of one tick-label character at the tick font size
        font = {"font-size": "10px" if n_pos > 12 else "11.5px"}
        # about 330 px of plot width at the narrowest layout: rotate when the names would run into each other
        rotate = char_px * longest + 6 > 330 / n_pos
        left = int(min(46 + char_px * longest, 230))
        bottom = int(min(50 + 0.64 * char_px * longest, 210)) if rotate else 46
        with self.figure.hold_sync():
            self._ax_col.tick_labels = ticks
            self._ax_row.tick_labels = ticks
            self._ax_col.tick_rotate = -45 if rotate else 0
            self._ax_col.tick_style = {**font, "text-anchor": "end"} if rotate else font
            self._ax_row.tick_style = font
            self._ax_col.label_offset = f"{bottom - 12}px"
            self._ax_row.label_offset = f"{left - 14}px"
            self.figure.fig_margin = {"top": 10, "bottom": bottom, "left": left, "right": 10}

    # ------------------------------------------------------------------ structure

    def _compute_structure(self) -> None:
        """Counts, the classes drawn on their own, and each row's cell, for the current frame."""
        frame = self.frame
        max_classes = self._max_classes
        kk = frame.n_classes
        self._labels = np.asarray(frame.labels)
        self._predicted = np.asarray(frame.sample_scores(self.state.temperature).predicted)
        self.summary: ConfusionSummary = confusion_summary(frame, self.state.temperature, 1, self.n_pairs)
        self.counts = self.summary.matrix
        self._summaries: dict[int, ConfusionSummary] = {1: self.summary}
        self._class_sizes = self.counts.sum(axis=1)

        # classes drawn individually and the aggregate
        if kk <= max_classes:
            self.shown_classes = np.arange(kk)
        else:
            off = self.counts.copy()
            np.fill_diagonal(off, 0)
            errors = off.sum(axis=0) + off.sum(axis=1)
            top = np.lexsort((np.arange(kk), -errors))[: int(max_classes)]
            self.shown_classes = np.sort(top)
        self.has_other = self.shown_classes.size < kk
        n_pos = self.shown_classes.size + int(self.has_other)
        self.position = np.full(kk, n_pos - 1, dtype=np.int64)  # "other" unless shown
        self.position[self.shown_classes] = np.arange(self.shown_classes.size)
        self.n_positions = n_pos
        self.aggregated = np.zeros((n_pos, n_pos), dtype=np.int64)
        np.add.at(self.aggregated, (self.position[:, None], self.position[None, :]), self.counts)
        names = frame.classes
        self.position_names = [names[i] for i in self.shown_classes]
        if self.has_other:
            self.position_names.append(f"other ({kk - self.shown_classes.size} classes)")
        self._keys = unique_keys(self.position_names)
        known = self._labels >= 0  # unlabelled rows (a partly labelled batch) fall in no cell: position -1
        self._true_pos = np.where(known, self.position[np.maximum(self._labels, 0)], -1)
        self._pred_pos = self.position[self._predicted]
        self._cell = np.where(known, self._true_pos * n_pos + self._pred_pos, -1)

    # ------------------------------------------------------------------ numbers

    def matrix(self) -> np.ndarray:
        """The drawn matrix: aggregated counts, or row shares with ``normalize``, as float64.

        With ``hide_diagonal`` the correct samples are left out: the diagonal
        becomes zero, except the "other"/"other" cell, which keeps the
        confusions among the classes summed into "other".
        """
        m = an.normalize_rows(self.aggregated) if self.normalize else self.aggregated.astype(np.float64)
        if self.hide_diagonal:
            m = m.copy()
            np.fill_diagonal(m, 0.0)
            if self.has_other:
                hidden = np.setdiff1d(np.arange(self.frame.n_classes), self.shown_classes)
                inner = self.counts[np.ix_(hidden, hidden)]
                errors = float(inner.sum() - np.trace(inner))
                if self.normalize:
                    row = float(self.aggregated[-1].sum())
                    errors = errors / row if row > 0 else 0.0
                m[-1, -1] = errors
        return m

    def summary_at(self, k: int) -> ConfusionSummary:
        """The confusion finding within the top ``k`` (cached per k; k = 1 is the confusion matrix)."""
        hit = self._summaries.get(k)
        if hit is None:
            hit = confusion_summary(self.frame, self.state.temperature, k, self.n_pairs)
            self._summaries[k] = hit
        return hit

    def top_k_matrix(self, k: int) -> np.ndarray:
        """The top-``k`` confusion matrix of the frame (k = 1 is the confusion matrix)."""
        return self.summary_at(k).top_k_matrix

    def _recolor(self, change: Any = None) -> None:
        m = self.matrix()
        with self._grid.hold_sync():
            self._s_color.max = float(m.max()) if m.max() > 0 else 1.0
            self._grid.color = m
            self._tooltip.labels = [
                "true class",
                "predicted",
                "share of the true class" if self.normalize else "samples",
            ]
            self._tooltip.formats = ["", "", ".3f" if self.normalize else ".0f"]
        self._draw_numbers()

    def _hidden(self) -> np.ndarray:
        """Which drawn cells are left blank: the diagonal with ``hide_diagonal`` (not the "other" cell)."""
        n = self.n_positions
        hidden = np.zeros((n, n), dtype=bool)
        if self.hide_diagonal:
            hidden[np.arange(n), np.arange(n)] = True
            if self.has_other:
                hidden[-1, -1] = False  # it holds the confusions among the "other" classes
        return hidden

    def _selected_per_cell(self) -> np.ndarray:
        """How many selected rows each cell holds, (n, n); unlabelled rows fall in no cell."""
        n = self.n_positions
        codes = self._cell[self.state.rows]
        return np.bincount(codes[codes >= 0], minlength=n * n).reshape(n, n)

    def _draw_numbers(self, per_cell: np.ndarray | None = None) -> None:
        """Each cell's number (blank where hidden), and under it how many selected rows the cell holds.

        ``per_cell`` is :meth:`_selected_per_cell` when the caller has it already.
        """
        n = self.n_positions
        m = self.matrix()
        hidden = self._hidden()
        key = (m.tobytes(), hidden.tobytes(), self.normalize)
        if key != self._text_key:  # a selection changes no cell's number: the texts are made again only when those do
            self.cell_text = [["" if hidden[i, j] else (f"{m[i, j]:.2f}" if self.normalize else f"{int(m[i, j]):,}")
                               for j in range(n)] for i in range(n)]  # fmt: skip
            self._text_key = key
        text = self.cell_text
        rows_sel = self.state.rows
        if per_cell is None:
            per_cell = self._selected_per_cell()
        cells = np.argwhere(per_cell > 0)
        self.outlined = [(int(i), int(j)) for i, j in cells]
        show = n <= MAX_NUMBERED
        if not show:
            cells = cells[:0]
        ii, jj = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
        keys = np.asarray(self._keys, dtype=object)
        with self.figure.hold_sync():
            with self._numbers.hold_sync():
                if show:
                    dim = rows_sel.size > 0
                    pairs = list(zip(ii.ravel().tolist(), jj.ravel().tolist(), strict=True))
                    self._numbers.x, self._numbers.y = keys[jj.ravel()], keys[ii.ravel()]
                    self._numbers.text = [text[i][j] for i, j in pairs]
                    self._numbers.colors = [MUTED if dim and per_cell[i, j] == 0 else INK for i, j in pairs]
                    self._numbers.y_offset = -5 if cells.size else 0
                self._numbers.visible = show
            with self._selected_numbers.hold_sync():
                if cells.size:
                    self._selected_numbers.x, self._selected_numbers.y = keys[cells[:, 1]], keys[cells[:, 0]]
                    self._selected_numbers.text = [f"{int(per_cell[i, j]):,} sel." for i, j in cells]
                self._selected_numbers.visible = bool(cells.size)

    def _draw_outline(self, cells: np.ndarray) -> None:
        """One path round the cells numbered ``cells`` (row * n + column): a closed square each, gaps between."""
        if cells.size == 0:  # the path is hidden, not emptied: bqplot puts a line's label at its last point
            self._outline.visible = False
            return
        x, y = _squares(cells, self.n_positions)
        with self._outline.hold_sync():
            self._outline.x, self._outline.y = x, y
            self._outline.visible = True

    def _on_k(self, change: Any = None) -> None:
        self.pairs = list(self.summary_at(self.k).pairs)
        names = self.frame.classes
        # the buttons are made once and relabelled (a new frame or k): each new button costs the browser
        # three new widget models, and the old ones would live on unseen
        while len(self._pair_buttons) < len(self.pairs):
            btn = widgets.Button(layout={"width": "100%"})
            btn.add_class("logitscope-pair")
            index = len(self._pair_buttons)
            btn.on_click(lambda _b, i=index: self._select_listed_pair(i))
            self._pair_buttons.append(btn)
        for pair, btn in zip(self.pairs, self._pair_buttons, strict=False):
            a, b = names[pair.true], names[pair.other]
            if self.k == 1:
                text = f"{short_label(a, 18)} read as {short_label(b, 18)} ({pair.count:,})"
                tip = f"{a} read as {b}: {pair.count:,} samples, {pair.rate:.1%} of the true class"
            else:
                text = f"{short_label(a, 18)}: {short_label(b, 18)} in its top {self.k} ({pair.count:,})"
                tip = f"{a} with {b} among its top {self.k}: {pair.count:,} samples, {pair.rate:.1%} of the true class"
            with btn.hold_sync():
                btn.description, btn.tooltip = text, tip
        shown: list[widgets.Widget] = list(self._pair_buttons[: len(self.pairs)])
        if not shown:
            shown = [self._no_pairs]
        if list(self._pair_box.children) != shown:
            self._pair_box.children = shown

    def _select_listed_pair(self, i: int) -> None:
        """What a click on the ``i``-th pair button does: select that pair's samples."""
        if i < len(self.pairs):
            pair = self.pairs[i]
            self.select_pair(pair.true, pair.other)

    # ------------------------------------------------------------------ selection in

    def _on_rows(self, change: Any = None) -> None:
        rows = self.state.rows
        if not self.owns_selection or rows.size == 0:
            self._reset_click_buttons()
        if rows.size == 0:
            self._draw_outline(np.zeros(0, dtype=np.int64))
            self._note.value = ""
            self._draw_numbers()
            return
        n = self.n_positions
        per_cell = self._selected_per_cell()  # counted once, for the outline and the numbers
        cells = np.flatnonzero(per_cell)
        self._draw_outline(cells)
        self._draw_numbers(per_cell)
        held = "" if n <= MAX_NUMBERED else " (hover a cell for its numbers)"
        # no stylesheet of its own: the pair panel's heading carries it for the whole view (a <style>
        # element put in the page on every selection makes the browser restyle the whole page)
        self._note.value = (
            f"<span class='ls-note'>{rows.size:,} selected rows fall in {cells.size:,} cells, "
            f"outlined{held}{self.selected_by()}</span>"
        )

    # ------------------------------------------------------------------ selection out

    def _class_index(self, value: int | str) -> int:
        if isinstance(value, str):
            try:
                return self.frame.classes.index(value)
            except ValueError:
                raise ClassNameError(f"unknown class name {value!r}") from None
        i = int(value)
        if not 0 <= i < self.frame.n_classes:
            raise ParameterError(f"class index must lie in [0, {self.frame.n_classes}), got {i}")
        return i

    def _pos(self, value: int | str | None) -> int:
        """Drawn position of a class (index or name); None means the "other" aggregate."""
        if value is None:
            if not self.has_other:
                raise ParameterError("this heat map has no 'other' row; every class is drawn")
            return self.n_positions - 1
        return int(self.position[self._class_index(value)])

    def select_cell(self, true: int | str | None, predicted: int | str | None) -> np.ndarray:
        """Select samples of true class ``true`` predicted as ``predicted``; return the rows.

        Classes are given by index or name; None means the "other" aggregate.
        A class that is not drawn on its own selects exactly its own samples.
        """
        mask_t = self._true_mask(true)
        mask_p = self._pred_mask(predicted)
        return self.select(np.flatnonzero(mask_t & mask_p))

    def select_row(self, true: int | str | None) -> np.ndarray:
        """Select every sample of true class ``true`` (None: the "other" classes)."""
        return self.select(np.flatnonzero(self._true_mask(true)))

    def select_column(self, predicted: int | str | None) -> np.ndarray:
        """Select every sample predicted as ``predicted`` (None: the "other" classes)."""
        return self.select(np.flatnonzero(self._pred_mask(predicted) & (self._true_pos >= 0)))

    def _true_mask(self, value: int | str | None) -> np.ndarray:
        if value is None:
            return self._true_pos == self._pos(None)
        return self._labels == self._class_index(value)

    def _pred_mask(self, value: int | str | None) -> np.ndarray:
        if value is None:
            return self._pred_pos == self._pos(None)
        return self._predicted == self._class_index(value)

    def select_position(self, row: int, column: int) -> np.ndarray:
        """Select the samples of a drawn cell (positions as on the axes; the last may be "other")."""
        n = self.n_positions
        if not (0 <= row < n and 0 <= column < n):
            raise ParameterError(f"cell positions must lie in [0, {n}), got ({row}, {column})")
        picked = self.select(np.flatnonzero((self._true_pos == row) & (self._pred_pos == column)))
        self.clicked = (int(row), int(column))
        self._update_click_buttons()
        return picked

    def select_pair(self, true: int, other: int) -> np.ndarray:
        """Select samples of class ``true`` with ``other`` among their top ``k`` logits (k = 1: predicted)."""
        i, j = self._class_index(true), self._class_index(other)
        if self.k == 1:
            return self.select_cell(i, j)
        idx = np.flatnonzero(self._labels == i)
        kk = self.frame.n_classes
        if self.k >= kk:
            hit = np.ones(idx.size, dtype=bool)
        else:
            block = np.asarray(self.frame.logits[idx])
            # the same top-k rule as logitscope.analysis.top_k_confusion
            top = np.argpartition(-block, self.k - 1, axis=1)[:, : self.k]
            hit = (top == j).any(axis=1)
        return self.select(idx[hit])

    def _on_cell_click(self, mark: Any, content: dict[str, Any]) -> None:
        data = content.get("data") if isinstance(content, dict) else None
        if not isinstance(data, dict) or "rowNum" not in data or "columnNum" not in data:
            return
        self.select_position(int(data["rowNum"]), int(data["columnNum"]))

    def _update_click_buttons(self) -> None:
        if self.clicked is None:
            return
        r, c = self.clicked
        nr = int(self.aggregated[r].sum())
        nc = int(self.aggregated[:, c].sum())
        true, pred = self.position_names[r], self.position_names[c]
        self._row_button.description = f"whole row: true {short_label(true)} ({nr:,})"
        self._row_button.tooltip = f"every sample of true class {true}"
        self._col_button.description = f"whole column: predicted {short_label(pred)} ({nc:,})"
        self._col_button.tooltip = f"every sample predicted as {pred}"
        self._row_button.disabled = self._col_button.disabled = False

    def _reset_click_buttons(self) -> None:
        """No clicked cell: the buttons go back to their plain labels (the selection was cleared or replaced)."""
        self.clicked = None
        self._row_button.description, self._col_button.description = _ROW_BUTTON, _COL_BUTTON
        self._row_button.tooltip = self._col_button.tooltip = "click a cell first"
        self._row_button.disabled = self._col_button.disabled = True

    def _select_clicked(self, which: str) -> None:
        if self.clicked is None:
            return
        r, c = self.clicked
        if which == "row":
            rows = np.flatnonzero(self._true_pos == r)
        else:
            rows = np.flatnonzero((self._pred_pos == c) & (self._true_pos >= 0))
        self.select(rows)

    # ------------------------------------------------------------------ hooks of the linked view

    def held_widgets(self) -> list[Any]:
        if not self._ready:
            return []
        return [
            self._grid, self._outline, self._numbers, self._selected_numbers, self._note, self._row_button,
            self._col_button,
        ]  # fmt: skip

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        if self._ready:
            self._on_rows()

    def on_frame(self) -> None:
        if not self._ready or not self.frame.has_labels:
            return
        shown = list(self._keys)
        self._compute_structure()
        if list(self._keys) != shown:  # other classes drawn on their own: new rows, columns and ticks
            with self._grid.hold_sync():
                keys = np.asarray(self._keys, dtype=object)
                self._grid.row, self._grid.column = keys, keys
            self._s_edge_x.max = self._s_edge_y.max = float(self.n_positions)
            self._place_ticks()
        self._reset_click_buttons()
        self._recolor()
        self._on_k()
        self._on_rows()
