"""Checkpoints side by side: the flip table, confidence under A against B, and the per-class change.

:class:`CheckpointComparisonView` renders a
:class:`~logitscope.checkpoints.FrameComparison` (two checkpoints' frames
aligned by sample id, see :func:`logitscope.checkpoints.compare_frames`):

- the flip table: right in both, fixed (wrong under A, right under B),
  broken (the reverse), wrong in both with the same or with different
  predicted classes, with counts, shares and McNemar's exact test of fixed
  against broken (McNemar 1947); a click on a row selects its samples;
- a scatter of each sample's confidence under A against its confidence
  under B, coloured by flip-table cell and painted as one image (as the score
  scatter is), so it stays responsive at 100,000 rows; a rectangle brush
  selects the rows inside, computed in Python over all rows;
- the per-class accuracy change (support, accuracy under A and B, change,
  fixed, broken, McNemar p after Holm's correction); a click on a class
  selects its fixed and broken samples, a click on its "fixed" or "broken"
  count only those.

The view's selections are rows of the frame it is linked to (frame A in the
comparison's aligned order, or the frame of a dashboard, mapped by sample
id), so a gallery and a card on the same :class:`SharedState` show the
samples clicked. Ids that only one checkpoint holds are named apart. Each
checkpoint is read at its own temperature (``frame.temperature``); the flip
table does not depend on the temperature at all, so the view does not follow
the shared temperature dial.

:class:`ComparisonPanel` puts the view, a gallery and a card on one state;
:func:`logitscope.compare` opens it.
"""

from __future__ import annotations

import html
from collections.abc import Sequence
from typing import Any, Literal

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import pandas as pd
import traitlets

from .. import analysis as an
from ..alignment import MissingIds
from ..checkpoints import FrameComparison, compare_frames
from ..errors import InputTypeError, LabelError, LogitscopeError, ParameterError, ShapeError
from ..frame import LogitFrame
from .base import LinkedView
from .brush import RectangleBrush
from .card import SampleCard
from .gallery import SampleGallery
from .pick_table import PickTable, column
from .scatter import FADED, PointRaster
from .state import SharedState
from .style import REFERENCE, RIGHT, WRONG, css

__all__ = ["CELL_COLORS", "CheckpointComparisonView", "ComparisonPanel"]

#: Colour of each flip-table cell in the table and the scatter (palette.py hues).
CELL_COLORS: dict[str, str] = {
    "right_both": "#9fb3c8",
    "fixed": RIGHT,
    "broken": WRONG,
    "wrong_same": "#5f6b7a",
    "wrong_different": "#cc79a7",
}
_CELL_NAMES = {
    "right_both": "right in both",
    "fixed": "fixed",
    "broken": "broken",
    "wrong_same": "wrong in both, same class",
    "wrong_different": "wrong in both, other classes",
}
_CELL_TIPS = {
    "right_both": "right under A and under B",
    "fixed": "wrong under A, right under B",
    "broken": "right under A, wrong under B",
    "wrong_same": "wrong under both, both predicting the same class",
    "wrong_different": "wrong under both, predicting different classes",
}
#: Painting order in the scatter: the bulk first, the changes last (on top).
_PAINT_PRIORITY = {"right_both": 0, "wrong_same": 1, "wrong_different": 2, "fixed": 3, "broken": 4}

#: Without labels the scatter has two groups: the same prediction, or another one.
AGREE_CELLS: tuple[str, ...] = ("same", "changed")
_AGREE_NAMES = {"same": "same prediction", "changed": "prediction changed"}
_AGREE_COLORS = {"same": "#9fb3c8", "changed": "#e69f00"}
_FOCUS_RING = "#111111"
_PARTS = ("changed", "fixed", "broken")
Part = Literal["changed", "fixed", "broken"]


def _pct(v: float) -> str:
    return "—" if not np.isfinite(v) else f"{v:.1%}"


def _signed_points(v: float) -> str:
    return "—" if not np.isfinite(v) else f"{100 * v:+.1f}"


def _p(v: float) -> str:
    if not np.isfinite(v):
        return "—"
    return f"{v:.2g}" if v < 0.001 else f"{v:.3f}"


def _show_ids(ids: np.ndarray, limit: int = 5) -> str:
    shown = ", ".join(str(v.item() if isinstance(v, np.generic) else v) for v in ids[:limit])
    return shown + (f" and {ids.size - limit:,} more" if ids.size > limit else "")


