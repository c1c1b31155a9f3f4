"""The README's demo command, followed as a new user does: JupyterLab opens the demo and it runs.

The command is read from the README itself and started as the user running the suite (root in
CI, where JupyterLab needs ``--allow-root``), with ``--no-browser --port`` added so chromium can
be pointed at it. The page runs every cell (Run > Run All Cells), the dashboard must appear with
no error output and no console error, and after saving, the working copy holds the outputs while
the repository's notebook is byte for byte what it was.
"""

from __future__ import annotations

import json
import re
import shlex
import subprocess
import sys
import sysconfig
import time
import urllib.error
from pathlib import Path

import pytest

from logitscope import launch

from .harness import (
    CELL_TIMEOUT_MS,
    JupyterServer,
    _server_env,
    free_port,
    open_notebook,
    run_all,
    screenshot,
    stop_jupyter_server,
)

pytestmark = pytest.mark.browser

REPO = Path(__file__).resolve().parents[2]
START_TIMEOUT_S = 180.0


def _readme_demo_argv() -> tuple[list[str], list[str]]:
    """How to start ``logitscope`` here, and the README's words after it."""
    text = (REPO / "README.md").read_text(encoding="utf-8")
    lines = [
        line
        for block in re.findall(r"```bash\n(.*?)```", text, flags=re.S)
        for line in block.splitlines()
        if re.search(r"logitscope demo(\s|$)", line)
    ]
    assert len(lines) == 1, lines
    words = shlex.split(lines[0].partition("&&")[2])
    assert words[:2] == ["logitscope", "demo"]
    script = Path(sysconfig.get_path("scripts")) / "logitscope"
    head = [str(script)] if script.is_file() else [sys.executable, "-m", "logitscope.cli"]
    return head, words[1:]


def _start(tmp_path: Path) -> JupyterServer:
    head, words = _readme_demo_argv()
    home = tmp_path / "home"
    cwd = tmp_path / "user"
    cwd.mkdir()
    port = free_port()
    token = "demo-command-token"
    env = _server_env(home)
    env["JUPYTER_TOKEN"] = token
    env["PYTHONPATH"] = str(REPO / "src")
    log_path = home / "server.log"
    with log_path.open("wb") as log:
        proc = subprocess.Popen(
            [*head, *words, "--no-browser", "--port", str(port)],
            cwd=cwd,
            env=env,
            stdin=subprocess.DEVNULL,
            stdout=log,
            stderr=subprocess.STDOUT,
            start_new_session=True,
        )
    server = JupyterServer(
        process=proc, port=port, token=token, root_dir=cwd / launch.DEFAULT_FOLDER, home=home, log_path=log_path
    )
    deadline = time.monotonic() + START_TIMEOUT_S
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            pytest.fail(f"logitscope demo exited with {proc.returncode}:\n{server.log_tail()}")
        try:
            status = server.api("GET", "/api/status", timeout=2.0)
        except (urllib.error.URLError, ConnectionError, TimeoutError, OSError):
            time.sleep(0.2)  # polling interval
            continue
        if isinstance(status, dict) and "started" in status:
            return server
        time.sleep(0.2)
    stop_jupyter_server(server)
    pytest.fail(f"JupyterLab did not answer within {START_TIMEOUT_S:.0f} s:\n{server.log_tail()}")


def test_readme_demo_opens_and_runs(tmp_path: Path, browser_page, browser_log) -> None:
    tracked = REPO / "example_notebooks" / "mailroom_digits.ipynb"
    before = tracked.read_bytes()
    server = _start(tmp_path)
    try:
        page = browser_page
        copy = server.root_dir / "mailroom_digits.ipynb"
        open_notebook(page, server, copy)
        run_all(page, timeout_ms=4 * CELL_TIMEOUT_MS)
        errors = page.locator('.jp-OutputArea-output[data-mime-type="application/vnd.jupyter.error"]')
        assert errors.count() == 0, errors.first.inner_text()
        dashboard = page.locator(".logitscope-dashboard").first
        dashboard.wait_for(state="visible", timeout=CELL_TIMEOUT_MS)
        dashboard.scroll_into_view_if_needed()
        screenshot(page, "demo-command-mailroom")
        page.keyboard.press("Control+s")  # what autosave does a little later
        deadline = time.monotonic() + 60
        saved: dict = {}
        while time.monotonic() < deadline:
            try:
                saved = json.loads(copy.read_text(encoding="utf-8"))
            except ValueError:  # caught while JupyterLab writes it
                saved = {"cells": []}
            if any(c.get("outputs") for c in saved["cells"] if c["cell_type"] == "code"):
                break
            page.wait_for_timeout(200)
        assert any(c.get("outputs") for c in saved["cells"] if c["cell_type"] == "code"), "outputs were not saved"
        assert tracked.read_bytes() == before  # the repository's notebook is as it was
        assert browser_log.errors() == []
        log = server.log_tail(20000)
        assert "Running as root is not recommended" not in log
    finally:
        stop_jupyter_server(server)
