"""``logitscope demo``: the README's demo command, its working copies, and the tests after a demo.

What is checked, and against what:

- the README's demo command is the one these tests run (read from the README itself), and the
  ``logitscope`` script it names is ``logitscope.cli:main`` (read from pyproject.toml);
- JupyterLab's own rule that it refuses to start as root without ``--allow-root`` ("Running as
  root is not recommended. Use --allow-root to bypass."): the command carries the flag as root
  and not otherwise, and a real server started by the README's command answers on 127.0.0.1 as
  the user running the suite (root in CI);
- the server serves the working copy, not the tracked notebook, and asks the browser to open it;
- an edited working copy is never overwritten (its text is compared byte for byte);
- a wheel built from this tree carries the notebooks, and ``logitscope demo`` run from it copies them;
- running a demo notebook in place in a copy of the repository, with outputs saved as JupyterLab's
  autosave would, and then the suite's notebook checks: they pass while the saved outputs are
  not staged, and the stripped check fails once they are (so it reads what git tracks).
"""

from __future__ import annotations

import json
import os
import re
import shlex
import shutil
import signal
import socket
import subprocess
import sys
import sysconfig
import time
import tomllib
import urllib.error
import urllib.request
from collections.abc import Iterator
from pathlib import Path

import nbformat
import pytest

from logitscope import cli, launch

REPO = Path(__file__).resolve().parents[1]
SRC = REPO / "src"
SERVER_START_S = 180  # a cold JupyterLab start took 2 s here and 12 s with other jobs on the two cores


def _env(**extra: str) -> dict[str, str]:
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(SRC), *filter(None, [env.get("PYTHONPATH")])])
    env.update(extra)
    return env


