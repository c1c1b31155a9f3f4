"""SyncBundle: many widgets' held state updates sent to the browser in one message (js/bundle.js).

A new selection changes a dozen widgets of the linked views. ipywidgets sends
one message per widget; the browser handles each in a task of its own and
draws a frame between two of them, so the last view follows the selection
long after the kernel is done. :meth:`SharedState.batch` holds those updates
(``hold_sync``) and, once the browser's module has said it is ready, gives
them to this widget, which sends them as one message. The module applies
every update through its model's own "update" handler in one task: the same
states, deserialised the same way, drawn in one frame.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import anywidget
import traitlets
from ipywidgets.widgets.widget import _remove_buffers  # the split ipywidgets itself applies to every update

from ._assets import esm

__all__ = ["SyncBundle"]


class SyncBundle(anywidget.AnyWidget):
    """Send the held state updates of several widgets as one message.

    Nothing is displayed: the widget's model exists in every page that shows
    the kernel's widgets, and its module sets ``ready`` when it is loaded.
    Until then (or with no browser at all) the widgets send their own messages.

    Examples
    --------
    >>> import ipywidgets as widgets
    >>> label = widgets.Label("before")
    >>> bundle = SyncBundle()
    >>> with label.hold_sync():
    ...     label.value = "after"
    ...     sent = bundle.send_held([label])
    >>> sent  # no page has said it is ready: the label sends its own message
    0
    """

    _esm = esm("bundle.js")

    ready = traitlets.Bool(False, help="set by the browser module once it can apply bundles").tag(sync=True)

    def send_held(self, held: Sequence[Any]) -> int:
        """Send the updates ``held`` widgets hold (inside their ``hold_sync``) in one message.

        The updates sent are taken off the widgets' queues, so leaving ``hold_sync`` sends nothing
        more for them. Returns how many widgets' updates were sent; 0 (and nothing taken) when no
        page is ready or this widget has no channel to the browser.
        """
        if not self.ready or self.comm is None:
            return 0
        updates: list[dict[str, Any]] = []
        buffers: list[Any] = []
        for w in held:
            keys = set(getattr(w, "_states_to_send", ()))
            if not keys or getattr(w, "comm", None) is None:
                continue
            state = w.get_state(keys)
            w._states_to_send.clear()
            if w._property_lock:  # as Widget.send_state: keep the lock equal to what the browser will hold
                for name, value in state.items():
                    if name in w._property_lock:
                        w._property_lock[name] = value
            state, paths, bufs = _remove_buffers(state)
            updates.append({"model_id": w.model_id, "state": state, "buffer_paths": paths})
            buffers.extend(bufs)
        if updates:
            self.send({"kind": "updates", "updates": updates}, buffers)
        return len(updates)
