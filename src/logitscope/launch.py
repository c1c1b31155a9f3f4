"""``logitscope demo``: JupyterLab on a working copy of the bundled example notebooks.

The example notebooks are kept in the repository's ``example_notebooks/`` folder
without outputs. Opening them there lets JupyterLab autosave outputs into
tracked files, so the demo opens copies instead: :func:`prepare_demo` copies
them into a working folder (``./logitscope-demo`` unless told otherwise) and
:func:`jupyter_command` builds the command that starts JupyterLab on one of
them. An installed wheel carries the notebooks as ``logitscope/example_notebooks``
(pyproject force-includes the folder); an editable install reads them from
``<repo>/example_notebooks``.

A copy the user has edited is never overwritten. The folder holds a small
record (``.logitscope-demo.json``) of what was copied; a copy whose cells still
read as copied is brought up to the installed version, a copy whose cells differ
is kept and reported, and only ``reset=True`` replaces it, after renaming the
edited copy to a backup beside it. Outputs and execution counts do not count as
edits (JupyterLab saves them on its own).

As root, JupyterLab refuses to start without ``--allow-root``; the command adds
it when the effective user is root and only then.
"""

from __future__ import annotations

import hashlib
import json
import os
import shlex
import shutil
import subprocess
import sys
from dataclasses import dataclass
from datetime import datetime
from importlib.util import find_spec
from pathlib import Path
from typing import Any, Literal, TextIO

from ._atomic import atomic_write
from .errors import FileFormatError, ParameterError

__all__ = [
    "DEFAULT_FOLDER",
    "DEMO_NOTEBOOKS",
    "CopyResult",
    "bundled_notebooks",
    "cell_digest",
    "jupyter_command",
    "prepare_demo",
    "run_demo",
]

#: demo name -> notebook file name
DEMO_NOTEBOOKS: dict[str, str] = {"mailroom": "mailroom_digits.ipynb", "helpdesk": "helpdesk_tickets.ipynb"}
#: the working folder, relative to the current directory, when none is given
DEFAULT_FOLDER = "logitscope-demo"
_RECORD = ".logitscope-demo.json"

Action = Literal["copied", "unchanged", "updated", "kept", "replaced"]


@dataclass(frozen=True)
class CopyResult:
    """What :func:`prepare_demo` did with one notebook.

    Attributes
    ----------
    path : Path
        The working copy.
    action : str
        ``"copied"`` (there was none), ``"unchanged"`` (its cells are the
        installed version's), ``"updated"`` (an unedited copy of an older
        version, replaced), ``"kept"`` (an edited copy, left as it is) or
        ``"replaced"`` (an edited copy moved to ``backup``, a fresh copy written).
    backup : Path or None
        Where an edited copy went when it was replaced.
    """

    path: Path
    action: Action
    backup: Path | None = None

    @property
    def message(self) -> str:
        """One line for the user about this copy."""
        name = self.path.name
        if self.action == "copied":
            return f"copied the demo notebook to {self.path}"
        if self.action == "unchanged":
            return f"using the demo notebook {self.path}"
        if self.action == "updated":
            return f"updated {self.path} to this version's notebook (you had not edited it)"
        if self.action == "kept":
            return (
                f"kept your edited {self.path}; `logitscope demo --reset` renames it to a backup "
                f"and copies this version's {name}"
            )
        return f"moved your edited copy to {self.backup} and copied this version's {name}"


def bundled_notebooks() -> Path:
    """The folder holding the example notebooks shipped with the package.

    Examples
    --------
    >>> sorted(p.name for p in bundled_notebooks().glob("*.ipynb"))
    ['helpdesk_tickets.ipynb', 'mailroom_digits.ipynb']
    """
    installed = Path(__file__).resolve().parent / "example_notebooks"
    if installed.is_dir():
        return installed
    source = Path(__file__).resolve().parents[2] / "example_notebooks"
    if source.is_dir():
        return source
    raise FileFormatError(f"the example notebooks are missing: neither {installed} nor {source} exists")


def cell_digest(notebook: dict[str, Any]) -> str:
    """A digest of a notebook's cell types and sources (outputs, counts and metadata left out).

    Two notebooks with the same digest differ at most in what running them or
    opening them in JupyterLab changes.

    Examples
    --------
    >>> a = {"cells": [{"cell_type": "code", "source": "1 + 1", "outputs": []}]}
    >>> b = {"cells": [{"cell_type": "code", "source": ["1 + 1"], "outputs": [{"output_type": "stream"}]}]}
    >>> cell_digest(a) == cell_digest(b), cell_digest(a) == cell_digest({"cells": []})
    (True, False)
    """
    cells = []
    for cell in notebook.get("cells", []):
        source = cell.get("source", "")
        cells.append([cell.get("cell_type", ""), "".join(source) if isinstance(source, list) else str(source)])
    return hashlib.sha256(json.dumps(cells, ensure_ascii=False).encode()).hexdigest()


