"""ShownWhenVisible: a widget that draws its child only once it is laid out on the page (js/gate.js).

bqplot measures a figure's box when it draws it. A figure drawn while its
notebook is hidden (a background JupyterLab tab restored after a page
reload) measures 0 x 0, draws its plot area at a negative size and fills the
browser console with errors. The dashboard's views sit inside this gate: the
browser builds their views only when the gate's own box has a width.
"""

from __future__ import annotations

from typing import Any

import anywidget
import ipywidgets as widgets
import traitlets

from ._assets import esm

__all__ = ["ShownWhenVisible"]


class ShownWhenVisible(anywidget.AnyWidget):
    """Hold ``child`` and draw it in the browser once this widget has a size on the page.

    Examples
    --------
    >>> import ipywidgets as widgets
    >>> gate = ShownWhenVisible(widgets.Label("hello"))
    >>> gate.children[0].value, gate.shown
    ('hello', False)
    """

    _esm = esm("gate.js")

    child = traitlets.Instance(widgets.DOMWidget, help="the widget drawn once visible").tag(
        sync=True, **widgets.widget_serialization
    )
    shown = traitlets.Bool(False, help="set by the browser once the child is drawn").tag(sync=True)

    def __init__(self, child: widgets.DOMWidget, **kwargs: Any) -> None:
        super().__init__(child=child, **kwargs)

    @property
    def children(self) -> tuple[widgets.DOMWidget]:
        """The one child (so walkers over widget trees find what the gate holds)."""
        return (self.child,)
