"""Score scatter: one point per sample, two per-sample scores as axes, brushing and lasso.

The display holds at most ``max_points`` points (a deterministic subsample
when the frame is larger), but every selection is computed in Python over
*all* rows: a rectangle brush sends back its two extents, and the lasso is
tested against an invisible line mark that carries every row, so the
browser sends back the indices of the rows inside the lasso.
"""

from __future__ import annotations

from typing import Any

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets
from bqplot.interacts import BrushSelector, LassoSelector

from ..errors import InputTypeError, ParameterError
from ..frame import LogitFrame
from .state import SharedState

__all__ = ["COLOR_RIGHT", "COLOR_WRONG", "SCATTER_SCORES", "ScoreScatter", "display_subsample", "view_state"]

#: Per-sample scores offered as axes, in menu order (label-dependent ones need labels).
SCATTER_SCORES = (
    "confidence",
    "entropy",
    "margin",
    "logit_margin",
    "energy",
    "true_probability",
    "true_log_probability",
    "true_rank",
    "brier",
)
_LABEL_SCORES = {"true_probability", "true_log_probability", "true_rank", "brier"}
_COLOR_MODES = {"correct / wrong": "correct", "true class": "label", "predicted class": "predicted"}

COLOR_RIGHT = "#4c78a8"
COLOR_WRONG = "#e45756"
#: Ten categorical colours (cycled for more classes).
CLASS_COLORS = (
    "#4c78a8",
    "#f58518",
    "#54a24b",
    "#e45756",
    "#72b7b2",
    "#eeca3b",
    "#b279a2",
    "#ff9da6",
    "#9d755d",
    "#79706e",
)


def display_subsample(n_rows: int, max_points: int, seed: int = 0) -> np.ndarray:
    """Rows a scatter draws: all of them, or a sorted uniform random subset of ``max_points``.

    The subset depends only on ``n_rows``, ``max_points`` and ``seed``, so
    the same frame always shows the same points.

    Examples
    --------
    >>> display_subsample(5, 10).tolist()
    [0, 1, 2, 3, 4]
    >>> rows = display_subsample(1000, 100)
    >>> len(rows), bool(np.all(np.diff(rows) > 0))
    (100, True)
    """
    if max_points < 1:
        raise ParameterError(f"max_points must be at least 1, got {max_points}")
    if n_rows <= max_points:
        return np.arange(n_rows, dtype=np.int64)
    rng = np.random.default_rng(seed)
    return np.sort(rng.choice(n_rows, size=max_points, replace=False)).astype(np.int64)