def _digest_of(path: Path) -> str | None:
    """The cell digest of the notebook at ``path``; None when it is not a readable notebook."""
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError):
        return None
    return cell_digest(data) if isinstance(data, dict) else None


def _read_record(folder: Path) -> dict[str, str]:
    try:
        data = json.loads((folder / _RECORD).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError):
        return {}
    copied = data.get("copied") if isinstance(data, dict) else None
    return {str(k): str(v) for k, v in copied.items()} if isinstance(copied, dict) else {}


def _write_record(folder: Path, copied: dict[str, str]) -> None:
    with atomic_write(folder / _RECORD, "w") as fh:
        json.dump({"format": "logitscope-demo-folder", "copied": copied}, fh, indent=1, sort_keys=True)
        fh.write("\n")


def _copy(source: Path, target: Path) -> None:
    data = source.read_bytes()
    with atomic_write(target, "wb") as fh:
        fh.write(data)


def _backup_name(path: Path) -> Path:
    stamp = datetime.now().strftime("%Y%m%d-%H%M%S")
    candidate = path.with_name(f"{path.stem}.edited-{stamp}{path.suffix}")
    i = 1
    while candidate.exists():
        i += 1
        candidate = path.with_name(f"{path.stem}.edited-{stamp}-{i}{path.suffix}")
    return candidate


def prepare_demo(folder: str | os.PathLike[str] = DEFAULT_FOLDER, *, reset: bool = False) -> list[CopyResult]:
    """Copy the bundled example notebooks into ``folder``, never overwriting an edited copy.

    Parameters
    ----------
    folder : str or path-like, default ``"logitscope-demo"``
        The working folder; made if missing.
    reset : bool, default False
        Replace edited copies with the installed version; each edited copy is
        first renamed to ``<name>.edited-<date>-<time>.ipynb`` beside it.

    Returns
    -------
    list of CopyResult
        One per notebook, in the order of :data:`DEMO_NOTEBOOKS`.

    Raises
    ------
    FileFormatError
        When ``folder`` exists and is not a folder.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp()) / "demo"
    >>> [r.action for r in prepare_demo(folder)]
    ['copied', 'copied']
    >>> nb = folder / "mailroom_digits.ipynb"
    >>> _ = nb.write_text(nb.read_text().replace("Mail room", "My mail room"))
    >>> [r.action for r in prepare_demo(folder)]  # the edited copy stays as it is
    ['kept', 'unchanged']
    >>> "My mail room" in nb.read_text()
    True
    """
    target_dir = Path(folder)
    if target_dir.exists() and not target_dir.is_dir():
        raise FileFormatError(f"the demo folder {target_dir} exists and is not a folder")
    target_dir.mkdir(parents=True, exist_ok=True)
    source_dir = bundled_notebooks()
    record = _read_record(target_dir)
    results: list[CopyResult] = []
    for name in DEMO_NOTEBOOKS.values():
        source, target = source_dir / name, target_dir / name
        bundled = _digest_of(source)
        if bundled is None:
            raise FileFormatError(f"the bundled notebook {source} cannot be read as a notebook")
        if not target.exists():
            _copy(source, target)
            results.append(CopyResult(target, "copied"))
        else:
            current = _digest_of(target)
            if current == bundled:
                results.append(CopyResult(target, "unchanged"))
            elif current is not None and current == record.get(name):
                _copy(source, target)  # the user never edited it: only this version's cells are new
                results.append(CopyResult(target, "updated"))
            elif reset:
                backup = _backup_name(target)
                os.replace(target, backup)
                _copy(source, target)
                results.append(CopyResult(target, "replaced", backup))
            else:
                results.append(CopyResult(target, "kept"))
                continue  # the record keeps what was copied last
        record[name] = bundled
    _write_record(target_dir, record)
    return results


def _is_root() -> bool:
    geteuid = getattr(os, "geteuid", None)
    return geteuid is not None and geteuid() == 0


