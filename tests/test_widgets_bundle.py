"""One message for a selection's updates (SyncBundle): the same states as ipywidgets' own messages.

Reference: ipywidgets' own path, ``Widget.send_state`` (one "update" message per widget, buffers
split off by ``_remove_buffers``), recorded for the same selection of the same dashboard; the
bundle must carry exactly those states and buffers, and the widgets must send nothing themselves.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pytest
from ipywidgets.widgets.widget import _put_buffers, _remove_buffers

import logitscope
from logitscope import LogitFrame
from logitscope.widgets.bundle import SyncBundle


class Recorder:
    """A stand-in for a widget's channel to the browser: keeps what is sent."""

    kernel = object()  # ipywidgets sends only over a channel with a kernel

    def __init__(self, log: list[tuple[str, dict[str, Any], list[Any]]], model_id: str) -> None:
        self.log, self.comm_id = log, model_id

    def send(self, data: dict[str, Any], buffers: list[Any] | None = None, **_: Any) -> None:
        self.log.append((self.comm_id, data, list(buffers or [])))

    def close(self, *a: Any, **k: Any) -> None:
        pass

    def on_msg(self, *a: Any, **k: Any) -> None:
        pass


def _explore(frame: LogitFrame, path: Any) -> tuple[Any, list[Any]]:
    """A dashboard and every widget it made, in the order it made them."""
    from ipywidgets.widgets.widget import _instances

    before = set(_instances)
    dash = logitscope.explore(frame, relabel_path=path)
    return dash, [w for key, w in list(_instances.items()) if key not in before]


def _renamed(states: dict[int, Any], names: dict[str, str]) -> dict[int, Any]:
    def rename(value: Any) -> Any:
        if isinstance(value, str) and value.startswith("IPY_MODEL_"):
            return "IPY_MODEL_" + names.get(value[len("IPY_MODEL_") :], value)
        if isinstance(value, dict):
            return {k: rename(v) for k, v in value.items()}
        if isinstance(value, list | tuple):
            return type(value)(rename(v) for v in value)
        return value

    return {i: rename(s) for i, s in states.items()}


def _joined(state: dict[str, Any], paths: list[Any], buffers: list[Any]) -> dict[str, Any]:
    """The state with its buffers put back, bytes in place of memoryviews (comparable with ==)."""
    import copy

    state = copy.deepcopy(state)
    _put_buffers(state, paths, [bytes(memoryview(b)) for b in buffers])
    return state


def test_a_selection_leaves_as_one_message_holding_the_states_ipywidgets_would_send(
    mailroom: LogitFrame, tmp_path
) -> None:
    # two dashboards built alike get the same selection: the first sends as ipywidgets does, the second
    # through a bundle a page said it can apply; widgets pair up by the order they were made in
    own_dash, own_widgets = _explore(mailroom, tmp_path / "a.json")
    dash, made = _explore(mailroom, tmp_path / "b.json")
    assert [type(w).__name__ for w in own_widgets] == [
        type(w).__name__ for w in made
    ]  # anywidget subclasses per instance
    pair = {w.model_id: i for i, w in enumerate(made)}
    own_log: list[tuple[str, dict[str, Any], list[Any]]] = []
    log: list[tuple[str, dict[str, Any], list[Any]]] = []
    for i, w in enumerate(own_widgets):
        w.comm = Recorder(own_log, str(i))
    for w in made:
        w.comm = Recorder(log, w.model_id)
    bundle = dash.state.bundle
    assert isinstance(bundle, SyncBundle) and not bundle.ready and own_dash.state.bundle is not bundle
    bundle.ready = True
    wrong = np.flatnonzero(~mailroom.scores()["correct"].to_numpy(dtype=bool))[:40]

    own_dash.state.select(wrong, origin="test")
    own = {int(i): _joined(d["state"], d["buffer_paths"], b) for i, d, b in own_log if d["method"] == "update"}
    assert len(own) >= 4  # bars, outline, texts, scatter image at least

    log.clear()  # the bundle's own "ready" update
    dash.state.select(wrong, origin="test")
    assert [(mid, d["method"]) for mid, d, _ in log] == [(bundle.model_id, "custom")]
    _, data, buffers = log[0]
    content = data["content"]
    assert content["kind"] == "updates"
    got, start = {}, 0
    for u in content["updates"]:
        n = len(u["buffer_paths"])
        got[pair[u["model_id"]]] = _joined(u["state"], u["buffer_paths"], buffers[start : start + n])
        start += n
    assert start == len(buffers)
    # widget references name a widget by its id: name both sides' by the order the widgets were made in
    own = _renamed(own, {str(i): str(i) for i in range(len(made))})
    got = _renamed(got, {w.model_id: str(i) for i, w in enumerate(made)})
    assert got == own  # the same widgets, the same states, the same bytes
    assert list(got) == [i for i, d, _ in ((int(i), d, b) for i, d, b in own_log) if d["method"] == "update"]


def test_without_a_ready_page_the_widgets_send_their_own_messages() -> None:
    import ipywidgets as widgets

    log: list[tuple[str, dict[str, Any], list[Any]]] = []
    label, bundle = widgets.Label("before"), SyncBundle()
    label.comm, bundle.comm = Recorder(log, label.model_id), Recorder(log, bundle.model_id)
    with label.hold_sync():
        label.value = "after"
        assert bundle.send_held([label]) == 0
    assert [(mid, d["method"], d["state"]) for mid, d, _ in log] == [(label.model_id, "update", {"value": "after"})]


def test_bundled_arrays_keep_their_bytes() -> None:
    # a bqplot mark's arrays travel as binary buffers (bqplot's array_serialization); the bundle
    # carries them unchanged, and a widget with nothing held is left out
    bq = pytest.importorskip("bqplot")
    import ipywidgets as widgets

    log: list[tuple[str, dict[str, Any], list[Any]]] = []
    x = bq.LinearScale()
    lines = bq.Lines(x=np.arange(3.0), y=np.zeros(3), scales={"x": x, "y": bq.LinearScale()})
    idle, bundle = widgets.Label("idle"), SyncBundle(ready=True)
    for w in (lines, idle, bundle):
        w.comm = Recorder(log, w.model_id)
    y = np.array([0.5, 1.5, 2.5])
    with lines.hold_sync(), idle.hold_sync():
        lines.y = y
        assert bundle.send_held([lines, idle]) == 1
    assert len(log) == 1
    (u,) = log[0][1]["content"]["updates"]
    state, paths, bufs = _remove_buffers(lines.get_state(["y"]))  # reference: ipywidgets' own split
    assert u["model_id"] == lines.model_id and u["state"] == state and u["buffer_paths"] == paths
    assert [bytes(b) for b in log[0][2]] == [bytes(b) for b in bufs] == [y.tobytes()]
