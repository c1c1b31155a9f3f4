"""A small inline-SVG plotting helper: axes with ticks, lines, points, rectangles, rules, text.

The report draws every plot with this module, so the HTML file needs no
script, font or image from anywhere. Markup is built only from escaped
parts: every text and attribute value goes through :func:`markupsafe.escape`
(data strings such as class names reach the SVG as text), and the pieces
are :class:`markupsafe.Markup`, which the report's autoescaping templates
insert as they are. Styling is done with CSS classes defined in report.css.

Element ids (clip paths) come from an :class:`IdSource`; a page passes one
source to all its charts, so ids are unique within the page and the same
input gives the same page.

Examples
--------
>>> chart = Chart(x_domain=(0, 1), y_domain=(0, 1), title="Reliability <draft>")
>>> chart.line([0, 1], [0, 1], cls="reference")
>>> svg = chart.to_svg()
>>> svg.startswith("<svg"), "Reliability &lt;draft&gt;" in svg
(True, True)
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field

from markupsafe import Markup, escape

from ..ticks import nice_ticks

__all__ = ["Chart", "IdSource", "Scale", "attrs", "element", "fmt_number", "nice_ticks"]


class IdSource:
    """Element ids unique within one page: ``<prefix><kind><n>`` with a counter of its own.

    Examples
    --------
    >>> ids = IdSource()
    >>> ids.new("clip"), ids.new("clip"), IdSource().new("clip")
    ('lsclip1', 'lsclip2', 'lsclip1')
    """

    def __init__(self, prefix: str = "ls") -> None:
        self.prefix = prefix
        self._n = 0

    def new(self, kind: str) -> str:
        self._n += 1
        return f"{self.prefix}{kind}{self._n}"


def _plain(value: object) -> str:
    """An attribute value as plain text (a float finite to full precision, else inf / -inf / nan)."""
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ("inf" if value > 0 else "-inf" if value < 0 else "nan")
    return str(value)


def attrs(values: Mapping[str, object]) -> Markup:
    """Render attributes as ``name="value"`` pairs, escaping every value; None values are left out.

    A value is always treated as text (a :class:`~markupsafe.Markup` value is escaped too).

    Examples
    --------
    >>> str(attrs({"class": "bar", "data-name": '<b>"x"</b>', "hidden": None}))
    'class="bar" data-name="&lt;b&gt;&#34;x&#34;&lt;/b&gt;"'
    """
    return Markup(" ").join(
        Markup('{}="{}"').format(str(name), escape(str.__str__(_plain(value))))
        for name, value in values.items()
        if value is not None
    )


def element(tag: str, attributes: Mapping[str, object], text: str | None = None) -> Markup:
    """One SVG/HTML element; attribute values and text are escaped, floats rounded to 2 decimals.

    Examples
    --------
    >>> str(element("text", {"x": 1.23456, "class": "tick"}, "a < b"))
    '<text x="1.23" class="tick">a &lt; b</text>'
    """
    rounded = {k: (f"{v:.2f}" if isinstance(v, float) and math.isfinite(v) else v) for k, v in attributes.items()}
    if text is None:
        return Markup("<{} {}/>").format(tag, attrs(rounded))
    return Markup("<{} {}>{}</{}>").format(tag, attrs(rounded), escape(str.__str__(str(text))), tag)


def fmt_number(v: float, digits: int = 3) -> str:
    """A short label for a tick value.

    Examples
    --------
    >>> fmt_number(0.25), fmt_number(1.0), fmt_number(1500.0), fmt_number(0.0001)
    ('0.25', '1', '1500', '1e-04')
    """
    if v == 0:
        return "0"
    a = abs(v)
    if a >= 1e5 or a < 1e-3:
        return f"{v:.0e}"
    if a >= 100:
        return f"{v:.0f}"
    return f"{v:.{digits}g}"


@dataclass
class Scale:
    """Map a data interval onto a pixel interval, linearly or on a log scale.

    Examples
    --------
    >>> Scale((0.0, 1.0), (10.0, 110.0))(0.5)
    60.0
    >>> round(Scale((1.0, 100.0), (0.0, 2.0), log=True)(10.0), 6)
    1.0
    """

    domain: tuple[float, float]
    range: tuple[float, float]
    log: bool = False

    def _t(self, v: float) -> float:
        return math.log10(v) if self.log else v

    def __call__(self, v: float) -> float:
        d0, d1 = self._t(self.domain[0]), self._t(self.domain[1])
        r0, r1 = self.range
        if d1 == d0:
            return (r0 + r1) / 2
        return r0 + (self._t(v) - d0) / (d1 - d0) * (r1 - r0)


@dataclass
class Chart:
    """One plot: a frame with x and y axes, into which marks are drawn in data coordinates.

    Parameters
    ----------
    x_domain, y_domain : (float, float)
        Data ranges shown.
    width, height : int
        Size of the whole SVG in pixels (it scales with the page).
    x_log, y_log : bool
        Log-scale axes.
    title, x_label, y_label : str
        Texts (escaped).
    css_class : str
        Extra class on the ``<svg>`` element.
    ids : IdSource, optional
        Where the chart's element ids come from; a page gives all its charts one source.
    """

    x_domain: tuple[float, float]
    y_domain: tuple[float, float]
    width: int = 420
    height: int = 300
    x_log: bool = False
    y_log: bool = False
    title: str = ""
    x_label: str = ""
    y_label: str = ""
    css_class: str = ""
    margin: tuple[int, int, int, int] = (34, 16, 44, 56)  # top, right, bottom, left
    x_ticks: Sequence[float] | None = None
    y_ticks: Sequence[float] | None = None
    x_tick_labels: Sequence[str] | None = None
    ids: IdSource | None = None
    _marks: list[Markup] = field(default_factory=list, repr=False)
    _overlay: list[Markup] = field(default_factory=list, repr=False)
    _n_rule_labels: int = field(default=0, repr=False)

    def __post_init__(self) -> None:
        top, right, bottom, left = self.margin
        self.left, self.right = left, self.width - right
        self.top, self.bottom = top, self.height - bottom
        self.sx = Scale(self.x_domain, (self.left, self.right), self.x_log)
        self.sy = Scale(self.y_domain, (self.bottom, self.top), self.y_log)
        if self.ids is None:
            self.ids = IdSource()

    # ---------------------------------------------------------------- marks

    def _clip_x(self, x: float) -> float:
        return min(max(self.sx(x), self.left), self.right)

    def _clip_y(self, y: float) -> float:
        return min(max(self.sy(y), self.top), self.bottom)

    @staticmethod
    def _shape(tag: str, a: Markup, tooltip: str | None) -> Markup:
        if tooltip:
            return Markup("<{} {}><title>{}</title></{}>").format(tag, a, str.__str__(str(tooltip)), tag)
        return Markup("<{} {}/>").format(tag, a)

    def line(
        self,
        xs: Iterable[float],
        ys: Iterable[float],
        cls: str = "series",
        data: Mapping[str, object] | None = None,
        tooltip: str | None = None,
    ) -> None:
        """A polyline through finite points (NaN points break nothing: they are skipped)."""
        pts = [
            f"{self.sx(x):.2f},{self.sy(y):.2f}"
            for x, y in zip(xs, ys, strict=True)
            if math.isfinite(x) and math.isfinite(y)
        ]
        if len(pts) >= 2:
            a = attrs({"class": cls, "points": " ".join(pts), **(data or {})})
            self._marks.append(self._shape("polyline", a, tooltip))

    def segment(
        self, x0: float, y0: float, x1: float, y1: float, cls: str = "segment", tooltip: str | None = None
    ) -> None:
        """A straight line between two data points."""
        a = attrs(
            {
                "class": cls,
                "x1": f"{self.sx(x0):.2f}",
                "y1": f"{self.sy(y0):.2f}",
                "x2": f"{self.sx(x1):.2f}",
                "y2": f"{self.sy(y1):.2f}",
            }
        )
        self._marks.append(self._shape("line", a, tooltip))

    def rect(
        self,
        x0: float,
        x1: float,
        y0: float,
        y1: float,
        cls: str = "bar",
        data: Mapping[str, object] | None = None,
        tooltip: str | None = None,
    ) -> None:
        """A rectangle between two x and two y data values, with optional ``data-*`` attributes and tooltip."""
        px0, px1 = sorted((self._clip_x(x0), self._clip_x(x1)))
        py0, py1 = sorted((self._clip_y(y0), self._clip_y(y1)))
        a = attrs(
            {
                "class": cls,
                "x": f"{px0:.2f}",
                "y": f"{py0:.2f}",
                "width": f"{max(px1 - px0, 0.0):.2f}",
                "height": f"{max(py1 - py0, 0.0):.2f}",
                **(data or {}),
            }
        )
        self._marks.append(self._shape("rect", a, tooltip))

    def point(
        self,
        x: float,
        y: float,
        r: float = 4.0,
        cls: str = "marker",
        data: Mapping[str, object] | None = None,
        tooltip: str | None = None,
        clip: bool = True,
    ) -> None:
        """A dot of radius ``r`` pixels; with ``clip=False`` drawn over the plot frame, never cut at its edge."""
        a = attrs({"class": cls, "cx": f"{self.sx(x):.2f}", "cy": f"{self.sy(y):.2f}", "r": f"{r:.2f}", **(data or {})})
        (self._marks if clip else self._overlay).append(self._shape("circle", a, tooltip))

    def vline(self, x: float, cls: str = "rule", label: str = "", data: Mapping[str, object] | None = None) -> None:
        """A vertical rule across the plot at data ``x``, with an optional label at its top.

        Labels of successive rules are stacked so that rules close together stay readable.
        """
        px = self.sx(x)
        self._overlay.append(
            element(
                "line",
                {"class": cls, "x1": px, "x2": px, "y1": float(self.top), "y2": float(self.bottom), **(data or {})},
            )
        )
        if label:
            anchor = "end" if px > (self.left + self.right) / 2 else "start"
            dx = -4 if anchor == "end" else 4
            where = {"x": px + dx, "y": float(self.top + 12 + 12 * self._n_rule_labels), "text-anchor": anchor}
            self._n_rule_labels += 1
            self._overlay.append(element("text", {"class": cls + "-label rule-label", **where}, label))

    def hline(self, y: float, cls: str = "rule", label: str = "", label_side: str = "right") -> None:
        """A horizontal rule across the plot at data ``y``, its label at the ``label_side`` end."""
        py = self.sy(y)
        self._overlay.append(
            element("line", {"class": cls, "x1": self.left, "x2": self.right, "y1": f"{py:.2f}", "y2": f"{py:.2f}"})
        )
        if label:
            if label_side == "left":
                where = {"x": self.left + 4, "y": f"{py + 12:.2f}", "text-anchor": "start"}
            else:
                where = {"x": self.right - 4, "y": f"{py - 4:.2f}", "text-anchor": "end"}
            self._overlay.append(element("text", {"class": cls + "-label", **where}, label))

    def text(self, x: float, y: float, s: str, cls: str = "note", anchor: str = "middle", dy: float = 0.0) -> None:
        """Text at a data position (escaped)."""
        where = {"x": f"{self.sx(x):.2f}", "y": f"{self.sy(y) + dy:.2f}", "text-anchor": anchor}
        self._overlay.append(element("text", {"class": cls, **where}, s))

    def legend(self, items: Sequence[tuple[str, str] | tuple[str, str, str]], corner: str = "top-left") -> None:
        """A small legend of ``(css class, label[, kind])`` items, kind ``"box"`` (default), ``"line"`` or ``"dot"``."""
        x = self.left + 8 if corner.endswith("left") else self.right - 170
        y = self.top + 8 if corner.startswith("top") else self.bottom - 8 - 15 * len(items)
        for i, item in enumerate(items):
            cls, label = item[0], item[1]
            kind = item[2] if len(item) > 2 else "box"
            yy = y + 15 * i
            if kind == "line":
                box: dict[str, object] = {"x1": float(x), "x2": float(x + 14), "y1": yy + 4.5, "y2": yy + 4.5}
                self._overlay.append(element("line", {"class": cls + " swatch-line", **box}))
            elif kind == "dot":
                self._overlay.append(
                    element("circle", {"class": cls + " swatch", "cx": x + 7.0, "cy": yy + 4.5, "r": 4})
                )
            else:
                box = {"x": x, "y": yy, "width": 14, "height": 9}
                self._overlay.append(element("rect", {"class": cls + " swatch", **box}))
            self._overlay.append(element("text", {"class": "legend", "x": x + 19, "y": yy + 8}, label))

    # ---------------------------------------------------------------- output

    def _axes(self) -> tuple[list[Markup], Markup, list[Markup]]:
        """Grid and ticks (drawn under the marks), the plot frame, and the titles."""
        out = []
        xt = list(self.x_ticks) if self.x_ticks is not None else nice_ticks(*self.x_domain, log=self.x_log)
        yt = list(self.y_ticks) if self.y_ticks is not None else nice_ticks(*self.y_domain, n=5, log=self.y_log)
        labels = list(self.x_tick_labels) if self.x_tick_labels is not None else [fmt_number(v) for v in xt]
        for v in yt:
            py = self.sy(v)
            if self.top - 0.5 <= py <= self.bottom + 0.5:
                out.append(element("line", {"class": "grid", "x1": self.left, "x2": self.right, "y1": py, "y2": py}))
                where = {"x": self.left - 6, "y": py + 4, "text-anchor": "end"}
                out.append(element("text", {"class": "tick", **where}, fmt_number(v)))
        for v, label in zip(xt, labels, strict=True):
            px = self.sx(v)
            if self.left - 0.5 <= px <= self.right + 0.5:
                mark = {"x1": px, "x2": px, "y1": self.bottom, "y2": self.bottom + 4}
                out.append(element("line", {"class": "tickmark", **mark}))
                where = {"x": px, "y": self.bottom + 16, "text-anchor": "middle"}
                out.append(element("text", {"class": "tick", **where}, label))
        box = {"x": self.left, "y": self.top, "width": self.right - self.left, "height": self.bottom - self.top}
        frame_rect = element("rect", {"class": "plot-frame", **box})
        titles = []
        if self.x_label:
            where = {"x": (self.left + self.right) / 2, "y": self.height - 8, "text-anchor": "middle"}
            titles.append(element("text", {"class": "axis-label", **where}, self.x_label))
        if self.y_label:
            cy = (self.top + self.bottom) / 2
            where = {"x": 14, "y": cy, "text-anchor": "middle", "transform": f"rotate(-90 14 {cy:.1f})"}
            titles.append(element("text", {"class": "axis-label", **where}, self.y_label))
        if self.title:
            titles.append(element("text", {"class": "chart-title", "x": self.left, "y": 20}, self.title))
        return out, frame_rect, titles

    def to_svg(self, data: Mapping[str, object] | None = None) -> Markup:
        """The chart as one ``<svg>`` element (``data`` adds attributes to it)."""
        head = attrs(
            {
                "xmlns": "http://www.w3.org/2000/svg",
                "class": f"chart {self.css_class}".strip(),
                "viewBox": f"0 0 {self.width} {self.height}",
                "width": self.width,
                "height": self.height,
                "role": "img",
                "aria-label": self.title or None,
                **(data or {}),
            }
        )
        assert self.ids is not None
        clip_id = self.ids.new("clip")
        box = {"x": self.left, "y": self.top, "width": self.right - self.left, "height": self.bottom - self.top}
        axes, frame, titles = self._axes()
        body = [
            Markup("<defs><clipPath {}>{}</clipPath></defs>").format(attrs({"id": clip_id}), element("rect", box)),
            *axes,
            Markup("<g {}>").format(attrs({"clip-path": f"url(#{clip_id})"})),
            *self._marks,
            Markup("</g>"),
            frame,
            *self._overlay,
            *titles,
        ]
        return Markup("<svg {}>").format(head) + Markup("").join(body) + Markup("</svg>")
