"""Score scatter: one point per sample, two per-sample scores as axes, brushing and lasso.

Every row is drawn, whatever the size of the frame: Python paints the points
into one image (each point a small translucent disc, later groups over
earlier ones) that bqplot places on the plot's axes. The browser then holds
one ``<image>`` element instead of one SVG element per point, so brushing
stays smooth at 100,000 rows and more (an SVG scatter of 10,000 points takes
about 100 ms to repaint on a headless chromium without GPU; measured with
``bench/bench_dashboard.py``).

Every selection is computed in Python over all rows: a rectangle brush (drawn in the
browser by :class:`~logitscope.widgets.brush.RectangleBrush`) sends
back its two extents; the lasso is tested in the browser against an
invisible line mark through every row, which sends back the indices inside.
The selection is drawn as opaque points over the other points faded.
"""

from __future__ import annotations

import html
import io
from typing import Any

import bqplot as bq
import ipywidgets as widgets
import numpy as np
import traitlets
from bqplot.interacts import LassoSelector
from bqplot.traits import array_serialization
from PIL import Image as PILImage
from traittypes import Array  # the array trait bqplot declares its own with

from ..errors import ParameterError
from ..frame import LogitFrame
from ..text import shorten
from ..ticks import nice_ticks
from .base import LinkedView
from .brush import RectangleBrush
from .state import SharedState
from .style import (
    CLASS_COLORS,
    RIGHT,
    SCORE_NAMES,
    SELECTED,
    UNLABELLED,
    WRONG,
    css,
    figure_layout,
    score_menu,
    score_options,
)  # fmt: skip

__all__ = [
    "FADED",
    "PointRaster",
    "QuietLines",
    "ScoreScatter",
]

_COLOR_MODES = {"correct / wrong": "correct", "true class": "label", "predicted class": "predicted"}
#: Alpha factor of the points outside the selection while a selection is shown: faded, still readable
#: on a white page and on JupyterLab's dark theme.
FADED = 0.5


class QuietLines(bq.Lines):
    """bqplot's line mark whose ``selected`` (sent by a lasso) is not echoed back to the browser."""

    selected = Array(None, allow_none=True).tag(sync=True, echo_update=False, **array_serialization)


def _domain(values: np.ndarray) -> tuple[float, float]:
    finite = values[np.isfinite(values)]
    lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    pad = (hi - lo) * 0.03 if hi > lo else max(abs(lo) * 0.05, 0.5)
    return lo - pad, hi + pad


def _rgb(color: str) -> tuple[float, float, float]:
    h = color.lstrip("#")
    return (int(h[0:2], 16) / 255.0, int(h[2:4], 16) / 255.0, int(h[4:6], 16) / 255.0)