def jupyter_command(
    notebook: str | os.PathLike[str],
    *,
    port: int | None = None,
    no_browser: bool = False,
    as_root: bool | None = None,
    python: str | None = None,
) -> list[str]:
    """The command that starts JupyterLab on ``notebook``, served from the notebook's folder.

    Run it with the notebook's folder as the working directory (the kernel
    starts there too, so files the notebook writes land beside it).

    Parameters
    ----------
    notebook : str or path-like
        The notebook to open.
    port : int, optional
        The port to serve on; JupyterLab's default (8888, or the next free one) when None.
    no_browser : bool, default False
        Do not open a web browser (the server prints its address).
    as_root : bool, optional
        Whether the command will run as root (adds ``--allow-root``); the
        current effective user decides when None.
    python : str, optional
        The Python that runs JupyterLab; this one (``sys.executable``) when None.

    Examples
    --------
    >>> cmd = jupyter_command("demo/mailroom_digits.ipynb", port=8890, no_browser=True, as_root=True, python="py")
    >>> cmd[:5]
    ['py', '-m', 'jupyter', 'lab', 'mailroom_digits.ipynb']
    >>> cmd[5:]
    ['--ServerApp.port=8890', '--no-browser', '--allow-root']
    >>> "--allow-root" in jupyter_command("mailroom_digits.ipynb", as_root=False)
    False
    """
    if port is not None and not (isinstance(port, int) and 0 < port < 65536):
        raise ParameterError(f"port must be a whole number from 1 to 65535, got {port!r}")
    cmd = [python or sys.executable, "-m", "jupyter", "lab", Path(notebook).name]
    if port is not None:
        cmd.append(f"--ServerApp.port={port}")
    if no_browser:
        cmd.append("--no-browser")
    if _is_root() if as_root is None else as_root:
        cmd.append("--allow-root")  # JupyterLab refuses to start as root without it
    return cmd


def run_demo(
    name: str = "mailroom",
    folder: str | os.PathLike[str] = DEFAULT_FOLDER,
    *,
    port: int | None = None,
    no_browser: bool = False,
    reset: bool = False,
    print_command: bool = False,
    out: TextIO | None = None,
    err: TextIO | None = None,
) -> int:
    """Copy the demo notebooks into ``folder`` and start JupyterLab on demo ``name`` (the CLI's ``demo``).

    Messages about the copies go to ``err``. With ``print_command`` the
    command is written to ``out`` (one shell-quoted line) instead of being run;
    otherwise this process becomes JupyterLab (on POSIX) and returns only on
    other platforms, with JupyterLab's exit code.

    Raises
    ------
    ParameterError
        For an unknown demo name or a bad port.
    FileFormatError
        When the working folder cannot be used or JupyterLab is not installed.

    Examples
    --------
    >>> import io, tempfile, pathlib
    >>> folder = pathlib.Path(tempfile.mkdtemp())
    >>> out, err = io.StringIO(), io.StringIO()
    >>> run_demo("helpdesk", folder, no_browser=True, print_command=True, out=out, err=err)
    0
    >>> "jupyter lab helpdesk_tickets.ipynb --no-browser" in out.getvalue()
    True
    >>> (folder / "helpdesk_tickets.ipynb").exists()
    True
    """
    out = out or sys.stdout
    err = err or sys.stderr
    if name not in DEMO_NOTEBOOKS:
        raise ParameterError(f"unknown demo {name!r}; choose one of {', '.join(DEMO_NOTEBOOKS)}")
    command = jupyter_command(DEMO_NOTEBOOKS[name], port=port, no_browser=no_browser)
    if find_spec("jupyterlab") is None:
        raise FileFormatError(
            f"JupyterLab is not installed in this Python ({sys.executable}); "
            'install it with: python -m pip install "logitscope[notebook]"'
        )
    target_dir = Path(folder).resolve()
    for result in prepare_demo(target_dir, reset=reset):
        print(f"logitscope: {result.message}", file=err)
    if print_command:
        print(f"cd {shlex.quote(str(target_dir))} && {shlex.join(command)}", file=out)
        return 0
    print(f"logitscope: starting JupyterLab in {target_dir}: {shlex.join(command)}", file=err, flush=True)
    out.flush()
    if os.name == "posix":
        # become JupyterLab: Ctrl-C, its shutdown question and the exit code are JupyterLab's own
        os.chdir(target_dir)
        os.execv(command[0], command)
    executable = shutil.which(command[0]) or command[0]  # pragma: no cover - Windows
    with subprocess.Popen([executable, *command[1:]], cwd=target_dir) as proc:  # pragma: no cover
        while True:
            try:
                return proc.wait()
            except KeyboardInterrupt:  # JupyterLab handles Ctrl-C itself; wait for it to finish
                continue
