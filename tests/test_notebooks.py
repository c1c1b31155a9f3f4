"""Every example notebook runs top to bottom, and is committed without outputs.

Each ``example_notebooks/*.ipynb`` is executed with nbclient in a python3 kernel whose working
directory is a fresh temporary folder (the notebooks write a relabel list and a report beside
themselves; a leftover file from an earlier run must not change what a run sees); any cell error
fails the test. Widgets render nothing here
(no frontend), but their Python side runs. The committed files must carry no outputs and no
execution counts, so diffs stay reviewable and no data leaks into git.

"Committed" is read from git where there is a checkout: the stripped check reads the notebook as
git's index holds it (``git show :<path>``), so outputs that JupyterLab autosaved into the working
file of someone who opened it there do not fail the suite until they are staged. Outside a git
checkout (an unpacked sdist), or for a notebook git does not track yet, it reads the file.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import nbformat
import pytest

NOTEBOOK_DIR = Path(__file__).resolve().parents[1] / "example_notebooks"
NOTEBOOKS = sorted(NOTEBOOK_DIR.glob("*.ipynb"))
CELL_TIMEOUT_S = 300


def _ids(paths: list[Path]) -> list[str]:
    return [p.name for p in paths]


def committed_text(path: Path) -> tuple[str, str]:
    """The notebook as git's index holds it, else the file's text; and which of the two was read."""
    git = shutil.which("git")
    if git is not None:
        shown = subprocess.run(
            [git, "-C", str(path.parent), "show", f":./{path.name}"], capture_output=True, check=False, timeout=60
        )
        if shown.returncode == 0:
            return shown.stdout.decode("utf-8"), "git index"
    return path.read_text(encoding="utf-8"), "file"


@pytest.mark.parametrize("path", NOTEBOOKS, ids=_ids(NOTEBOOKS))
def test_notebook_is_stripped(path: Path) -> None:
    text, where = committed_text(path)
    nb = nbformat.reads(text, as_version=4)
    nbformat.validate(nb)
    dirty = [
        (i, len(c.get("outputs", [])), c.get("execution_count"))
        for i, c in enumerate(nb.cells)
        if c.cell_type == "code" and (c.get("outputs") or c.get("execution_count") is not None)
    ]
    assert dirty == [], (
        f"{path.name} ({where}): cells with outputs / execution counts (index, n_outputs, count): {dirty}"
    )
    assert "widgets" not in nb.metadata, f"{path.name} ({where}): saved widget state in metadata; strip it"


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