class PointRaster:
    """Paint points into an RGBA image: translucent discs, colour groups drawn in order.

    Parameters
    ----------
    width, height : int
        Image size in pixels.
    x_range, y_range : (float, float)
        Data extents of the image (left/right, bottom/top).
    radius2 : float
        Squared disc radius in pixels (2.0: a 3 x 3 disc; 4.5: 21 pixels).
    depth : float
        Points for 63 % opacity: a pixel covered by ``c`` points has alpha ``1 - exp(-c / depth)``.

    Examples
    --------
    >>> r = PointRaster(4, 2, (0.0, 1.0), (0.0, 1.0), radius2=0.0)
    >>> r.pixels(np.array([0.1, 0.9]), np.array([0.9, 0.1])).tolist()  # top-left and bottom-right
    [0, 7]
    """

    def __init__(
        self,
        width: int,
        height: int,
        x_range: tuple[float, float],
        y_range: tuple[float, float],
        radius2: float = 2.0,
        depth: float = 1.5,
    ) -> None:
        if width < 1 or height < 1:
            raise ParameterError(f"raster size must be positive, got {width} x {height}")
        self.width, self.height = int(width), int(height)
        self.x_range, self.y_range = x_range, y_range
        r = int(np.floor(np.sqrt(max(radius2, 0.0))))
        self.offsets = [(dy, dx) for dy in range(-r, r + 1) for dx in range(-r, r + 1) if dx * dx + dy * dy <= radius2]
        self.pad = r
        self.depth = float(depth)

    def pixels(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        """Flat pixel index (row-major, top row first) of each point; -1 for non-finite points."""
        (x0, x1), (y0, y1) = self.x_range, self.y_range
        w, h = self.width, self.height
        with np.errstate(invalid="ignore"):
            fx = (np.asarray(x, np.float64) - x0) / (x1 - x0) * w
            fy = (y1 - np.asarray(y, np.float64)) / (y1 - y0) * h
        ok = np.isfinite(fx) & np.isfinite(fy)
        ix = np.clip(np.where(ok, fx, 0.0), 0, w - 1).astype(np.int64)
        iy = np.clip(np.where(ok, fy, 0.0), 0, h - 1).astype(np.int64)
        return np.where(ok, iy * w + ix, -1)

    def _spread(self, counts: np.ndarray) -> np.ndarray:
        """Each point's count spread over its disc: a separable box sum minus the box cells off the disc."""
        h, w, p = self.height, self.width, self.pad
        c = counts.reshape(h, w).astype(np.float32)
        if p == 0:
            return c
        rows = np.zeros((h + 2 * p, w), np.float32)
        for d in range(2 * p + 1):
            rows[d : d + h] += c
        rows = rows[p : p + h]
        box = np.zeros((h, w + 2 * p), np.float32)
        for d in range(2 * p + 1):
            box[:, d : d + w] += rows
        box = box[:, p : p + w].copy()
        inside = set(self.offsets)
        outside = [(dy, dx) for dy in range(-p, p + 1) for dx in range(-p, p + 1) if (dy, dx) not in inside]
        if outside:
            padded = np.zeros((h + 2 * p, w + 2 * p), np.float32)
            padded[p : p + h, p : p + w] = c
            for dy, dx in outside:
                # a point at (y, x) covers (y + dy, x + dx); remove what the box added there
                box -= padded[p - dy : p - dy + h, p - dx : p - dx + w]
        return box

    def layer(self, pixels: np.ndarray, groups: np.ndarray, colors: list[str], strength: float = 1.0) -> np.ndarray:
        """Premultiplied RGBA planes ``(4, height, width)`` float32 of points, group ``g`` in ``colors[g]``.

        Later groups are painted over earlier ones. With more than three
        colours each pixel takes the colour of the last point painted there.
        """
        h, w = self.height, self.width
        out = np.zeros((4, h, w), np.float32)
        keep = pixels >= 0
        pixels, groups = pixels[keep], groups[keep]
        if len(colors) <= 3:
            for g, color in enumerate(colors):
                counts = np.bincount(pixels[groups == g], minlength=h * w)
                a = self._alpha(counts, strength)
                under = 1.0 - a
                for c, value in enumerate(_rgb(color)):
                    out[c] *= under
                    out[c] += a * value
                out[3] *= under
                out[3] += a
            return out
        a = self._alpha(np.bincount(pixels, minlength=h * w), strength)
        p = self.pad
        top = np.full((h + 2 * p) * (w + 2 * p), -1, np.int64)
        py, px = np.divmod(pixels, w)
        for dy, dx in self.offsets:
            top[(py + dy + p) * (w + 2 * p) + (px + dx + p)] = groups
        top = top.reshape(h + 2 * p, w + 2 * p)[p : p + h, p : p + w]
        palette = np.asarray([_rgb(c) for c in colors], np.float32)
        rgb = palette[np.maximum(top, 0)]  # (h, w, 3)
        for c in range(3):
            out[c] = rgb[..., c] * a
        out[3] = a
        return out

    def window_layer(
        self, pixels: np.ndarray, groups: np.ndarray, colors: list[str], window: tuple[int, int, int, int]
    ) -> np.ndarray:
        """:meth:`layer` cut to ``window`` (columns ``c0:c1``, rows ``r0:r1``), painting only that part.

        Equal to ``layer(...)[:, r0:r1, c0:c1]`` when every point lies at least the disc radius
        inside the window (or the window reaches the image's edge there): a brush's points fill a
        small part of the image, and painting that part alone is what makes a brush quick.

        Examples
        --------
        >>> r = PointRaster(8, 6, (0.0, 1.0), (0.0, 1.0))
        >>> px = r.pixels(np.array([0.3, 0.5]), np.array([0.5, 0.4]))
        >>> g = np.array([0, 1])
        >>> full = r.layer(px, g, ["#000000", "#ff0000"])
        >>> bool(np.allclose(r.window_layer(px, g, ["#000000", "#ff0000"], (0, 6, 0, 6)), full[:, 0:6, 0:6]))
        True
        """
        c0, c1, r0, r1 = window
        sub = PointRaster.__new__(PointRaster)
        sub.width, sub.height = c1 - c0, r1 - r0
        sub.x_range, sub.y_range = self.x_range, self.y_range
        sub.offsets, sub.pad, sub.depth = self.offsets, self.pad, self.depth
        keep = pixels >= 0
        py, px = np.divmod(pixels[keep], self.width)
        return sub.layer((py - r0) * sub.width + (px - c0), groups[keep], colors)

    def _alpha(self, counts: np.ndarray, strength: float) -> np.ndarray:
        """Alpha ``(1 - exp(-c / depth)) * strength`` of each pixel from its spread point count ``c``."""
        spread = self._spread(counts)
        a = np.exp(spread * np.float32(-1.0 / self.depth))
        a *= np.float32(-strength)
        a += np.float32(strength)
        return a

    @staticmethod
    def over(top: np.ndarray, bottom: np.ndarray, bottom_alpha: float = 1.0) -> np.ndarray:
        """``top`` composited over ``bottom`` (premultiplied planes), the bottom's alpha scaled by ``bottom_alpha``."""
        keep = (1.0 - top[3]) * np.float32(bottom_alpha)
        return top + bottom * keep

    @staticmethod
    def to_rgba8(planes: np.ndarray) -> np.ndarray:
        """Premultiplied float RGBA planes to a straight-alpha uint8 ``(height, width, 4)`` image."""
        a = planes[3]
        scale = np.divide(np.float32(255.0), a, out=np.zeros_like(a), where=a > 1e-6)
        out = np.empty((*a.shape, 4), np.uint8)
        for c in range(3):
            v = planes[c] * scale
            v += 0.5
            np.clip(v, 0, 255, out=v)
            out[..., c] = v
        v = a * np.float32(255.0)
        v += 0.5
        np.clip(v, 0, 255, out=v)
        out[..., 3] = v
        return out

    @staticmethod
    def png(rgba8: np.ndarray) -> bytes:
        """The image as PNG bytes (fast deflate: it is encoded on every selection)."""
        buf = io.BytesIO()
        PILImage.fromarray(rgba8, "RGBA").save(buf, format="PNG", compress_level=1)
        return buf.getvalue()


class ScoreScatter(LinkedView, widgets.VBox):
    """Scatter of two per-sample scores, one point per sample, with rectangle and lasso brushing.

    Parameters
    ----------
    frame : LogitFrame
        The data.
    state : SharedState, optional
        Shared state; a new one is made when None.
    x, y : str
        Scores on the axes (see :func:`logitscope.widgets.style.score_menu`).
    color : {"correct / wrong", "true class", "predicted class"}
        Point colours (without labels only "predicted class" is offered).
    resolution : (int, int), default (520, 360)
        Size in pixels of the image the points are painted into.
    name : str, optional
        Readable name shown where the view's selection is described.

    Examples
    --------
    >>> import numpy as np
    >>> from logitscope import LogitFrame
    >>> frame = LogitFrame(np.array([[2.0, 0.0], [0.0, 1.0], [1.0, 0.9]]), labels=[0, 1, 1])
    >>> view = ScoreScatter(frame, x="confidence", y="margin")
    >>> view.select_box((0.5, 0.8), (-1.0, 1.0)).tolist()  # rows with confidence in [0.5, 0.8]
    [1, 2]
    >>> view.state.rows.tolist(), view.state.origin_name
    ([1, 2], 'score scatter')
    """

    kind = "score scatter"
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
        resolution: tuple[int, int] = (520, 360),
        name: str | None = None,
        **kwargs: Any,
    ) -> None:
        self.link(frame, state, name)
        self.scores_offered = score_menu(frame.has_labels, frame.source)
        self.colors_offered = tuple(c for c, field in _COLOR_MODES.items() if frame.has_labels or field == "predicted")
        for value, what in ((x, "x"), (y, "y")):
            if value not in self.scores_offered:
                offered = ", ".join(self.scores_offered)
                raise ParameterError(f"{what}={value!r} is not a score of this frame; choose from {offered}")
        if color is None:
            color = self.colors_offered[0]
        if color not in self.colors_offered:
            raise ParameterError(f"color={color!r} is not offered; choose from {', '.join(self.colors_offered)}")
        width, height = (int(v) for v in resolution)
        if width < 16 or height < 16:
            raise ParameterError(f"resolution must be at least 16 x 16 pixels, got {resolution}")
        self.resolution = (width, height)
        n = frame.n_samples
        # bigger, more opaque discs for a few points; smaller, lighter ones for many
        self._radius2, self._depth = (5.0, 0.8) if n <= 5_000 else (2.0, 1.2) if n <= 50_000 else (2.0, 2.0)
        self._columns: dict[str, np.ndarray] = {}
        self._columns_t: float | None = None
        self._last_box: tuple[float, float, float, float] | None = None
        self.raster: PointRaster | None = None
        self._pixels = np.zeros(0, np.int64)
        self._groups = np.zeros(0, np.int64)
        self._palette: list[str] = []
        self._base: np.ndarray | None = None  # premultiplied planes of all points
        self._top = np.zeros((4, height, width), np.float32)  # premultiplied planes of the selected points
        self._base_widgets: tuple[widgets.Image, widgets.Image] | None = None  # all points: full, faded

        self._sx = bq.LinearScale()
        self._sy = bq.LinearScale()
        # Two image marks: every point (drawn full, or faded while a selection is shown) and, on
        # top, the selected points alone (mostly transparent, so quick to encode and small to send).
        # bqplot's Image mark redraws when its image *widget* changes, so widgets take turns.
        self._top_widgets = (widgets.Image(format="png"), widgets.Image(format="png"))
        self._turn = 0
        scales = {"x": self._sx, "y": self._sy}
        self._mark = bq.Image(image=widgets.Image(format="png"), scales=scales, pixelated=False)
        self._top_mark = bq.Image(image=self._top_widgets[0], scales=scales, pixelated=False)
        # a ring around the sample in the card (state.focus): one SVG element
        self._focus_mark = bq.Scatter(
            x=np.zeros(1),
            y=np.zeros(1),
            scales=scales,
            default_size=140,
            fill=False,
            colors=["#111111"],
            stroke_width=2.0,
            visible=False,
        )
        self._ax = bq.Axis(scale=self._sx, label=x, grid_lines="none", tick_format="~g", label_offset="34px")
        self._ay = bq.Axis(
            scale=self._sy, label=y, side="left", grid_lines="none", tick_format="~g", label_offset="42px"
        )
        self._probe: bq.Lines | None = None
        self._lasso: LassoSelector | None = None
        self.figure = bq.Figure(
            display_toolbar=False,
            marks=[self._mark, self._top_mark, self._focus_mark],
            axes=[self._ax, self._ay],
            fig_margin={"top": 10, "bottom": 48, "left": 58, "right": 12},
            padding_x=0.0,
            padding_y=0.0,
            layout=figure_layout("100%", "360px", "320px"),
        )
        # the rectangle brush is drawn in the browser and sends its extents once, on release (js/brush.js)
        self._brush = RectangleBrush(self.figure, faded=FADED, layout=widgets.Layout(width="100%", min_width="320px"))
        self._brush.observe(self._on_brush, "box")

        menu = {"options": score_options(self.scores_offered), "layout": {"width": "190px"}}
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
        self._key = widgets.HTML()
        controls = widgets.HBox(
            [self._x_menu, self._y_menu, self._c_menu, self._mode_buttons],
            layout=widgets.Layout(flex_flow="row wrap", align_items="center"),
        )
        widgets.VBox.__init__(self, children=[controls, self._key, self._brush], **kwargs)
        self.add_class("logitscope-scatter")

        self.x_score, self.y_score, self.color_by = x, y, color
        widgets.link((self._x_menu, "value"), (self, "x_score"))
        widgets.link((self._y_menu, "value"), (self, "y_score"))
        widgets.link((self._c_menu, "value"), (self, "color_by"))
        widgets.link((self._mode_buttons, "value"), (self, "mode"))
        self.observe(self._on_axes, ["x_score", "y_score"])
        self.observe(self._on_color, "color_by")
        self.observe(self._on_mode, "mode")
        self._place()
        self._recolor()
        self._on_rows()

    # ------------------------------------------------------------------ data

    def column(self, score: str) -> np.ndarray:
        """The score ``score`` of every row at the shared temperature (float64)."""
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

    @traitlets.validate("color_by")
    def _valid_color(self, proposal: Any) -> str:
        value = str(proposal["value"])
        offered = getattr(self, "colors_offered", tuple(_COLOR_MODES))
        if value not in offered:
            raise traitlets.TraitError(f"color_by must be one of {list(offered)} for this frame, got {value!r}")
        return value

    def _place(self) -> None:
        """Axes extents and each row's pixel, for the current scores and temperature."""
        x, y = self.column(self.x_score), self.column(self.y_score)
        (x0, x1), (y0, y1) = _domain(x), _domain(y)
        w, h = self.resolution
        self.raster = PointRaster(w, h, (x0, x1), (y0, y1), radius2=self._radius2, depth=self._depth)
        self._pixels = self.raster.pixels(x, y)
        self._base = None
        with self._brush.hold_sync():
            self._brush.x_range, self._brush.y_range = [x0, x1], [y0, y1]
        with self.figure.hold_sync():
            self._sx.min, self._sx.max = x0, x1
            self._sy.min, self._sy.max = y0, y1
            self._ax.tick_values = np.asarray(nice_ticks(x0, x1, n=6))
            self._ay.tick_values = np.asarray(nice_ticks(y0, y1, n=5))
            for mark in (self._mark, self._top_mark):
                with mark.hold_sync():
                    mark.x = np.array([x0, x1])
                    mark.y = np.array([y0, y1])
            self._ax.label = SCORE_NAMES.get(self.x_score, self.x_score)
            self._ay.label = SCORE_NAMES.get(self.y_score, self.y_score)
        if self._probe is not None:
            with self._probe.hold_sync():
                self._probe.x = x.astype(np.float32)
                self._probe.y = y.astype(np.float32)
        self._show_focus()

    def _show_focus(self, change: Any = None) -> None:
        """Ring the focused sample (the one the card shows), if any."""
        row = self.state.focus
        if row is None:
            self._focus_mark.visible = False
            return
        with self._focus_mark.hold_sync():
            self._focus_mark.x = np.array([self.column(self.x_score)[row]])
            self._focus_mark.y = np.array([self.column(self.y_score)[row]])
            self._focus_mark.visible = True

    def _recolor(self) -> None:
        """Colour group of each row and the palette, for the current colour mode."""
        field = _COLOR_MODES[self.color_by]
        if field == "correct":
            # wrong samples drawn last, over the (usually many more) right ones
            correct = self.frame.sample_scores(self.state.temperature).correct
            assert correct is not None  # this colour mode is offered only when the frame has labels
            # unlabelled rows first (drawn under the others), wrong samples last, over the (usually many more) right
            self._groups = np.where(self.frame.labelled, 1 + (~correct).astype(np.int64), 0)
            self._palette = [UNLABELLED, RIGHT, WRONG]
            key = [(RIGHT, "correct"), (WRONG, "wrong")]
        else:
            cls = np.asarray(self.frame.labels if field == "label" else self.frame.sample_scores().predicted)
            # group 0 holds the unlabelled rows (true-class mode of a partly labelled batch), then the classes
            self._groups = np.where(cls >= 0, 1 + cls.astype(np.int64) % len(CLASS_COLORS), 0)
            self._palette = [UNLABELLED, *CLASS_COLORS]
            names = self.frame.classes
            key = [(CLASS_COLORS[i], names[i]) for i in range(len(names))] if len(names) <= len(CLASS_COLORS) else []
        if self.frame.has_labels and not self.frame.fully_labelled and field != "predicted":
            key.append((UNLABELLED, "no label"))
        self._base = None
        swatch = "<span class='ls-swatch' style='background:{}'></span><span title='{}'>{}</span>"
        # class names are user data: escaped before they reach HTML, long ones cut (in full on hover)
        parts = "".join(
            swatch.format(c, html.escape(str(s)), html.escape(shorten(s, 24, where="middle"))) for c, s in key
        )
        if not key:
            parts = "colour: class index modulo 10"
        self._key.value = f"{css('views')}<span class='ls-key'>{parts}</span>"

    def _draw(self) -> None:
        """Paint the points (selection opaque over the rest faded) and send what changed."""
        assert self.raster is not None
        if self._base is None:
            self._base = self.raster.layer(self._pixels, self._groups, self._palette)
            full = PointRaster.png(PointRaster.to_rgba8(self._base))
            faded = PointRaster.png(PointRaster.to_rgba8(self._base * np.float32(FADED)))
            old = self._base_widgets
            self._base_widgets = (widgets.Image(value=full, format="png"), widgets.Image(value=faded, format="png"))
            self._mark.image = self._base_widgets[0]
            self._brush.points = self._base_widgets[0]  # the browser paints a brushed selection from it at once
            if old is not None:
                for w in old:
                    w.close()
        rows = self.state.rows
        w, h = self.resolution
        self._top = np.zeros_like(self._top)
        window = (0, 1, 0, 1)
        if rows.size:
            # paint and send only the part of the image the selection covers (a brush covers a small part)
            px = self._pixels[rows]
            groups = self._groups[rows]
            inside = px >= 0
            px, groups = px[inside], groups[inside]
            pad = self.raster.pad + 1
            if px.size:
                py, pxx = np.divmod(px, w)
                window = (
                    max(int(pxx.min()) - pad, 0),
                    min(int(pxx.max()) + pad + 1, w),
                    max(int(py.min()) - pad, 0),
                    min(int(py.max()) + pad + 1, h),
                )
                c0, c1, r0, r1 = window
                self._top[:, r0:r1, c0:c1] = self.raster.window_layer(px, groups, self._palette, window)
        c0, c1, r0, r1 = window
        (x0, x1), (y0, y1) = self.raster.x_range, self.raster.y_range
        self._turn = 1 - self._turn
        widget = self._top_widgets[self._turn]
        widget.value = PointRaster.png(PointRaster.to_rgba8(self._top[:, r0:r1, c0:c1]))
        with self._top_mark.hold_sync():
            self._top_mark.x = np.array([x0 + (x1 - x0) * c0 / w, x0 + (x1 - x0) * c1 / w])
            self._top_mark.y = np.array([y1 - (y1 - y0) * r1 / h, y1 - (y1 - y0) * r0 / h])
            self._top_mark.image = widget
        assert self._base_widgets is not None  # built together with self._base above
        self._mark.image = self._base_widgets[0 if rows.size == 0 else 1]

    @property
    def image(self) -> np.ndarray:
        """What the plot shows, as one straight-alpha RGBA uint8 image ``(height, width, 4)``."""
        assert self._base is not None
        bottom_alpha = 1.0 if self.state.rows.size == 0 else FADED
        return PointRaster.to_rgba8(PointRaster.over(self._top, self._base, bottom_alpha))

    @property
    def point_colors(self) -> np.ndarray:
        """The colour each sample is painted in (``#rrggbb`` strings, one per row), for the colour mode.

        Examples
        --------
        >>> import numpy as np
        >>> from logitscope import LogitFrame
        >>> from logitscope.widgets.style import RIGHT, WRONG
        >>> view = ScoreScatter(LogitFrame(np.array([[2.0, 0.0], [0.0, 2.0]]), labels=[0, 0]))
        >>> view.point_colors.tolist() == [RIGHT, WRONG]
        True
        """
        return np.asarray(self._palette, dtype=object)[self._groups]

    def pixel_of(self, row: int) -> tuple[int, int]:
        """(column, row) of the image pixel where sample ``row`` is painted."""
        p = int(self._pixels[int(row)])
        return (p % self.resolution[0], p // self.resolution[0])

    # ------------------------------------------------------------------ selection in

    def _on_rows(self, change: Any = None) -> None:
        if not self.owns_selection:
            self._clear_tools()
        self._draw()

    @property
    def brush_box(self) -> tuple[tuple[float, float], tuple[float, float]] | None:
        """``((x0, x1), (y0, y1))`` of the rectangle brush drawn on the plot, each sorted; None without one."""
        return self._brush.extents

    def _clear_brush(self) -> None:
        """Remove the brush rectangle."""
        self._last_box = None
        if self._brush.box:
            self._brush.box = []

    def _clear_tools(self) -> None:
        """Remove a stale brush rectangle or lasso when another view made the selection."""
        if self._last_box is not None:
            self._last_box = None
            self._clear_brush()
        if self._lasso is not None and self._probe is not None and self._probe.selected is not None:
            self._lasso.reset()

    def _on_temperature(self, change: Any) -> None:
        self._clear_brush()  # its extents no longer match the moved points; the rows stay selected
        self._place()
        if self.color_by == "correct / wrong":
            self._recolor()
        self._draw()

    def _on_color(self, change: Any) -> None:
        self._recolor()
        self._draw()

    # ------------------------------------------------------------------ selection out

    def select_box(self, x_range: tuple[float, float], y_range: tuple[float, float]) -> np.ndarray:
        """Select every row whose (x, y) scores lie in the closed box; return the rows.

        This is what a rectangle brush does, over all rows.
        """
        x0, x1 = sorted(float(v) for v in x_range)
        y0, y1 = sorted(float(v) for v in y_range)
        x, y = self.column(self.x_score), self.column(self.y_score)
        rows = np.flatnonzero((x >= x0) & (x <= x1) & (y >= y0) & (y <= y1))
        self._last_box = (x0, x1, y0, y1)
        return self.select(rows)

    def _on_brush(self, change: Any) -> None:
        extents = self._brush.extents
        if extents is None:
            # the brush was removed: clear only a selection this view made
            if self._last_box is not None and self.owns_selection:
                self._last_box = None
                self.clear_selection()
            return
        (x0, x1), (y0, y1) = extents
        box = (x0, x1, y0, y1)
        if box == self._last_box:
            return
        self.select_box((x0, x1), (y0, y1))

    # ------------------------------------------------------------------ lasso

    def _ensure_lasso(self) -> LassoSelector:
        if self._lasso is None:
            x, y = self.column(self.x_score), self.column(self.y_score)
            # an invisible line through every row: the lasso tests all of them in the browser
            self._probe = QuietLines(
                x=x.astype(np.float32),
                y=y.astype(np.float32),
                scales={"x": self._sx, "y": self._sy},
                opacities=[0.0],
                stroke_width=0.0,
                visible=False,
                interactions={},
            )
            self._probe.observe(self._on_lasso, "selected")
            self._lasso = LassoSelector(x_scale=self._sx, y_scale=self._sy, marks=[self._probe], color=SELECTED)
            self.figure.marks = [self._mark, self._top_mark, self._focus_mark, self._probe]
        return self._lasso

    def _on_lasso(self, change: Any) -> None:
        picked = change["new"]
        if picked is None or len(picked) == 0:
            self.clear_selection()
            return
        self._last_box = None
        self.select(np.asarray(picked, dtype=np.int64))

    def select_lasso(self, rows: Any) -> np.ndarray:
        """Select the given rows as a lasso does (the browser sends the rows inside the shape)."""
        self._ensure_lasso()
        assert self._probe is not None
        self._probe.selected = np.asarray(rows, dtype=np.uint32)
        return self.state.rows

    def _on_mode(self, change: Any) -> None:
        if self.mode == "lasso":
            self._clear_brush()
            self._last_box = None
            self.figure.interaction = self._ensure_lasso()
            self._brush.active = False
        else:
            if self._lasso is not None:
                self._lasso.reset()
            self.figure.interaction = None
            self._brush.active = True

    def _on_axes(self, change: Any) -> None:
        self._clear_brush()
        self._last_box = None
        if self._lasso is not None:
            self._lasso.reset()
        self._place()
        self._draw()

    # ------------------------------------------------------------------ hooks of the linked view

    def held_widgets(self) -> list[Any]:
        # a picture's own message before the mark that shows it (bqplot redraws on the mark's message)
        return [*self._top_widgets, self._top_mark, self._mark, self._focus_mark, self._brush]

    def on_selection(self, rows: np.ndarray, mine: bool) -> None:
        self._on_rows()

    def on_temperature(self, temperature: float) -> None:
        self._on_temperature(None)

    def on_focus(self, row: int | None) -> None:
        self._show_focus()

    def on_frame(self) -> None:
        self._columns, self._columns_t = {}, None
        self._recolor()
        self._on_axes(None)