def readme_demo_command() -> list[str]:
    """The README's demo command after its install step, split as a shell would."""
    text = (REPO / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```bash\n(.*?)```", text, flags=re.S)
    lines = [line for block in blocks for line in block.splitlines() if re.search(r"logitscope demo(\s|$)", line)]
    assert len(lines) == 1, f"the README should show one demo command, found {lines}"
    install, _, run = lines[0].partition("&&")
    assert "pip install" in install and '".[notebook]"' in install, lines[0]
    return shlex.split(run)


def _cli_argv(words: list[str]) -> list[str]:
    """``logitscope ...``: the installed script of this Python, else ``python -m logitscope.cli`` (the same main)."""
    assert words[0] == "logitscope"
    script = Path(sysconfig.get_path("scripts")) / ("logitscope.exe" if os.name == "nt" else "logitscope")
    if script.is_file():
        return [str(script), *words[1:]]
    return [sys.executable, "-m", "logitscope.cli", *words[1:]]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


# ---------------------------------------------------------------------------- the command


def test_readme_demo_command_is_the_cli_demo() -> None:
    assert readme_demo_command()[:2] == ["logitscope", "demo"]
    scripts = tomllib.loads((REPO / "pyproject.toml").read_text(encoding="utf-8"))["project"]["scripts"]
    assert scripts["logitscope"] == "logitscope.cli:main"


@pytest.mark.parametrize(("euid", "allow_root"), [(0, True), (1000, False)])
def test_allow_root_only_as_root(euid: int, allow_root: bool, tmp_path: Path, monkeypatch, capsys) -> None:
    if not hasattr(os, "geteuid"):
        pytest.skip("no user ids on this platform")
    monkeypatch.setattr(os, "geteuid", lambda: euid)
    folder = tmp_path / "work"
    assert cli.main(["demo", "--print-command", "--no-browser", "--port", "8931", "--dir", str(folder)]) == 0
    out, err = capsys.readouterr()
    cd, _, command = out.strip().partition(" && ")
    assert shlex.split(cd) == ["cd", str(folder.resolve())]
    argv = shlex.split(command)
    assert argv[:5] == [sys.executable, "-m", "jupyter", "lab", "mailroom_digits.ipynb"]
    assert ("--allow-root" in argv) is allow_root
    assert "--ServerApp.port=8931" in argv and "--no-browser" in argv
    assert sorted(p.name for p in folder.glob("*.ipynb")) == ["helpdesk_tickets.ipynb", "mailroom_digits.ipynb"]
    assert "copied" in err


def test_unknown_demo_and_bad_port_are_refused(tmp_path: Path, capsys) -> None:
    with pytest.raises(SystemExit):  # argparse: not one of the choices
        cli.main(["demo", "weather", "--dir", str(tmp_path)])
    assert cli.main(["demo", "--port", "70000", "--print-command", "--dir", str(tmp_path / "d")]) == 2
    assert "port must be a whole number from 1 to 65535" in capsys.readouterr().err
    assert not (tmp_path / "d").exists()  # refused before anything was copied
    (tmp_path / "file").write_text("x")
    assert cli.main(["demo", "--print-command", "--dir", str(tmp_path / "file")]) == 2
    assert "exists and is not a folder" in capsys.readouterr().err


# ---------------------------------------------------------------------------- working copies


def _set_first_markdown(path: Path, text: str) -> None:
    nb = nbformat.read(path, as_version=4)
    nb.cells[0].source = text
    nbformat.write(nb, path)


def test_edited_copy_is_kept_and_reset_keeps_a_backup(tmp_path: Path) -> None:
    folder = tmp_path / "demo"
    assert [r.action for r in launch.prepare_demo(folder)] == ["copied", "copied"]
    bundled = (launch.bundled_notebooks() / "mailroom_digits.ipynb").read_bytes()
    mine = folder / "mailroom_digits.ipynb"
    assert mine.read_bytes() == bundled

    # outputs and execution counts (what JupyterLab saves by itself) are not edits
    nb = nbformat.read(mine, as_version=4)
    code = next(c for c in nb.cells if c.cell_type == "code")
    code.execution_count = 1
    code.outputs = [nbformat.v4.new_output("stream", name="stdout", text="ran\n")]
    nbformat.write(nb, mine)
    ran = mine.read_bytes()
    assert [r.action for r in launch.prepare_demo(folder)] == ["unchanged", "unchanged"]
    assert mine.read_bytes() == ran  # left alone, outputs and all

    _set_first_markdown(mine, "# my own notes")
    edited = mine.read_bytes()
    results = launch.prepare_demo(folder)
    assert [r.action for r in results] == ["kept", "unchanged"]
    assert mine.read_bytes() == edited
    assert "--reset" in results[0].message and str(mine) in results[0].message

    results = launch.prepare_demo(folder, reset=True)
    assert [r.action for r in results] == ["replaced", "unchanged"]
    backup = results[0].backup
    assert backup is not None and backup.parent == folder and backup.read_bytes() == edited
    assert mine.read_bytes() == bundled


def test_unedited_copy_of_an_older_version_is_updated(tmp_path: Path, monkeypatch) -> None:
    old = tmp_path / "old"
    shutil.copytree(launch.bundled_notebooks(), old, ignore=shutil.ignore_patterns("*.json", "*.html", "*.csv"))
    _set_first_markdown(old / "mailroom_digits.ipynb", "# an older version")
    monkeypatch.setattr(launch, "bundled_notebooks", lambda: old)
    folder = tmp_path / "demo"
    launch.prepare_demo(folder)
    assert "an older version" in (folder / "mailroom_digits.ipynb").read_text()
    monkeypatch.undo()  # the package is upgraded; the user never touched the copy
    assert [r.action for r in launch.prepare_demo(folder)] == ["updated", "unchanged"]
    assert (folder / "mailroom_digits.ipynb").read_bytes() == (
        launch.bundled_notebooks() / "mailroom_digits.ipynb"
    ).read_bytes()


def test_unreadable_copy_counts_as_edited(tmp_path: Path) -> None:
    folder = tmp_path / "demo"
    folder.mkdir()
    (folder / "mailroom_digits.ipynb").write_text("{ not json")
    assert [r.action for r in launch.prepare_demo(folder)] == ["kept", "copied"]
    assert (folder / "mailroom_digits.ipynb").read_text() == "{ not json"


# ---------------------------------------------------------------------------- a real server


@pytest.fixture
def process_group() -> Iterator[list[subprocess.Popen]]:
    """Processes started in their own session; each is stopped by its process group afterwards."""
    started: list[subprocess.Popen] = []
    yield started
    for proc in started:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGTERM)
            try:
                proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                os.killpg(proc.pid, signal.SIGKILL)
                proc.wait(timeout=30)


