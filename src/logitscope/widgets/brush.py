"""RectangleBrush: a rectangle brush over a bqplot figure, drawn in the browser, sent once on release (js/brush.js).

bqplot's rectangle brush sends its extents to the kernel on every mouse move
while the button is down; the widget manager keeps one message of a widget
in flight at a time, so the release, the one message that selects, waits in
the browser until the kernel has answered the move before it. This brush
draws its rectangle in the browser alone and sends ``box`` once, when the
mouse is released (an empty box for a click: the brush removed). Given the
picture of every point (``points``), the browser paints the brushed selection
at once (the points inside the box at full strength, the rest at ``faded``)
until the view's own picture, computed in Python over every row, arrives. The figure
is drawn inside the brush widget, with a layer over it that takes the mouse
while ``active`` and lets it through to the figure's own interaction (a lasso)
otherwise.
"""

from __future__ import annotations

from typing import Any

import anywidget
import bqplot as bq
import ipywidgets as widgets
import traitlets

from ._assets import esm

__all__ = ["RectangleBrush"]


class RectangleBrush(anywidget.AnyWidget):
    """A rectangle brush drawn over ``figure``; ``box`` holds its extents in data units (``[]``: none).

    ``x_range`` and ``y_range`` are the data extents the figure's first image
    mark spans (its ``x`` and ``y``; the scatter's painted points): the browser
    maps pixels to data through that mark's box on the page. Setting ``box`` from
    Python draws that rectangle (``[]`` removes it); the browser sets it when
    the mouse is released.

    Examples
    --------
    >>> import bqplot as bq
    >>> brush = RectangleBrush(bq.Figure(), x_range=(0.0, 1.0), y_range=(0.0, 2.0))
    >>> seen = []
    >>> brush.observe(lambda change: seen.append(brush.extents), "box")
    >>> brush.box = [0.6, 0.2, 0.5, 1.5]  # what the browser sends on release
    >>> seen
    [((0.2, 0.6), (0.5, 1.5))]
    >>> brush.box = []; brush.extents is None
    True
    """

    _esm = esm("brush.js")

    child = traitlets.Instance(bq.Figure, help="the figure brushed").tag(sync=True, **widgets.widget_serialization)
    x_range = traitlets.List(traitlets.Float(), [0.0, 1.0], minlen=2, maxlen=2).tag(sync=True)
    y_range = traitlets.List(traitlets.Float(), [0.0, 1.0], minlen=2, maxlen=2).tag(sync=True)
    # the browser's release is not echoed back: it drew the rectangle itself
    box = traitlets.List(traitlets.Float(), [], help="x0, x1, y0, y1 in data units, or []").tag(
        sync=True, echo_update=False
    )
    active = traitlets.Bool(True, help="the layer takes the mouse (False: the figure's own interaction)").tag(sync=True)
    points = traitlets.Instance(
        widgets.Image, allow_none=True, help="every point drawn at full strength, over x_range x y_range"
    ).tag(sync=True, **widgets.widget_serialization)
    faded = traitlets.Float(0.5, help="opacity of the points outside a selection").tag(sync=True)

    def __init__(self, figure: bq.Figure, **kwargs: Any) -> None:
        super().__init__(child=figure, **kwargs)

    @traitlets.validate("box")
    def _valid_box(self, proposal: Any) -> list[float]:
        box = [float(v) for v in proposal["value"]]
        if len(box) not in (0, 4):
            raise traitlets.TraitError(f"box holds x0, x1, y0, y1 or nothing, got {len(box)} numbers")
        return box

    @property
    def extents(self) -> tuple[tuple[float, float], tuple[float, float]] | None:
        """``((x0, x1), (y0, y1))`` of the rectangle, each sorted; None without one."""
        if len(self.box) != 4:
            return None
        x0, x1, y0, y1 = self.box
        return (min(x0, x1), max(x0, x1)), (min(y0, y1), max(y0, y1))
