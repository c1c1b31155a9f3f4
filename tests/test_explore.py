"""``logitscope.explore``: its signature names every Dashboard option, and each one reaches the dashboard.

Numbers are checked against scikit-learn's ``confusion_matrix`` on the bundled digits data.
"""

from __future__ import annotations

import inspect
from pathlib import Path

import numpy as np
import pytest
from sklearn.metrics import confusion_matrix as sk_confusion_matrix

import logitscope
from logitscope import InputTypeError, LogitFrame, ParameterError
from logitscope.relabel_store import default_path
from logitscope.widgets import Dashboard, SharedState


def test_signature_is_explicit_and_covers_the_dashboard() -> None:
    params = inspect.signature(logitscope.explore).parameters
    assert not any(p.kind is inspect.Parameter.VAR_KEYWORD for p in params.values())  # no **options to hide behind
    assert all(p.kind is inspect.Parameter.KEYWORD_ONLY for name, p in params.items() if name != "frame")
    dashboard = inspect.signature(Dashboard.__init__).parameters
    named = {n for n, p in dashboard.items() if n != "self" and p.kind is not inspect.Parameter.VAR_KEYWORD}
    assert named <= set(params), f"explore() lacks Dashboard options {named - set(params)}"
    for name in named - {"frame"}:
        assert params[name].default == dashboard[name].default, name
        assert params[name].annotation != inspect.Parameter.empty, name
    doc = inspect.getdoc(logitscope.explore) or ""
    for name in params:
        assert f"\n{name} :" in doc, f"{name} is not described in the docstring"
    assert "Examples\n--------\n>>>" in doc


def test_options_reach_the_dashboard(mailroom: LogitFrame, tmp_path: Path) -> None:
    state = SharedState(mailroom.n_samples)
    dash = logitscope.explore(
        mailroom, relabel_path=tmp_path / "marks.json", max_classes=4, state=state, label="epoch 3", keep_frames=2
    )
    assert isinstance(dash, Dashboard) and dash.state is state and dash.keep_frames == 2
    assert dash.history.shape[0] == 1 and "epoch 3" in dash.history.to_string()
    assert dash.queue.path == str((tmp_path / "marks.json").resolve())
    # four classes on their own plus "other": the four with the most errors in scikit-learn's matrix
    reference = sk_confusion_matrix(mailroom.labels, mailroom.logits.argmax(axis=1), labels=range(10))
    off = reference - np.diag(np.diag(reference))
    errors = off.sum(axis=0) + off.sum(axis=1)
    shown = np.sort(np.argsort(-errors, kind="stable")[:4])
    grid = dash.confusion.aggregated
    assert grid.shape == (5, 5) and dash.confusion.shown_classes.tolist() == shown.tolist()
    np.testing.assert_array_equal(grid[:4, :4], reference[np.ix_(shown, shown)])
    assert int(grid.sum()) == int(reference.sum()) == mailroom.n_samples
    state.select([3, 9], origin="test")
    assert dash.selected.tolist() == [3, 9]


def test_default_relabel_file_is_named_after_the_data(mailroom: LogitFrame, tmp_path: Path, monkeypatch) -> None:
    monkeypatch.chdir(tmp_path)
    dash = logitscope.explore(mailroom)
    assert Path(dash.queue.path) == default_path(mailroom, tmp_path).resolve()
    assert Path(dash.queue.path).name.startswith("relabel-zero-to-nine-1797-samples-")


def test_mistakes_fail_clearly(mailroom: LogitFrame, tmp_path: Path) -> None:
    with pytest.raises(TypeError, match="relabel_pth"):  # a misspelt option is not swallowed
        logitscope.explore(mailroom, relabel_pth=tmp_path / "x.json")  # type: ignore[call-arg]
    with pytest.raises(InputTypeError, match="LogitFrame"):
        logitscope.explore(np.zeros((3, 2)))  # type: ignore[arg-type]
    with pytest.raises(ParameterError, match=r"max_classes must lie in \[2, 1000\]"):
        logitscope.explore(mailroom, relabel_path=tmp_path / "m.json", max_classes=0)
    with pytest.raises(ParameterError, match="keep_frames must be a positive integer"):
        logitscope.explore(mailroom, relabel_path=tmp_path / "m.json", keep_frames=0)
    with pytest.raises(ParameterError, match="1797"):
        logitscope.explore(mailroom, relabel_path=tmp_path / "m.json", state=SharedState(10))