def _wait_for_server(proc: subprocess.Popen, url: str, log: Path) -> None:
    deadline = time.monotonic() + SERVER_START_S
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            pytest.fail(f"JupyterLab exited with code {proc.returncode}:\n{log.read_text()[-3000:]}")
        try:
            with urllib.request.urlopen(url, timeout=5) as reply:
                if reply.status == 200:
                    return
        except (urllib.error.URLError, ConnectionError, TimeoutError):
            pass
        time.sleep(0.2)  # polling interval, not a wait for a fixed time
    pytest.fail(f"JupyterLab did not answer on {url} within {SERVER_START_S} s:\n{log.read_text()[-3000:]}")


@pytest.mark.skipif(os.name != "posix", reason="stopped by its process group (POSIX)")
def test_readme_demo_command_serves_the_working_copy(tmp_path: Path, process_group) -> None:
    """The README's command as the suite's user (root in CI): the server answers and opens the copy."""
    port = _free_port()
    token = "logitscope-test-token"
    opened = tmp_path / "opened.txt"
    recorder = tmp_path / "browser.py"  # stands in for the web browser: notes the address it was given
    recorder.write_text(f"import sys, pathlib\npathlib.Path({str(opened)!r}).write_text(sys.argv[1])\n")
    cwd = tmp_path / "home"
    copy = cwd / launch.DEFAULT_FOLDER / "mailroom_digits.ipynb"
    launch.prepare_demo(copy.parent)  # an earlier demo, whose copy the user then edited
    _set_first_markdown(copy, "# my mail room notes")
    env = _env(
        JUPYTER_TOKEN=token,
        BROWSER=f"{shlex.quote(sys.executable)} {shlex.quote(str(recorder))} %s",
        JUPYTER_RUNTIME_DIR=str(tmp_path / "runtime"),
        JUPYTER_CONFIG_DIR=str(tmp_path / "config"),
    )
    argv = _cli_argv([*readme_demo_command(), "--port", str(port)])
    log = tmp_path / "jupyter.log"
    with log.open("wb") as fh:
        proc = subprocess.Popen(argv, cwd=cwd, env=env, stdout=fh, stderr=subprocess.STDOUT, start_new_session=True)
    process_group.append(proc)
    _wait_for_server(proc, f"http://127.0.0.1:{port}/api", log)

    # the server's root is the working folder, and the notebook it serves is the copy
    request = urllib.request.Request(
        f"http://127.0.0.1:{port}/api/contents/mailroom_digits.ipynb", headers={"Authorization": f"token {token}"}
    )
    with urllib.request.urlopen(request, timeout=30) as reply:
        served = json.load(reply)
    assert served["type"] == "notebook" and served["writable"] is True
    assert served["content"]["cells"][0]["source"] == "# my mail room notes"  # the user's copy, kept
    assert launch.cell_digest(served["content"]) == launch.cell_digest(json.loads(copy.read_text(encoding="utf-8")))

    # the browser was asked to open that notebook (directly or through JupyterLab's redirect page)
    deadline = time.monotonic() + SERVER_START_S
    while not opened.exists() and time.monotonic() < deadline and proc.poll() is None:
        time.sleep(0.2)
    assert opened.exists(), f"no browser was opened:\n{log.read_text()[-3000:]}"
    address = opened.read_text()
    if address.startswith("file://"):
        address = Path(urllib.request.url2pathname(address.removeprefix("file://"))).read_text()
    assert f":{port}/lab/tree/mailroom_digits.ipynb" in address
    text = log.read_text()
    assert f"kept your edited {copy}" in text
    if hasattr(os, "geteuid") and os.geteuid() == 0:
        assert "--allow-root" in text  # the command it ran, as logged by logitscope demo
    assert "Running as root is not recommended" not in text


# ---------------------------------------------------------------------------- the wheel


def test_wheel_carries_the_notebooks(tmp_path: Path) -> None:
    pytest.importorskip("hatchling", reason="building the wheel needs hatchling (in the test extra)")
    wheels = tmp_path / "wheels"
    build = subprocess.run(
        [sys.executable, "-m", "pip", "wheel", str(REPO), "--no-deps", "--no-build-isolation", "-q", "-w", str(wheels)],
        capture_output=True,
        text=True,
        timeout=600,
        check=False,
    )
    assert build.returncode == 0, build.stderr[-3000:]
    (wheel,) = wheels.glob("logitscope-*.whl")
    site = tmp_path / "site"
    install = subprocess.run(
        [sys.executable, "-m", "pip", "install", "--no-deps", "-q", "--target", str(site), str(wheel)],
        capture_output=True,
        text=True,
        timeout=600,
        check=False,
    )
    assert install.returncode == 0, install.stderr[-3000:]
    folder = tmp_path / "demo"
    run = subprocess.run(
        [sys.executable, "-m", "logitscope.cli", "demo", "--print-command", "--dir", str(folder)],
        cwd=tmp_path,
        env={**os.environ, "PYTHONPATH": str(site)},
        capture_output=True,
        text=True,
        timeout=300,
        check=False,
    )
    assert run.returncode == 0, run.stderr
    shipped = site / "logitscope" / "example_notebooks"
    assert sorted(p.name for p in shipped.iterdir()) == sorted(
        p.name for p in (REPO / "example_notebooks").glob("*.ipynb")
    )
    for name in launch.DEMO_NOTEBOOKS.values():
        assert (folder / name).read_bytes() == (REPO / "example_notebooks" / name).read_bytes()
    assert "jupyter lab mailroom_digits.ipynb" in run.stdout


