"""Every example notebook runs top to bottom, and is committed without outputs.

Each ``example_notebooks/*.ipynb`` is executed with nbclient in a python3 kernel whose working
directory is a fresh temporary folder (the notebooks write a relabel list and a report beside
themselves; a leftover file from an earlier run must not change what a run sees); any cell error
fails the test. Widgets render nothing here
(no frontend), but their Python side runs. The committed files must carry no outputs and no
execution counts, so diffs stay reviewable and no data leaks into git.
"""

from __future__ import annotations

from pathlib import Path

import nbformat
import pytest

NOTEBOOK_DIR = Path(__file__).resolve().parents[1] / "example_notebooks"
NOTEBOOKS = sorted(NOTEBOOK_DIR.glob("*.ipynb"))
CELL_TIMEOUT_S = 300


def _ids(paths: list[Path]) -> list[str]:
    return [p.name for p in paths]


@pytest.mark.parametrize("path", NOTEBOOKS, ids=_ids(NOTEBOOKS))
def test_notebook_is_stripped(path: Path) -> None:
    nb = nbformat.read(path, as_version=4)
    nbformat.validate(nb)
    dirty = [
        (i, len(c.get("outputs", [])), c.get("execution_count"))
        for i, c in enumerate(nb.cells)
        if c.cell_type == "code" and (c.get("outputs") or c.get("execution_count") is not None)
    ]
    assert dirty == [], f"{path.name}: cells with outputs / execution counts (index, n_outputs, count): {dirty}"
    assert "widgets" not in nb.metadata, f"{path.name}: saved widget state in metadata; strip it"


@pytest.mark.parametrize("path", NOTEBOOKS, ids=_ids(NOTEBOOKS))
def test_notebook_runs(path: Path, tmp_path: Path) -> None:
    from nbclient import NotebookClient
    from nbclient.exceptions import CellExecutionError

    nb = nbformat.read(path, as_version=4)
    client = NotebookClient(
        nb,
        timeout=CELL_TIMEOUT_S,
        kernel_name="python3",
        allow_errors=False,
        resources={"metadata": {"path": str(tmp_path)}},
    )
    try:
        client.execute()
    except CellExecutionError as exc:
        pytest.fail(f"{path.name} failed:\n{exc}", pytrace=False)
    # nbclient ran every code cell: each has an execution count now
    unrun = [i for i, c in enumerate(nb.cells) if c.cell_type == "code" and c.source.strip() and not c.execution_count]
    assert unrun == [], f"{path.name}: cells not executed: {unrun}"