def view_state(frame: object, state: SharedState | None) -> SharedState:
    """Check a view's ``frame`` and ``state`` arguments; return the state to use (new when None).

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> view_state(LogitFrame(np.zeros((3, 2))), None).n_samples
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


def _domain(values: np.ndarray) -> tuple[float, float]:
    lo, hi = float(np.min(values)), float(np.max(values))
    if not np.isfinite(lo) or not np.isfinite(hi):
        finite = values[np.isfinite(values)]
        lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    pad = (hi - lo) * 0.03 if hi > lo else max(abs(lo) * 0.05, 0.5)
    return lo - pad, hi + pad


class ScoreScatter(widgets.VBox):
    """Scatter of two per-sample scores, one point per sample, with rectangle and lasso brushing.

    Parameters
    ----------
    frame : LogitFrame
        The data.
    state : SharedState, optional
        Shared state; a new one is made when None.
    x, y : str
        Scores on the axes (see :data:`SCATTER_SCORES`).
    color : {"correct / wrong", "true class", "predicted class"}
        Point colours (without labels only "predicted class" is offered).
    max_points : int, default 10_000
        Most points drawn; larger frames show a deterministic uniform
        subsample (:func:`display_subsample`). Selections still cover all rows.
    name : str, default "scatter"
        Origin written to the shared state.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.9]]), labels=[0, 1, 1])
    >>> view = ScoreScatter(frame, x="confidence", y="margin")
    >>> view.select_box((0.5, 0.8), (-1.0, 1.0)).tolist()  # rows with confidence in [0.5, 0.8]
    [1, 2]
    >>> view.state.rows.tolist(), view.state.origin
    ([1, 2], 'scatter')
    """

    x_score = traitlets.Unicode("confidence", help="score on the x axis")
    y_score = traitlets.Unicode("entropy", help="score on the y axis")
    color_by = traitlets.Unicode("correct / wrong", help="how points are coloured")
    mode = traitlets.Enum(["rectangle", "lasso"], default_value="rectangle", help="brush tool")

    def __init__(
        self,
        frame: LogitFrame,
        state: SharedState | None = None,
        *,
        x: str = "confidence",
        y: str = "entropy",
        color: str | None = None,
        max_points: int = 10_000,
        name: str = "scatter",
        **kwargs: Any,
    ) -> None:
        self.frame = frame
        self.state = view_state(frame, state)
        self.name = name
        self.scores_offered = tuple(s for s in SCATTER_SCORES if frame.has_labels or s not in _LABEL_SCORES)
        self.colors_offered = tuple(c for c, field in _COLOR_MODES.items() if frame.has_labels or field == "predicted")
        for value, what in ((x, "x"), (y, "y")):
            if value not in self.scores_offered:
                offered = ", ".join(self.scores_offered)
                raise ParameterError(f"{what}={value!r} is not a score of this frame; choose from {offered}")
        if color is None:
            color = self.colors_offered[0]
        if color not in self.colors_offered:
            raise ParameterError(f"color={color!r} is not offered; choose from {self.colors_offered}")
        self.display_rows = display_subsample(frame.n_samples, max_points)
        self._columns: dict[str, np.ndarray] = {}
        self._columns_t: float | None = None
        self._last_box: tuple[float, float, float, float] | None = None

        self._sx = bq.LinearScale()
        self._sy = bq.LinearScale()
        self._mark = bq.Scatter(
            x=np.zeros(0, np.float32),
            y=np.zeros(0, np.float32),
            scales={"x": self._sx, "y": self._sy, "color": self._color_scale_for(color)},
            default_size=14,
            stroke=None,
            opacities=[0.7],
            selected_style={"opacity": 1.0},
            unselected_style={"opacity": 0.12},
        )
        self._mark.on_element_click(self._on_point_click)
        self._ax = bq.Axis(scale=self._sx, label=x, grid_lines="none")
        self._ay = bq.Axis(scale=self._sy, label=y, side="left", grid_lines="none")
        self._brush = BrushSelector(x_scale=self._sx, y_scale=self._sy, marks=[], color="#7f9cc0")
        self._brush.observe(self._on_brush, ["brushing", "selected_x", "selected_y"])
        self._probe: bq.Lines | None = None
        self._lasso: LassoSelector | None = None
        self.figure = bq.Figure(
            display_toolbar=False,
            marks=[self._mark],
            axes=[self._ax, self._ay],
            interaction=self._brush,
            fig_margin={"top": 10, "bottom": 40, "left": 55, "right": 10},
            min_aspect_ratio=0.5,
            max_aspect_ratio=2.0,
            layout=widgets.Layout(width="100%", height="360px"),
            padding_y=0.0,
        )

        menu = {"options": self.scores_offered, "layout": {"width": "190px"}}
        self._x_menu = widgets.Dropdown(value=x, description="x", **menu)
        self._y_menu = widgets.Dropdown(value=y, description="y", **menu)
        self._c_menu = widgets.Dropdown(
            options=self.colors_offered, value=color, description="colour", layout={"width": "210px"}
        )
        self._mode_buttons = widgets.ToggleButtons(
            options=["rectangle", "lasso"],
            value="rectangle",
            tooltips=["drag a rectangle", "draw a free shape"],
            style={"button_width": "84px"},
        )
        self._note = widgets.Label()
        self._note.add_class("logitscope-note")
        controls = widgets.HBox(
            [self._x_menu, self._y_menu, self._c_menu, self._mode_buttons],
            layout=widgets.Layout(flex_flow="row wrap", align_items="center"),
        )
        super().__init__(children=[controls, self.figure, self._note], **kwargs)
        self.add_class("logitscope-scatter")

        self.x_score, self.y_score, self.color_by = x, y, color
        widgets.link((self._x_menu, "value"), (self, "x_score"))
        widgets.link((self._y_menu, "value"), (self, "y_score"))
        widgets.link((self._c_menu, "value"), (self, "color_by"))
        widgets.link((self._mode_buttons, "value"), (self, "mode"))
        self.observe(self._on_axes, ["x_score", "y_score"])
        self.observe(self._on_color, "color_by")
        self.observe(self._on_mode, "mode")
        self.state.observe(self._on_temperature, "temperature")
        self.state.observe(self._on_rows, "rows")
        self._redraw()
        self._on_color()
        self._on_rows()

    # ------------------------------------------------------------------ data

    def column(self, score: str) -> np.ndarray:
        """The score ``score`` of every row at the shared temperature (float64, read-only)."""
        t = self.state.temperature
        if self._columns_t != t:
            self._columns, self._columns_t = {}, t
        hit = self._columns.get(score)
        if hit is None:
            value = getattr(self.frame.sample_scores(t), score, None)
            if value is None:
                raise ParameterError(f"score {score!r} is not available for this frame")
            hit = np.asarray(value, dtype=np.float64)
            self._columns[score] = hit
        return hit

    def _redraw(self) -> None:
        x, y = self.column(self.x_score), self.column(self.y_score)
        rows = self.display_rows
        (x0, x1), (y0, y1) = _domain(x), _domain(y)
        with self.figure.hold_sync():
            self._sx.min, self._sx.max = x0, x1
            self._sy.min, self._sy.max = y0, y1
            with self._mark.hold_sync():
                self._mark.x = x[rows].astype(np.float32)
                self._mark.y = y[rows].astype(np.float32)
            self._ax.label = self.x_score.replace("_", " ")
            self._ay.label = self.y_score.replace("_", " ")
        if self._probe is not None:
            with self._probe.hold_sync():
                self._probe.x = x.astype(np.float32)
                self._probe.y = y.astype(np.float32)

    def _color_scale_for(self, color: str) -> bq.Scale:
        if _COLOR_MODES[color] == "correct":
            return bq.ColorScale(colors=[COLOR_WRONG, COLOR_RIGHT], min=0.0, max=1.0)
        return bq.OrdinalColorScale(colors=list(CLASS_COLORS), domain=list(range(self.frame.n_classes)))

    def _on_color(self, change: Any = None) -> None:
        field = _COLOR_MODES[self.color_by]
        rows = self.display_rows
        if field == "correct":
            values = self.frame.sample_scores(self.state.temperature).correct[rows].astype(np.float32)
        elif field == "label":
            values = np.asarray(self.frame.labels)[rows].astype(np.int32)
        else:
            values = self.frame.sample_scores(self.state.temperature).predicted[rows].astype(np.int32)
        with self._mark.hold_sync():
            if change is not None:
                self._mark.scales = {**self._mark.scales, "color": self._color_scale_for(self.color_by)}
            self._mark.color = values

    # ------------------------------------------------------------------ selection in

    def _on_rows(self, change: Any = None) -> None:
        rows = self.state.rows
        if self.state.origin != self.name:
            self._clear_tools()
        n, shown = self.frame.n_samples, len(self.display_rows)
        text = f"showing {shown:,} of {n:,} points (selections cover all rows)" if shown < n else ""
        if rows.size == 0:
            self._mark.selected = None
        else:
            mask = np.zeros(n, dtype=bool)
            mask[rows] = True
            self._mark.selected = np.flatnonzero(mask[self.display_rows]).astype(np.uint32)
            text = f"{rows.size:,} selected" + (f"; {text}" if text else "")
        self._note.value = text

    def _clear_tools(self) -> None:
        """Remove a stale brush rectangle or lasso when another view made the selection."""
        if self._last_box is not None:
            self._last_box = None
            self._brush.reset()
        if self._lasso is not None and self._probe is not None and self._probe.selected is not None:
            self._lasso.reset()

    def _on_temperature(self, change: Any) -> None:
        self._redraw()
        if self.color_by == "correct / wrong":
            self._on_color()

    # ------------------------------------------------------------------ selection out

    def select_box(self, x_range: tuple[float, float], y_range: tuple[float, float]) -> np.ndarray:
        """Select every row whose (x, y) scores lie in the closed box; return the rows.

        This is what a rectangle brush does, over all rows (not only the drawn ones).
        """
        x0, x1 = sorted(float(v) for v in x_range)
        y0, y1 = sorted(float(v) for v in y_range)
        x, y = self.column(self.x_score), self.column(self.y_score)
        rows = np.flatnonzero((x >= x0) & (x <= x1) & (y >= y0) & (y <= y1))
        self._last_box = (x0, x1, y0, y1)
        self.state.select(rows, origin=self.name)
        return self.state.rows

    def _on_brush(self, change: Any) -> None:
        b = self._brush
        if b.brushing:
            return
        sx, sy = b.selected_x, b.selected_y
        if sx is None or sy is None or len(sx) < 2 or len(sy) < 2:
            # the brush was removed: clear only a selection this view made
            if self._last_box is not None and self.state.origin == self.name:
                self._last_box = None
                self.state.clear(origin=self.name)
            return
        box = (*sorted((float(sx[0]), float(sx[1]))), *sorted((float(sy[0]), float(sy[1]))))
        if box == self._last_box:
            return
        self.select_box(box[:2], box[2:])

    def _on_point_click(self, mark: Any, content: dict[str, Any]) -> None:
        index = content.get("data", {}).get("index") if isinstance(content, dict) else None
        if index is None or not 0 <= int(index) < len(self.display_rows):
            return
        self.state.focus = int(self.display_rows[int(index)])

    # ------------------------------------------------------------------ lasso

    def _ensure_lasso(self) -> LassoSelector:
        if self._lasso is None:
            x, y = self.column(self.x_score), self.column(self.y_score)
            # an invisible line through every row: the lasso tests all of them in the browser
            self._probe = bq.Lines(
                x=x.astype(np.float32),
                y=y.astype(np.float32),
                scales={"x": self._sx, "y": self._sy},
                opacities=[0.0],
                stroke_width=0.0,
                selected_style={},
                unselected_style={},
                interactions={},
            )
            self._probe.observe(self._on_lasso, "selected")
            self._lasso = LassoSelector(x_scale=self._sx, y_scale=self._sy, marks=[self._probe], color="#3d5f8f")
            self.figure.marks = [self._probe, self._mark]
        return self._lasso

    def _on_lasso(self, change: Any) -> None:
        picked = change["new"]
        if picked is None or len(picked) == 0:
            if self.state.origin == self.name:
                self.state.clear(origin=self.name)
            return
        self._last_box = None
        self.state.select(np.asarray(picked, dtype=np.int64), origin=self.name)

    def select_lasso(self, rows: Any) -> np.ndarray:
        """Select the given rows as a lasso would (the browser sends the rows inside the shape)."""
        self._ensure_lasso()
        assert self._probe is not None
        self._probe.selected = np.asarray(rows, dtype=np.uint32)
        return self.state.rows

    def _on_mode(self, change: Any) -> None:
        if self.mode == "lasso":
            self._brush.reset()
            self._last_box = None
            self.figure.interaction = self._ensure_lasso()
        else:
            if self._lasso is not None:
                self._lasso.reset()
            self.figure.interaction = self._brush

    def _on_axes(self, change: Any) -> None:
        self._brush.reset()
        self._last_box = None
        if self._lasso is not None:
            self._lasso.reset()
        self._redraw()