# ---------------------------------------------------------------------------- demo, then the tests


def _git(repo: Path, *args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        ["git", "-C", str(repo), "-c", "user.name=test", "-c", "user.email=test@example.invalid",
         "-c", "commit.gpgsign=false", *args],
        capture_output=True, text=True, timeout=120, check=True,
    )  # fmt: skip


def _copy_of_repository(target: Path) -> Path:
    """The tracked files of this checkout, as they are in the working tree, committed in a new repository."""
    listed = subprocess.run(["git", "-C", str(REPO), "ls-files", "-z"], capture_output=True, timeout=120, check=False)
    if listed.returncode != 0:
        pytest.skip("not a git checkout: the stripped check reads the files themselves here")
    for rel in filter(None, listed.stdout.decode().split("\0")):
        source = REPO / rel
        if source.is_file():
            (target / rel).parent.mkdir(parents=True, exist_ok=True)
            shutil.copy2(source, target / rel)
    _git(target, "init", "-q")
    _git(target, "add", "-A")
    _git(target, "commit", "-q", "-m", "copy")
    return target


def _notebook_checks(repo: Path, *select: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", "pytest", "tests/test_notebooks.py", "-q", "-p", "no:cacheprovider", *select],
        cwd=repo,
        env={**os.environ, "PYTHONPATH": str(repo / "src")},
        capture_output=True,
        text=True,
        timeout=1800,
        check=False,
    )


@pytest.mark.skipif(shutil.which("git") is None, reason="needs git")
def test_demo_then_the_notebook_checks_pass(tmp_path: Path) -> None:
    from nbclient import NotebookClient

    repo = _copy_of_repository(tmp_path / "repo")
    tracked = repo / "example_notebooks" / "mailroom_digits.ipynb"
    run = subprocess.run(
        _cli_argv([*readme_demo_command(), "--print-command"]),
        cwd=repo, env=_env(), capture_output=True, text=True, timeout=300, check=False,
    )  # fmt: skip
    assert run.returncode == 0, run.stderr
    copy = repo / launch.DEFAULT_FOLDER / "mailroom_digits.ipynb"

    # run the demo notebook in place and save it with its outputs, as JupyterLab's autosave would
    nb = nbformat.read(copy, as_version=4)
    NotebookClient(nb, timeout=300, kernel_name="python3", resources={"metadata": {"path": str(copy.parent)}}).execute()
    nbformat.write(nb, copy)
    assert _git(repo, "status", "--porcelain").stdout == ""  # the demo left every tracked file as it was
    # and a user who opened the tracked notebook itself (the earlier README command) saved the same outputs
    nbformat.write(nb, tracked)
    saved = nbformat.read(tracked, as_version=4)
    assert any(c.get("outputs") for c in saved.cells if c.cell_type == "code")
    assert _git(repo, "status", "--porcelain").stdout.split() == ["M", "example_notebooks/mailroom_digits.ipynb"]

    # the suite's notebook checks that read the saved file (running the notebooks is another test's job)
    checks = _notebook_checks(repo, "-k", "stripped")
    assert checks.returncode == 0, checks.stdout[-5000:]
    assert "2 passed" in checks.stdout

    # staged, the outputs are what git would commit: now the stripped check must fail, naming them
    _git(repo, "add", "example_notebooks/mailroom_digits.ipynb")
    staged = _notebook_checks(repo, "-k", "stripped")
    assert staged.returncode == 1, staged.stdout[-5000:]
    assert "mailroom_digits.ipynb (git index): cells with outputs" in staged.stdout