class CheckpointComparisonView(LinkedView, widgets.VBox):
    """Two checkpoints on the same samples: flip table, confidence scatter and per-class change, all clickable.

    Parameters
    ----------
    comparison : FrameComparison
        From :func:`logitscope.checkpoints.compare_frames` (frames aligned by id).
    state : SharedState, optional
        Shared state over ``frame``; a new one is made when None.
    frame : LogitFrame, optional
        The frame whose rows the state counts (a dashboard's frame); it must
        hold every id of the comparison, in any order. Default: the
        comparison's frame A.
    resolution : (int, int), default (340, 320)
        Size in pixels of the image the scatter's points are painted into.
    name : str, optional
        Readable name shown where the view's selection is described.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> from logitscope.checkpoints import compare_frames
    >>> a = LogitFrame(np.array([[2.0, 0.0], [0.0, 2.0], [2.0, 0.0], [0.0, 1.0]]), labels=[0, 0, 1, 1])
    >>> b = LogitFrame(np.array([[2.0, 0.0], [2.0, 0.0], [0.0, 2.0], [1.0, 0.0]]), labels=[0, 0, 1, 1])
    >>> view = CheckpointComparisonView(compare_frames(a, b))
    >>> view.flip_table["count"].tolist()  # right in both, fixed, broken, wrong same, wrong different
    [1, 2, 1, 0, 0]
    >>> view.select_cell("fixed").tolist(), view.state.origin_name
    ([1, 2], 'checkpoint comparison')
    >>> view.select_class(1, "broken").tolist()
    [3]
    """

    kind = "checkpoint comparison"
    selected_cell = traitlets.Unicode(None, allow_none=True, help="the flip-table cell this view selected, if any")
    selected_class = traitlets.Int(None, allow_none=True, help="the class whose changed samples this view selected")
    selected_part = traitlets.Unicode(None, allow_none=True, help="'changed', 'fixed' or 'broken' of selected_class")
    live = traitlets.Bool(True, help="redraw on every change; False while out of sight (catches up when True again)")

    def __init__(
        self,
        comparison: FrameComparison,
        state: SharedState | None = None,
        *,
        frame: LogitFrame | None = None,
        resolution: tuple[int, int] = (340, 320),
        name: str | None = None,
        **kwargs: Any,
    ) -> None:
        if not isinstance(comparison, FrameComparison):
            raise InputTypeError(
                f"comparison must be a FrameComparison (logitscope.checkpoints.compare_frames), "
                f"got {type(comparison).__name__}"
            )
        width, height = (int(v) for v in resolution)
        if width < 16 or height < 16:
            raise ParameterError(f"resolution must be at least 16 x 16 pixels, got {resolution}")
        self.resolution = (width, height)
        self.link(comparison.a if frame is None else frame, state, name)
        self._last_box: tuple[float, float, float, float] | None = None
        self._error = ""
        self._stale = False  # a new frame arrived while the view was not live
        self._turn = 0
        self._base_widgets: tuple[widgets.Image, widgets.Image] | None = None
        self._top_widgets = (widgets.Image(format="png"), widgets.Image(format="png"))

        # ---- the flip table and the readouts
        self.readout = widgets.HTML()
        self.flips_table = PickTable(
            [
                column("cell", "flip-table cell", align="left"),
                column("a", "A"),
                column("b", "B"),
                column("count", "samples"),
                column("share", "share"),
            ],
            caption="Flip table: where each sample goes from A to B",
            max_height=240,
        )
        self.flips_table.add_class("logitscope-flip-table")
        self.flips_table.on_pick(lambda row, col: self._toggle_cell(row))
        self.test_note = widgets.HTML()
        self.apart = widgets.HTML()
        self._apart_button = widgets.Button(description="select them", layout={"width": "auto", "display": "none"})
        self._apart_button.on_click(lambda b: self.select_apart())

        # ---- the scatter: confidence under A against confidence under B
        self._sx, self._sy = bq.LinearScale(min=0.0, max=1.0), bq.LinearScale(min=0.0, max=1.0)
        scales = {"x": self._sx, "y": self._sy}
        self._mark = bq.Image(image=widgets.Image(format="png"), scales=scales, pixelated=False)
        self._top_mark = bq.Image(image=self._top_widgets[0], scales=scales, pixelated=False)
        self._diagonal = bq.Lines(x=[0.0, 1.0], y=[0.0, 1.0], scales=scales, colors=[REFERENCE], stroke_width=1.0,
                                  line_style="dashed")  # fmt: skip
        self._focus_mark = bq.Scatter(
            x=np.zeros(1), y=np.zeros(1), scales=scales, default_size=140, fill=False, colors=[_FOCUS_RING],
            stroke_width=2.0, visible=False,
        )  # fmt: skip
        self._ax = bq.Axis(scale=self._sx, label="confidence under A", tick_format=".1f", grid_lines="none")
        self._ay = bq.Axis(scale=self._sy, label="confidence under B", side="left", tick_format=".1f",
                           grid_lines="none")  # fmt: skip
        self.figure = bq.Figure(
            marks=[self._mark, self._diagonal, self._top_mark, self._focus_mark],
            axes=[self._ax, self._ay],
            fig_margin={"top": 10, "bottom": 44, "left": 56, "right": 12},
            padding_x=0.0,
            padding_y=0.0,
            display_toolbar=False,
            layout=widgets.Layout(width=f"{width + 68}px", height=f"{height + 54}px"),
        )
        self.figure.add_class("logitscope-comparison-scatter")
        # the rectangle brush is drawn in the browser and sends its extents once, on release (js/brush.js)
        self._brush = RectangleBrush(self.figure, faded=FADED)
        self._brush.observe(self._on_brush, "box")
        self.key = widgets.HTML()

        # ---- per-class change
        self.classes_table = PickTable(
            [
                column("class", "class", align="left"),
                column("support", "samples", title="samples of this true class"),
                column("acc_a", "accuracy A"),
                column("acc_b", "accuracy B"),
                column("change", "change (points)", title="accuracy under B less accuracy under A"),
                column("fixed", "fixed", pick=True, title="click to select this class's fixed samples"),
                column("broken", "broken", pick=True, title="click to select this class's broken samples"),
                column("p_holm", "p (Holm)", title="per-class exact McNemar p, Holm-adjusted over the classes"),
            ],
            caption="Accuracy per true class",
            max_height=300,
        )
        self.classes_table.add_class("logitscope-class-change")
        self.classes_table.layout.max_width = "980px"
        self.classes_table.on_pick(self._on_class_pick)
        self.note = widgets.HTML()

        left = widgets.VBox(
            [self.readout, self.flips_table, self.test_note, widgets.HBox([self.apart, self._apart_button])],
            layout=widgets.Layout(flex="1 1 380px", min_width="340px", padding="0 12px 0 0"),
        )
        right = widgets.VBox([self._brush, self.key], layout=widgets.Layout(flex="0 0 auto"))
        top = widgets.HBox([left, right], layout=widgets.Layout(flex_flow="row wrap", align_items="flex-start"))
        self._content = (top, self.classes_table, self.note)
        widgets.VBox.__init__(self, children=list(self._content), **kwargs)
        self.add_class("logitscope-comparison")
        self._set_comparison(comparison)
        self.observe(self._on_live, "live")

    # ------------------------------------------------------------------ the comparison shown

    def _fresh(self) -> None:
        """Compare the frame on screen with B now if a new frame arrived while the view was not live."""
        if self._stale:
            self._stale = False
            self._recompare()

    def _on_live(self, change: Any) -> None:
        if not change["new"]:
            return
        if self._stale:
            self._fresh()
            return
        self._mark_active()
        self._draw()
        self._show_focus()
        self._describe_selection()

    @property
    def comparison(self) -> FrameComparison:
        """The comparison the view shows."""
        self._fresh()
        return self._comparison

    @property
    def labelled(self) -> bool:
        """Whether the comparison has labels (without them only agreement is shown)."""
        return self._comparison.flips is not None

    @property
    def flip_table(self) -> pd.DataFrame:
        """The flip table as a DataFrame (one row per cell: description, A right, B right, count, share).

        Without labels: two rows, the samples both checkpoints predict alike and those they do not.
        """
        self._fresh()
        return self._flip_frame.copy()

    @property
    def per_class(self) -> pd.DataFrame:
        """The per-class accuracy change as a DataFrame indexed by class name (needs labels)."""
        self._fresh()
        return self._comparison.per_class_frame()

    @property
    def mcnemar_p(self) -> float | None:
        """McNemar's exact p-value of fixed against broken (None without labels)."""
        self._fresh()
        return None if self._comparison.flips is None else float(self._comparison.flips.mcnemar_p)

    @property
    def rows_apart(self) -> np.ndarray:
        """Rows of the view's frame whose id is not in the comparison (the other checkpoint lacks them)."""
        self._fresh()
        return np.flatnonzero(self._inverse < 0)

    @property
    def error(self) -> str:
        """Why the frame on screen could not be compared with B after a dashboard update ("" when it could)."""
        self._fresh()
        return self._error

    def _check_ok(self) -> None:
        self._fresh()
        if self._error:
            raise ParameterError(self._error)

    def _set_comparison(self, comparison: FrameComparison) -> None:
        self._error = ""
        c = self._comparison = comparison
        frame = self.frame
        if frame is c.a:
            rows = np.arange(frame.n_samples, dtype=np.int64)
        else:
            if frame.classes != c.classes:
                raise ShapeError("the view's frame and the comparison must have the same classes in the same order")
            rows = pd.Index(np.asarray(frame.ids)).get_indexer(pd.Index(np.asarray(c.ids))).astype(np.int64)
            lacks = np.flatnonzero(rows < 0)
            if lacks.size:
                raise ShapeError(
                    f"the view's frame lacks {lacks.size:,} sample ids of the comparison "
                    f"(first {_show_ids(np.asarray(c.ids)[lacks])}); link the view to frame A of the comparison"
                )
        self._frame_rows = rows  # frame row of each aligned row
        self._inverse = np.full(frame.n_samples, -1, dtype=np.int64)  # aligned row of each frame row (-1: apart)
        self._inverse[rows] = np.arange(rows.size, dtype=np.int64)
        self._labels = c.a.labels if c.a.labels is not None else c.b.labels
        if c.flips is not None:
            self._cell_names: tuple[str, ...] = an.FLIP_CELLS
            self._cells = c.flips.cells.astype(np.int64)
            self._flip_frame = c.flips.to_frame()
        else:
            self._cell_names = AGREE_CELLS
            cells = np.zeros(c.comparison.n_samples, dtype=np.int64)
            cells[c.comparison.changed_rows] = 1
            self._cells = cells
            counts = np.bincount(cells, minlength=2)
            self._flip_frame = pd.DataFrame(
                {
                    "description": [_AGREE_NAMES[k] for k in AGREE_CELLS],
                    "count": counts,
                    "share": counts / max(1, cells.size),
                },
                index=pd.Index(list(AGREE_CELLS), name="cell"),
            )
        self._conf_a = np.asarray(c.a.sample_scores().confidence, dtype=np.float64)
        self._conf_b = np.asarray(c.b.sample_scores().confidence, dtype=np.float64)
        with self.quietly():
            self.selected_cell = None
            self.selected_class = None
            self.selected_part = None
        self._clear_brush()
        self._fill_readouts()
        self._fill_flip_rows()
        self._fill_class_rows()
        self._place_points()
        self._draw()
        self._show_focus()
        self._describe_selection()

    # ------------------------------------------------------------------ readouts and tables

    def _fill_readouts(self) -> None:
        c = self._comparison
        r = c.comparison
        na, nb = (html.escape(n) for n in c.aligned.names)
        ta, tb = c.a.temperature, c.b.temperature
        head = f"<b>A</b> = {na}, <b>B</b> = {nb}: {r.n_samples:,} samples matched by id"
        if r.accuracy_a is not None and r.accuracy_b is not None:
            change = r.accuracy_b - r.accuracy_a
            head += (
                f"<br>accuracy under A <b>{r.accuracy_a:.1%}</b>, under B <b>{r.accuracy_b:.1%}</b> "
                f"(change {100 * change:+.1f} points); the two agree on {r.agreement:.1%} of the predictions"
            )
        else:
            head += (
                f"<br>no labels: the two agree on {r.agreement:.1%} of the predictions "
                "(the flip table, McNemar's test and the per-class change need labels)"
            )
        head += (
            f"<br><span class='ls-muted'>confidence read at each checkpoint's own temperature "
            f"(A: T = {ta:.3g}, B: T = {tb:.3g}); the mean change of confidence is "
            f"{r.mean_abs_confidence_change:.3f}</span>"
        )
        self.readout.value = css("views") + f"<div class='ls-note' style='margin-bottom:6px'>{head}</div>"
        flips = c.flips
        if flips is None:
            self.test_note.value = ""
        else:
            n_fixed, n_broken = flips.count("fixed"), flips.count("broken")
            discordant = n_fixed + n_broken
            if discordant == 0:
                text = "No sample changed between right and wrong: McNemar's test has nothing to weigh (p = 1)."
            else:
                text = (
                    f"McNemar's exact test of fixed against broken ({discordant:,} samples changed between right "
                    f"and wrong: {n_fixed:,} fixed, {n_broken:,} broken): <b>p = {_p(flips.mcnemar_p)}</b>. "
                    "This is the chance, were A and B equally accurate on data like these, of a split "
                    "between fixed and broken at least this uneven."
                )
            self.test_note.value = css("views") + f"<div class='ls-note' data-key='mcnemar'>{text}</div>"
        # ids that only one side holds, named apart
        only_b = c.only_in_b
        apart = self.rows_apart
        parts = []
        if apart.size:
            parts.append(
                f"{apart.size:,} samples of A are not in B and are left out of the comparison "
                f"(first ids {html.escape(_show_ids(np.asarray(self.frame.ids)[apart]))})"
            )
        elif c.only_in_a.size:
            parts.append(f"{c.only_in_a.size:,} samples of A are not in B and are left out")
        if only_b.size:
            parts.append(
                f"{only_b.size:,} samples of B are not in A and are left out "
                f"(first ids {html.escape(_show_ids(only_b))})"
            )
        self.apart.value = css("views") + "".join(f"<div class='ls-error'>{p}.</div>" for p in parts)
        self._apart_button.description = f"select the {apart.size:,} samples B lacks"
        self._apart_button.layout.display = "" if apart.size else "none"

    def _fill_flip_rows(self) -> None:
        frame = self._flip_frame
        rows = []
        for cell in self._cell_names:
            count = int(frame.loc[cell, "count"])
            share = float(frame.loc[cell, "share"])
            if self.labelled:
                name, color, tip = _CELL_NAMES[cell], CELL_COLORS[cell], _CELL_TIPS[cell]
                a_right = bool(frame.loc[cell, "a_right"])
                b_right = bool(frame.loc[cell, "b_right"])
                a, b = ("right" if a_right else "wrong"), ("right" if b_right else "wrong")
            else:
                name, color, tip = _AGREE_NAMES[cell], _AGREE_COLORS[cell], _AGREE_NAMES[cell]
                a = b = "—"
            rows.append(
                {
                    "key": cell,
                    "title": f"{tip}: click to select these {count:,} samples",
                    "cells": {
                        "cell": {"text": name, "swatch": color},
                        "a": a,
                        "b": b,
                        "count": {"text": f"{count:,}", "sort": count},
                        "share": {"text": f"{share:.1%}", "sort": share},
                    },
                }
            )
        self.flips_table.rows = rows

    def _fill_class_rows(self) -> None:
        pc = self._comparison.per_class
        if pc is None:
            self.classes_table.rows = []
            self.classes_table.empty = "The per-class change needs labels; neither checkpoint has any."
            self.classes_table.note = ""
            return
        change = pc.change
        finite = change[np.isfinite(change)]
        scale = float(np.abs(finite).max()) if finite.size and np.abs(finite).max() > 0 else 1.0
        rows = []
        for k, name in enumerate(self._comparison.classes):
            n = int(pc.support[k])
            ch = float(change[k])
            fixed, broken = int(pc.fixed[k]), int(pc.broken[k])
            p = float(pc.mcnemar_p_holm[k])
            rows.append(
                {
                    "key": str(k),
                    "title": "click to select this class's fixed and broken samples",
                    "cells": {
                        "class": {"text": name, "sort": k},
                        "support": {"text": f"{n:,}", "sort": n},
                        "acc_a": {"text": _pct(float(pc.accuracy_a[k])), "sort": _finite(pc.accuracy_a[k])},
                        "acc_b": {"text": _pct(float(pc.accuracy_b[k])), "sort": _finite(pc.accuracy_b[k])},
                        "change": {
                            "text": _signed_points(ch),
                            "sort": _finite(ch),
                            "bar": (ch / scale) if np.isfinite(ch) else None,
                            "color": RIGHT if ch >= 0 else WRONG,
                        },
                        "fixed": {"text": f"{fixed:,}", "sort": fixed, "off": fixed == 0},
                        "broken": {"text": f"{broken:,}", "sort": broken, "off": broken == 0},
                        "p_holm": {"text": _p(p), "sort": _finite(p, 2.0)},
                    },
                }
            )
        self.classes_table.rows = rows
        self.classes_table.note = (
            "Click a class to select its fixed and broken samples, or its fixed or broken count for those alone. "
            "p: exact McNemar test within the class, Holm-adjusted over the classes tested."
        )

    # ------------------------------------------------------------------ scatter

    def _place_points(self) -> None:
        x, y = self._conf_a, self._conf_b
        both = np.concatenate([x, y])
        lo = float(np.nanmin(both)) if both.size else 0.0
        lo = max(0.0, min(lo, 1.0 / max(1, self.frame.n_classes)))
        pad = (1.0 - lo) * 0.03
        lo, hi = lo - pad, 1.0 + pad
        w, h = self.resolution
        n = x.size
        radius2, depth = (5.0, 1.2) if n <= 5_000 else (2.0, 1.5) if n <= 50_000 else (2.0, 2.5)
        self.raster = PointRaster(w, h, (lo, hi), (lo, hi), radius2=radius2, depth=depth)
        self._pixels = self.raster.pixels(x, y)
        names = self._cell_names
        if self.labelled:
            priority = np.array([_PAINT_PRIORITY[c] for c in names], dtype=np.int64)
            self._palette = [CELL_COLORS[c] for c in names]
        else:
            priority = np.arange(len(names), dtype=np.int64)
            self._palette = [_AGREE_COLORS[c] for c in names]
        self._priority = priority[self._cells]
        self._paint = np.argsort(self._priority, kind="stable")  # the bulk first, changes on top
        self._base: np.ndarray | None = None
        with self._brush.hold_sync():
            self._brush.x_range, self._brush.y_range = [lo, hi], [lo, hi]
        with self.figure.hold_sync():
            self._sx.min, self._sx.max = lo, hi
            self._sy.min, self._sy.max = lo, hi
            for mark in (self._mark, self._top_mark):
                with mark.hold_sync():
                    mark.x = np.array([lo, hi])
                    mark.y = np.array([lo, hi])
            with self._diagonal.hold_sync():
                self._diagonal.x = np.array([lo, hi])
                self._diagonal.y = np.array([lo, hi])
        counts = np.bincount(self._cells, minlength=len(names))
        label_of = _CELL_NAMES if self.labelled else _AGREE_NAMES
        swatch = (
            "<span style='white-space:nowrap'><span class='ls-swatch' style='background:{}'></span>{} ({:,})</span> "
        )
        parts = "".join(swatch.format(self._palette[i], label_of[c], int(counts[i])) for i, c in enumerate(names))
        self.key.value = (
            css("views") + f"<div class='ls-key' style='max-width:{w + 68}px;line-height:1.6'>{parts}</div>"
            "<div class='ls-muted'>above the dashed line: more confident under B. Drag a rectangle to select.</div>"
        )

    def _draw(self) -> None:
        """Paint the points (the selection over the rest faded) and send the images."""
        raster = self.raster
        if self._base is None:
            order = self._paint
            self._base = raster.layer(self._pixels[order], self._cells[order], self._palette)
            full = PointRaster.png(PointRaster.to_rgba8(self._base))
            faded = PointRaster.png(PointRaster.to_rgba8(self._base * np.float32(FADED)))
            old = self._base_widgets
            self._base_widgets = (widgets.Image(value=full, format="png"), widgets.Image(value=faded, format="png"))
            self._brush.points = self._base_widgets[0]  # the browser paints a brushed selection from it at once
            if old is not None:
                for wdg in old:
                    wdg.close()
        sel = self._aligned_selection()
        w, h = self.resolution
        if sel.size == 0:
            self._top = np.zeros((4, h, w), np.float32)
        else:
            sel = sel[np.argsort(self._priority[sel], kind="stable")]
            self._top = raster.layer(self._pixels[sel], self._cells[sel], self._palette)
        self._turn = 1 - self._turn
        widget = self._top_widgets[self._turn]
        widget.value = PointRaster.png(PointRaster.to_rgba8(self._top))
        self._top_mark.image = widget
        assert self._base_widgets is not None  # made together with self._base above
        self._mark.image = self._base_widgets[0 if self.state.rows.size == 0 else 1]

    @property
    def image(self) -> np.ndarray:
        """What the scatter shows, as one straight-alpha RGBA uint8 image ``(height, width, 4)``."""
        self._fresh()
        if not self.live:
            self._draw()
        assert self._base is not None
        bottom = 1.0 if self.state.rows.size == 0 else FADED
        return PointRaster.to_rgba8(PointRaster.over(self._top, self._base, bottom))

    def pixel_of(self, row: int) -> tuple[int, int]:
        """(column, row) of the image pixel where frame row ``row`` is painted (it must be in the comparison)."""
        self._fresh()
        i = int(self._inverse[int(row)])
        if i < 0:
            raise ParameterError(f"row {row} is not in the comparison (the other checkpoint lacks its id)")
        p = int(self._pixels[i])
        return (p % self.resolution[0], p // self.resolution[0])

    def _aligned_selection(self) -> np.ndarray:
        rows = self.state.rows
        if rows.size == 0:
            return rows
        inv = self._inverse[rows]
        return inv[inv >= 0]

    def _show_focus(self) -> None:
        row = self.state.focus
        i = -1 if row is None else int(self._inverse[row])
        if i < 0:
            self._focus_mark.visible = False
            return
        with self._focus_mark.hold_sync():
            self._focus_mark.x = np.array([self._conf_a[i]])
            self._focus_mark.y = np.array([self._conf_b[i]])
            self._focus_mark.visible = True

    # ------------------------------------------------------------------ selection out

    def _to_frame_rows(self, aligned: np.ndarray) -> np.ndarray:
        return np.sort(self._frame_rows[np.asarray(aligned, dtype=np.int64)])

    def rows_of_cell(self, cell: str) -> np.ndarray:
        """Frame rows of one flip-table cell (see :data:`logitscope.analysis.FLIP_CELLS`; unlabelled: same, changed)."""
        self._check_ok()
        if cell not in self._cell_names:
            raise ParameterError(f"unknown cell {cell!r}; the cells are {', '.join(self._cell_names)}")
        return self._to_frame_rows(np.flatnonzero(self._cells == self._cell_names.index(cell)))

    def select_cell(self, cell: str | None) -> np.ndarray:
        """Select the samples of one flip-table cell (None: clear this view's selection); return the selected rows."""
        if cell is None:
            self._clear_own()
            return self.state.rows
        rows = self.rows_of_cell(cell)
        with self.quietly():
            self.selected_class = self.selected_part = None
            self.selected_cell = cell
        self._last_box = None
        self._clear_brush()
        return self._select_rows(rows, f"{rows.size:,} samples of the flip-table cell “{self._cell_label(cell)}”")

    def _class_index(self, k: int | str) -> int:
        classes = self._comparison.classes
        if isinstance(k, str):
            if k not in classes:
                raise ParameterError(f"unknown class {k!r}")
            return classes.index(k)
        if isinstance(k, bool) or not isinstance(k, int | np.integer) or not 0 <= int(k) < len(classes):
            raise ParameterError(f"class must be a class name or an index in [0, {len(classes)}), got {k!r}")
        return int(k)

    def rows_of_class(self, k: int | str, part: Part = "changed") -> np.ndarray:
        """Frame rows of true class ``k`` that were fixed, broken, or either ("changed") between A and B."""
        self._check_ok()
        flips = self._comparison.flips
        if flips is None or self._labels is None:
            raise LabelError("the per-class change needs labels; neither checkpoint has any")
        if part not in _PARTS:
            raise ParameterError(f"part must be one of {', '.join(_PARTS)}, got {part!r}")
        j = self._class_index(k)
        picked = {"fixed": [flips.fixed], "broken": [flips.broken], "changed": [flips.fixed, flips.broken]}[part]
        aligned = np.concatenate([r[self._labels[r] == j] for r in picked])
        return self._to_frame_rows(aligned)

    def select_class(self, k: int | str | None, part: Part = "changed") -> np.ndarray:
        """Select the fixed and broken samples of true class ``k`` (or only one part); return the selected rows.

        None clears this view's selection.
        """
        if k is None:
            self._clear_own()
            return self.state.rows
        rows = self.rows_of_class(k, part)
        j = self._class_index(k)
        with self.quietly():
            self.selected_cell = None
            self.selected_class, self.selected_part = j, part
        self._last_box = None
        self._clear_brush()
        what = {"changed": "fixed or broken", "fixed": "fixed", "broken": "broken"}[part]
        name = html.escape(self._comparison.classes[j])
        return self._select_rows(rows, f"{rows.size:,} {what} samples of class “{name}”")

    def select_box(self, x_range: tuple[float, float], y_range: tuple[float, float]) -> np.ndarray:
        """Select every sample whose (confidence under A, confidence under B) lies in the closed box.

        This is what the rectangle brush does, over all rows.
        """
        self._check_ok()
        x0, x1 = sorted(float(v) for v in x_range)
        y0, y1 = sorted(float(v) for v in y_range)
        a, b = self._conf_a, self._conf_b
        aligned = np.flatnonzero((a >= x0) & (a <= x1) & (b >= y0) & (b <= y1))
        with self.quietly():
            self.selected_cell = self.selected_class = self.selected_part = None
        self._last_box = (x0, x1, y0, y1)
        rows = self._to_frame_rows(aligned)
        return self._select_rows(
            rows, f"{rows.size:,} samples with confidence {x0:.2f}–{x1:.2f} under A and {y0:.2f}–{y1:.2f} under B"
        )

    def select_apart(self) -> np.ndarray:
        """Select the rows of the view's frame that the other checkpoint lacks."""
        self._check_ok()
        rows = self.rows_apart
        with self.quietly():
            self.selected_cell = self.selected_class = self.selected_part = None
        self._clear_brush()
        return self._select_rows(rows, f"{rows.size:,} samples that B lacks")

    def _select_rows(self, rows: np.ndarray, what: str) -> np.ndarray:
        self._what = what
        if rows.size == 0:
            # nothing to show: selecting no rows would make the other views show every sample
            with self.quietly():
                self.selected_cell = self.selected_class = self.selected_part = None
            self.clear_selection()
            self._mark_active()
            self.note.value = css("views") + f"<span class='ls-note'>{what}: nothing to select.</span>"
            return self.state.rows
        out = self.select(rows)
        self._mark_active()
        self._describe_selection()
        return out

    def _clear_own(self) -> None:
        with self.quietly():
            self.selected_cell = self.selected_class = self.selected_part = None
        self._clear_brush()
        self.clear_selection()
        self._mark_active()

    def _cell_label(self, cell: str) -> str:
        return (_CELL_NAMES if self.labelled else _AGREE_NAMES)[cell]

    def _toggle_cell(self, cell: str) -> None:
        if cell == self.selected_cell and self.owns_selection:
            self.select_cell(None)
        else:
            self.select_cell(cell)

    def _on_class_pick(self, row: str, col: str) -> None:
        part: Part = "fixed" if col == "fixed" else "broken" if col == "broken" else "changed"
        k = int(row)
        if k == self.selected_class and part == self.selected_part and self.owns_selection:
            self.select_class(None)
        else:
            self.select_class(k, part)

    def _mark_active(self) -> None:
        self.flips_table.active = {"row": self.selected_cell} if self.selected_cell else {}
        if self.selected_class is None:
            self.classes_table.active = {}
        else:
            col = "" if self.selected_part == "changed" else str(self.selected_part)
            self.classes_table.active = {"row": str(self.selected_class), "column": col}

    # ------------------------------------------------------------------ brush

    @property
    def brush_box(self) -> tuple[tuple[float, float], tuple[float, float]] | None:
        """``((x0, x1), (y0, y1))`` of the rectangle brush drawn on the scatter, each sorted; None without one."""
        return self._brush.extents

    def _clear_brush(self) -> None:
        self._last_box = None
        if self._brush.box:
            self._brush.box = []

    def _on_brush(self, change: Any) -> None:
        extents = self._brush.extents
        if extents is None:
            # the brush was removed: clear only a selection this view made
            if self._last_box is not None and self.owns_selection:
                self._last_box = None
                self.clear_selection()
            return
        (x0, x1), (y0, y1) = extents
        if (x0, x1, y0, y1) == self._last_box:
            return
        self.select_box((x0, x1), (y0, y1))

    # ------------------------------------------------------------------ selection in

    def _describe_selection(self) -> None:
        rows = self.state.rows
        if rows.size == 0:
            self.note.value = (
                css("views") + "<span class='ls-note'>Click a row of a table, or drag a rectangle on the scatter, "
                "to select samples (the gallery and the card on the same state show them).</span>"
            )
            return
        if self.owns_selection:
            text = f"{getattr(self, '_what', f'{rows.size:,} samples')} selected"
        else:
            inside = self._aligned_selection()
            text = (
                f"{rows.size:,} samples selected{self.selected_by()}; {inside.size:,} of them are in this "
                "comparison (drawn over the rest faded)"
            )
        self.note.value = css("views") + f"<span class='ls-note'>{text}</span>"

    def held_widgets(self) -> list[Any]:
        # what a selection changes; a picture's own message before the mark that shows it
        return [
            *self._top_widgets, self._top_mark, self._mark, self._focus_mark, self._brush, self.note,
            self.flips_table, self.classes_table, self,
        ]  # fmt: skip

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        if not self.live:
            if not mine:
                with self.quietly():
                    self.selected_cell = self.selected_class = self.selected_part = None
                self._last_box = None
            return  # drawn when live again
        if not mine:
            with self.quietly():
                self.selected_cell = self.selected_class = self.selected_part = None
            if self._last_box is not None:
                self._clear_brush()
            self._mark_active()
        self._draw()
        self._describe_selection()

    def on_focus(self, row: int | None) -> None:
        if self.live:
            self._show_focus()

    def on_frame(self) -> None:
        """A dashboard shows another frame: compare it with B again (ids B lacks are shown apart).

        While the view is not live (its tab out of sight) the comparison is made when it is next needed.
        """
        if not self.live:
            self._stale = True
            return
        self._recompare()

    def _recompare(self) -> None:
        c = self._comparison
        try:
            fresh = compare_frames(self.frame, c.b, missing="drop", names=c.aligned.names)
        except LogitscopeError as exc:
            self._show_error(f"The frame on screen cannot be compared with B: {exc}")
            return
        self.children = list(self._content)
        self._set_comparison(fresh)

    def _show_error(self, text: str) -> None:
        self._error = text
        self.children = [widgets.HTML(css("views") + f"<div class='ls-error'>{html.escape(text)}</div>")]
        # the frame no longer matches the comparison's rows: nothing can be selected from here
        self._frame_rows = np.zeros(0, dtype=np.int64)
        self._inverse = np.full(self.frame.n_samples, -1, dtype=np.int64)

    def close(self) -> None:
        """Stop following the shared state and close the widget."""
        state = getattr(self, "state", None)
        if state is not None:
            for handler, names in (
                (self._state_selection, ["rows", "origin"]),
                (self._state_temperature, "temperature"),
                (self._state_focus, "focus"),
            ):
                try:
                    state.unobserve(handler, names)
                except ValueError:
                    pass
        super().close()


def _finite(v: Any, default: float = -1.0) -> float:
    x = float(v)
    return x if np.isfinite(x) else default


class ComparisonPanel(widgets.VBox):
    """The comparison view with a gallery and a sample card on one shared state.

    A click on a flip-table cell, a class or a brushed rectangle puts those
    samples in the gallery (as checkpoint A scores them); a click on a tile
    shows the sample in the card.

    Parameters
    ----------
    comparison : FrameComparison
    page_size : int, default 12
        Tiles per gallery page.

    Examples
    --------
    >>> import logitscope
    >>> from logitscope.checkpoints import compare_frames
    >>> a = logitscope.load_demo("mailroom")
    >>> b = a.with_temperature(2.0)
    >>> panel = ComparisonPanel(compare_frames(a, b))
    >>> n = int(panel.flip_table.loc["right_both", "count"])
    >>> panel.view.select_cell("right_both").size == n, panel.gallery.n_shown == n
    (True, True)
    """

    def __init__(self, comparison: FrameComparison, *, page_size: int = 12, **kwargs: Any) -> None:
        self.view = CheckpointComparisonView(comparison)
        self.state: SharedState = self.view.state
        self.gallery = SampleGallery(self.view.frame, self.state, page_size=page_size)
        self.card = SampleCard(self.view.frame, self.state)
        head = widgets.HTML(
            css("views") + "<div class='ls-head'>Checkpoints side by side</div>"
            "<div class='ls-muted'>the gallery and the card show the selected samples as checkpoint A scores them"
            "</div>"
        )
        below = widgets.HBox(
            [
                widgets.Box([self.gallery], layout=widgets.Layout(flex="1 1 420px", min_width="320px")),
                widgets.Box([self.card], layout=widgets.Layout(flex="0 0 440px", min_width="440px")),
            ],
            layout=widgets.Layout(flex_flow="row wrap", align_items="flex-start", width="100%"),
        )
        super().__init__(children=[head, self.view, below], layout=widgets.Layout(width="100%"), **kwargs)
        self.add_class("logitscope-comparison-panel")

    @property
    def comparison(self) -> FrameComparison:
        return self.view.comparison

    @property
    def flip_table(self) -> pd.DataFrame:
        """The flip table as a DataFrame (see :attr:`CheckpointComparisonView.flip_table`)."""
        return self.view.flip_table

    @property
    def selected(self) -> np.ndarray:
        """Rows of frame A selected (sorted, unique); assign to select from Python."""
        return self.state.rows

    @selected.setter
    def selected(self, rows: Any) -> None:
        self.state.select(rows, origin="python")


def open_comparison(
    a: LogitFrame,
    b: LogitFrame,
    *,
    missing: MissingIds = "raise",
    names: Sequence[str] = ("A", "B"),
    page_size: int = 12,
) -> ComparisonPanel:
    """Align two checkpoints' frames by id, compare them and open the panel (see :func:`logitscope.compare`)."""
    for what, f in (("a", a), ("b", b)):
        if not isinstance(f, LogitFrame):
            raise InputTypeError(f"{what} must be a LogitFrame, got {type(f).__name__}")
    return ComparisonPanel(compare_frames(a, b, missing=missing, names=names), page_size=page_size)
