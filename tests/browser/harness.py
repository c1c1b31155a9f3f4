"""Helpers for driving JupyterLab / Notebook 7 in Debian's chromium with Playwright.

The fixtures in ``tests/browser/conftest.py`` build on these; browser tests import the helpers
with ``from .harness import ...``. Everything waits for the DOM or the server's REST API, never
for a fixed time.

Typical test::

    @pytest.mark.browser
    def test_something(jupyter_server, notebook_dir, browser_page, browser_log):
        path = write_notebook(notebook_dir, "demo.ipynb", ["import ipywidgets as w; w.IntSlider()"])
        open_notebook(browser_page, jupyter_server, path)
        run_cell(browser_page, 0)
        wait_for_output(browser_page, 0, ".widget-slider")
        screenshot(browser_page, "demo")
        assert browser_log.errors() == []

Cell indices count all cells (markdown too), in the order they appear in the notebook.
"""

from __future__ import annotations

import json
import os
import re
import secrets
import signal
import socket
import subprocess
import sys
import time
import urllib.error
import urllib.parse
import urllib.request
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:  # playwright is optional at import time: the fixtures skip/fail without it
    from playwright.sync_api import Browser, ConsoleMessage, Locator, Page, Playwright, Request

REPO_ROOT = Path(__file__).resolve().parents[2]
ARTIFACTS_DIR = REPO_ROOT / "test-artifacts"
CHROMIUM_PATH = "/usr/bin/chromium"
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
]
VIEWPORT = {"width": 1400, "height": 1000}

#: Default time limits (milliseconds for Playwright, seconds for the server).
PAGE_TIMEOUT_MS = 60_000
CELL_TIMEOUT_MS = 120_000
SERVER_START_TIMEOUT_S = 90.0

# JupyterLab user settings written into the server's private settings directory.
# - no news feed / update check toasts (they would also reach the network);
# - windowingMode "none": every cell is attached to the DOM, so ".jp-Cell" nth(i) is cell i
#   even when it is scrolled out of view.
_USER_SETTINGS: dict[str, dict[str, Any]] = {
    "@jupyterlab/apputils-extension/notification.jupyterlab-settings": {
        "fetchNews": "false",
        "checkForUpdates": False,
    },
    "@jupyterlab/notebook-extension/tracker.jupyterlab-settings": {"windowingMode": "none"},
}

#: Errors Notebook 7.6 raises by itself, with no extension or user setting of ours involved.
#: Pass as ``ignore=`` to :meth:`BrowserLog.errors` on Notebook 7 pages only.
#: - the TypeError comes from the keyboard-shortcut settings plugin bundled in notebook_core.js,
#:   on every Notebook 7 page load;
#: - "filebrowser:open-path" appears once any /lab page was served by the same server:
#:   jupyterlab_server's LabHandler writes lab keys (treePath, mode, workspace) into the shared
#:   ``settings["page_config_data"]`` dict, and Notebook 7 copies that dict into its own pages.
NOTEBOOK7_KNOWN_ERRORS = (
    r"^Cannot read properties of undefined \(reading 'schema'\)$",
    r"^Command 'filebrowser:open-path' not registered\.$",
)

_PROMPT_DONE = re.compile(r"^\[\s*\d+\s*\]:?$")
_LOCAL_HOSTS = {"127.0.0.1", "localhost", "[::1]", "::1"}


# --------------------------------------------------------------------------------------------
# Environment checks
# --------------------------------------------------------------------------------------------


def in_ci() -> bool:
    """True when the environment variable ``CI`` is ``"true"`` (CI must run browser tests)."""
    return os.environ.get("CI", "").strip().lower() == "true"


def missing_browser_requirements() -> list[str]:
    """Names of what is missing for browser tests: chromium, the playwright package, jupyterlab."""
    missing = []
    if not (os.path.isfile(CHROMIUM_PATH) and os.access(CHROMIUM_PATH, os.X_OK)):
        missing.append(f"{CHROMIUM_PATH} (apt-get install -y chromium)")
    for module in ("playwright.sync_api", "jupyterlab", "notebook", "nbformat"):
        try:
            __import__(module)
        except ImportError:
            missing.append(f"python package {module.split('.')[0]}")
    return missing


# --------------------------------------------------------------------------------------------
# Notebooks on disk
# --------------------------------------------------------------------------------------------


def write_notebook(directory: str | os.PathLike[str], name: str, cells: Sequence[str]) -> Path:
    """Write an nbformat v4 notebook with a python3 kernelspec and return its path.

    Each string becomes a code cell, except strings starting with ``"%%md\\n"``, which become
    markdown cells (the prefix is dropped).
    """
    import nbformat

    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3 (ipykernel)", "language": "python"}
    nb.metadata["language_info"] = {"name": "python"}
    for source in cells:
        if source.startswith("%%md\n"):
            nb.cells.append(nbformat.v4.new_markdown_cell(source[len("%%md\n") :]))
        else:
            nb.cells.append(nbformat.v4.new_code_cell(source))
    nbformat.validate(nb)
    path = Path(directory) / name
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(nbformat.writes(nb), encoding="utf-8")
    os.replace(tmp, path)
    return path


# --------------------------------------------------------------------------------------------
# The Jupyter server
# --------------------------------------------------------------------------------------------


def free_port() -> int:
    """A TCP port on 127.0.0.1 that was free a moment ago."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@dataclass
class JupyterServer:
    """A running ``jupyter lab`` in its own process group (see :func:`start_jupyter_server`)."""

    process: subprocess.Popen[bytes]
    port: int
    token: str
    root_dir: Path
    home: Path
    log_path: Path
    startup_seconds: float = 0.0
    timings: dict[str, float] = field(default_factory=dict)

    @property
    def base_url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def relpath(self, path: str | os.PathLike[str]) -> str:
        """Path relative to the server root, with forward slashes (URL form, unquoted)."""
        p = Path(path)
        if p.is_absolute():
            p = p.resolve().relative_to(self.root_dir.resolve())
        return p.as_posix()

    def url(self, route: str, **query: str) -> str:
        """Absolute URL of ``route`` (e.g. ``/lab``) with the token in the query string."""
        params = {"token": self.token, **query}
        return f"{self.base_url}{route}?{urllib.parse.urlencode(params)}"

    def lab_url(self, path: str | os.PathLike[str]) -> str:
        """JupyterLab URL opening a notebook: ``/lab/tree/<path>``."""
        return self.url("/lab/tree/" + urllib.parse.quote(self.relpath(path)))

    def notebook7_url(self, path: str | os.PathLike[str]) -> str:
        """Notebook 7 URL of a file: ``/tree/<path>`` (the server redirects to ``/notebooks/<path>``)."""
        return self.url("/tree/" + urllib.parse.quote(self.relpath(path)))

    def api(self, method: str, route: str, body: Any = None, timeout: float = 10.0) -> Any:
        """Call the server's REST API (``route`` like ``/api/kernels``) and return the JSON reply."""
        data = None if body is None else json.dumps(body).encode()
        req = urllib.request.Request(
            self.base_url + route,
            data=data,
            method=method,
            headers={"Authorization": f"token {self.token}", "Content-Type": "application/json"},
        )
        with urllib.request.urlopen(req, timeout=timeout) as resp:
            raw = resp.read()
        return json.loads(raw) if raw else None

    def kernels(self) -> list[dict[str, Any]]:
        """The running kernels (``GET /api/kernels``)."""
        return list(self.api("GET", "/api/kernels"))

    def sessions(self) -> list[dict[str, Any]]:
        """The open sessions (``GET /api/sessions``): one per notebook with a kernel."""
        return list(self.api("GET", "/api/sessions"))

    def shutdown_all_kernels(self) -> None:
        """Delete every session and kernel (used between tests so kernels do not pile up)."""
        for session in self.sessions():
            try:
                self.api("DELETE", f"/api/sessions/{session['id']}")
            except urllib.error.HTTPError:
                pass
        for kernel in self.kernels():
            try:
                self.api("DELETE", f"/api/kernels/{kernel['id']}")
            except urllib.error.HTTPError:
                pass

    def reset_workspaces(self) -> None:
        """Forget saved layouts (open tabs) so the next page starts clean.

        JupyterLab saves its layout, including the open notebooks, and Notebook 7 replays that
        saved layout too (it then logs "Command 'filebrowser:open-path' not registered").
        """
        for saved in (self.home / "lab-workspaces").glob("*.jupyterlab-workspace"):
            saved.unlink(missing_ok=True)

    def log_tail(self, chars: int = 4000) -> str:
        """The end of the server's log (stdout and stderr), for failure messages."""
        try:
            return self.log_path.read_text(errors="replace")[-chars:]
        except OSError:
            return "<no log>"


def _write_user_settings(settings_dir: Path) -> None:
    for rel, values in _USER_SETTINGS.items():
        target = settings_dir / rel
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_text(json.dumps(values, indent=2), encoding="utf-8")


def _server_env(home: Path) -> dict[str, str]:
    """Environment for the server: private config/data/runtime/settings/workspace directories.

    JUPYTER_DATA_DIR only moves the *user* data directory; ``sys.prefix/share/jupyter`` (where
    pip put the ipywidgets, bqplot and anywidget labextensions and the python3 kernelspec) stays on
    the search path, and so does ``sys.prefix/etc/jupyter`` (server extension switches).
    """
    env = dict(os.environ)
    dirs = {
        "JUPYTER_CONFIG_DIR": home / "config",
        "JUPYTER_DATA_DIR": home / "data",
        "JUPYTER_RUNTIME_DIR": home / "runtime",
        "JUPYTERLAB_SETTINGS_DIR": home / "lab-settings",
        "JUPYTERLAB_WORKSPACES_DIR": home / "lab-workspaces",
        "IPYTHONDIR": home / "ipython",
    }
    for key, value in dirs.items():
        value.mkdir(parents=True, exist_ok=True)
        env[key] = str(value)
    _write_user_settings(dirs["JUPYTERLAB_SETTINGS_DIR"])
    env["PYDEVD_DISABLE_FILE_VALIDATION"] = "1"  # quiet debugger warning in kernel stderr
    env["PYTHONUNBUFFERED"] = "1"
    return env


def start_jupyter_server(
    root_dir: str | os.PathLike[str],
    home: str | os.PathLike[str],
    *,
    timeout: float = SERVER_START_TIMEOUT_S,
    attempts: int = 3,
) -> JupyterServer:
    """Start ``python -m jupyter lab`` serving ``root_dir`` and wait until ``/api/status`` answers.

    ``home`` receives the private Jupyter directories and the server log (``server.log``).
    The server runs in its own process group; stop it with :func:`stop_jupyter_server`.
    Retries on a new port if the chosen one was taken in the meantime.
    """
    root = Path(root_dir).resolve()
    home_dir = Path(home).resolve()
    root.mkdir(parents=True, exist_ok=True)
    env = _server_env(home_dir)
    last_error = ""
    for attempt in range(attempts):
        port = free_port()
        token = secrets.token_hex(24)
        log_path = home_dir / f"server-{attempt}.log"
        cmd = [
            sys.executable,
            "-m",
            "jupyter",
            "lab",
            "--no-browser",
            "--ip=127.0.0.1",
            f"--port={port}",
            "--ServerApp.port_retries=0",
            f"--IdentityProvider.token={token}",
            f"--ServerApp.root_dir={root}",
            "--allow-root",
            "--LabApp.news_url=None",
            "--LabApp.check_for_updates_class=jupyterlab.handlers.announcements.NeverCheckForUpdate",
            "--LabApp.extension_manager=readonly",
            "--ServerApp.terminals_enabled=False",
        ]
        t0 = time.monotonic()
        with open(log_path, "wb") as log:
            proc = subprocess.Popen(
                cmd,
                cwd=root,
                env=env,
                stdin=subprocess.DEVNULL,
                stdout=log,
                stderr=subprocess.STDOUT,
                start_new_session=True,  # own session => own process group, killed as a group
            )
        server = JupyterServer(process=proc, port=port, token=token, root_dir=root, home=home_dir, log_path=log_path)
        deadline = t0 + timeout
        while time.monotonic() < deadline:
            if proc.poll() is not None:
                break
            try:
                status = server.api("GET", "/api/status", timeout=2.0)
            except (urllib.error.URLError, ConnectionError, TimeoutError, OSError):
                time.sleep(0.2)
                continue
            if isinstance(status, dict) and "started" in status:
                server.startup_seconds = time.monotonic() - t0
                server.timings["server_start_s"] = server.startup_seconds
                return server
            time.sleep(0.2)
        last_error = server.log_tail()
        exited = proc.poll() is not None
        stop_jupyter_server(server)
        if not (exited and "already in use" in last_error.lower()):
            break  # only a port taken meanwhile is worth another try
    raise RuntimeError(f"JupyterLab did not answer /api/status within {timeout:.0f} s. Log tail:\n{last_error}")


def _descendants(pid: int) -> list[int]:
    """PIDs of all descendants of ``pid`` (read from /proc; kernels run in their own sessions)."""
    children: dict[int, list[int]] = {}
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat", "rb") as fh:
                stat = fh.read().decode(errors="replace")
        except OSError:
            continue
        # fields after the command name in parentheses: state ppid ...
        rest = stat[stat.rfind(")") + 2 :].split()
        if len(rest) >= 2:
            children.setdefault(int(rest[1]), []).append(int(entry))
    out: list[int] = []
    stack = [pid]
    while stack:
        for child in children.get(stack.pop(), []):
            out.append(child)
            stack.append(child)
    return out


def _alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            state = fh.read().decode(errors="replace")
    except OSError:
        return False
    return state[state.rfind(")") + 2 :][:1] != "Z"


def _signal_pids(pids: Iterable[int], sig: int) -> None:
    for pid in pids:
        try:
            os.kill(pid, sig)
        except ProcessLookupError:
            pass


def stop_jupyter_server(server: JupyterServer, grace: float = 10.0) -> None:
    """Stop the server: kernels via the API, then SIGTERM to its process group, then SIGKILL.

    Kernels are launched by jupyter_client in sessions of their own, so their PIDs are collected
    from /proc first and signalled as well.
    """
    proc = server.process
    if proc.poll() is None:
        try:
            server.shutdown_all_kernels()
        except (urllib.error.URLError, OSError, ValueError):
            pass
    extra = _descendants(proc.pid)
    try:
        pgid = os.getpgid(proc.pid)
    except ProcessLookupError:
        pgid = None
    if pgid is not None:
        try:
            os.killpg(pgid, signal.SIGTERM)
        except ProcessLookupError:
            pass
    _signal_pids(extra, signal.SIGTERM)
    deadline = time.monotonic() + grace
    while time.monotonic() < deadline:
        if proc.poll() is not None and not any(_alive(p) for p in extra):
            break
        time.sleep(0.1)
    if pgid is not None:
        try:
            os.killpg(pgid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    _signal_pids([p for p in extra if _alive(p)], signal.SIGKILL)
    try:
        proc.wait(timeout=5)
    except subprocess.TimeoutExpired:
        pass


# --------------------------------------------------------------------------------------------
# Chromium
# --------------------------------------------------------------------------------------------


def launch_chromium(playwright: Playwright) -> Browser:
    """Launch Debian's chromium headless with the flags these machines need."""
    return playwright.chromium.launch(executable_path=CHROMIUM_PATH, headless=True, args=list(CHROMIUM_ARGS))


@dataclass
class BrowserLog:
    """Console messages, page errors and network requests of one page.

    Attach with :meth:`attach` before navigating. ``errors()`` gives console errors and uncaught
    page exceptions; ``failed_requests`` the requests that failed; ``external_requests()`` every
    request that left 127.0.0.1 (none should: the product must work offline).
    """

    console: list[tuple[str, str]] = field(default_factory=list)
    page_errors: list[str] = field(default_factory=list)
    requests: list[str] = field(default_factory=list)
    failed_requests: list[tuple[str, str]] = field(default_factory=list)

    def attach(self, page: Page) -> BrowserLog:
        def on_console(msg: ConsoleMessage) -> None:
            self.console.append((msg.type, msg.text))

        def on_request(req: Request) -> None:
            self.requests.append(req.url)

        def on_failed(req: Request) -> None:
            self.failed_requests.append((req.url, req.failure or ""))

        page.on("console", on_console)
        page.on("pageerror", lambda exc: self.page_errors.append(str(exc)))
        page.on("request", on_request)
        page.on("requestfailed", on_failed)
        return self

    def errors(self, ignore: Sequence[str] = ()) -> list[str]:
        """Console ``error`` messages and uncaught page errors, minus those matching ``ignore`` regexes."""
        found = [text for kind, text in self.console if kind == "error"] + list(self.page_errors)
        return [e for e in found if not any(re.search(pattern, e) for pattern in ignore)]

    def external_requests(self) -> list[str]:
        """Requests to any host other than the local server (data: and blob: URLs excluded)."""
        out = []
        for url in self.requests:
            parts = urllib.parse.urlsplit(url)
            if parts.scheme in ("data", "blob", "about", "chrome-extension"):
                continue
            if (parts.hostname or "") not in _LOCAL_HOSTS:
                out.append(url)
        return out


# --------------------------------------------------------------------------------------------
# Notebook UI (JupyterLab 4 and Notebook 7 share the notebook DOM)
# --------------------------------------------------------------------------------------------


def dismiss_dialogs(page: Page) -> int:
    """Accept a kernel-selection (or any) dialog and close notification toasts; return how many."""
    handled = 0
    dialog_accept = page.locator(".jp-Dialog .jp-mod-accept")
    for _ in range(5):  # bounded: a dialog that stays open after "accept" is the test's problem
        if dialog_accept.count() == 0 or not dialog_accept.first.is_visible():
            break
        dialog_accept.first.click()
        handled += 1
        page.wait_for_timeout(100)
    toasts = page.locator(".Toastify__toast .jp-toast-button, .Toastify__close-button")
    for i in range(toasts.count()):
        try:
            toasts.nth(i).click(timeout=1000)
            handled += 1
        except Exception:  # a toast may have closed itself meanwhile
            pass
    return handled


def kernel_status(page: Page) -> str:
    """The notebook's kernel status from the execution indicator (``idle``, ``busy``, ...) or ``""``."""
    indicator = page.locator(".jp-NotebookPanel:not(.lm-mod-hidden) .jp-Notebook-ExecutionIndicator").first
    if indicator.count() == 0:
        return ""
    return indicator.get_attribute("data-status") or ""


def wait_for_kernel_idle(
    page: Page,
    server: JupyterServer | None = None,
    timeout_ms: int = PAGE_TIMEOUT_MS,
    *,
    path: str | os.PathLike[str] | None = None,
) -> None:
    """Wait until the visible notebook's kernel is idle.

    With ``server``, the REST API must agree: the kernel of the session for ``path`` is idle, or,
    without ``path``, every running kernel is. Dialogs and toasts are dismissed meanwhile.
    """
    rel = server.relpath(path) if (server is not None and path is not None) else None
    deadline = time.monotonic() + timeout_ms / 1000
    while time.monotonic() < deadline:
        if dismiss_dialogs(page):
            continue
        if kernel_status(page) == "idle":
            if server is None:
                return
            if rel is None:
                kernels = server.kernels()
            else:
                kernels = [s["kernel"] for s in server.sessions() if s.get("path") == rel and s.get("kernel")]
            if kernels and all(k.get("execution_state") == "idle" for k in kernels):
                return
        page.wait_for_timeout(100)
    raise TimeoutError(f"kernel not idle after {timeout_ms} ms (status {kernel_status(page)!r})")


def open_notebook(page: Page, server: JupyterServer, path: str | os.PathLike[str], *, app: str = "lab") -> float:
    """Open a notebook in JupyterLab (``app="lab"``) or Notebook 7 (``app="notebook"``).

    Handles the kernel-selection dialog and toasts, waits until the notebook is shown and its
    kernel is idle. Returns the seconds it took.
    """
    t0 = time.monotonic()
    url = server.lab_url(path) if app == "lab" else server.notebook7_url(path)
    page.goto(url, wait_until="domcontentloaded", timeout=PAGE_TIMEOUT_MS)
    page.locator(".jp-NotebookPanel .jp-Notebook .jp-Cell").first.wait_for(state="visible", timeout=PAGE_TIMEOUT_MS)
    wait_for_kernel_idle(page, server, path=path)
    return time.monotonic() - t0


_TAB_SHOWN_JS = """(title) => {
  const tab = Array.from(document.querySelectorAll('.lm-DockPanel-tabBar .lm-TabBar-tab'))
    .find((t) => (t.textContent || '').includes(title));
  if (!tab || !tab.classList.contains('lm-mod-current')) return false;
  const panel = tab.dataset.id ? document.getElementById(tab.dataset.id) : null;
  return !!panel && !panel.classList.contains('lm-mod-hidden') && panel.offsetParent !== null;
}"""


def activate_main_tab(page: Page, title: str, *, timeout_ms: int = PAGE_TIMEOUT_MS) -> None:
    """Bring the main-area tab ``title`` (a document's name) to the front and wait until its panel is shown.

    While JupyterLab restores its layout after a reload it may bring another document back to the front
    after a click: the click is repeated until the tab stays current (each try waits on the condition).
    """
    from playwright.sync_api import TimeoutError as PlaywrightTimeoutError

    tab = page.locator(".lm-DockPanel-tabBar .lm-TabBar-tab", has_text=title).first
    deadline = time.monotonic() + timeout_ms / 1000
    while True:
        tab.click(timeout=5_000)
        try:
            page.wait_for_function(_TAB_SHOWN_JS, arg=title, timeout=2_000, polling=50)
        except PlaywrightTimeoutError:
            if time.monotonic() > deadline:
                raise
            continue
        return


def _notebook(page: Page) -> Locator:
    return page.locator(".jp-NotebookPanel:not(.lm-mod-hidden) .jp-Notebook").first


def cell(page: Page, index: int) -> Locator:
    """Locator of cell ``index`` of the visible notebook."""
    return _notebook(page).locator(".jp-Cell").nth(index)


def _prompt_text(page: Page, index: int) -> str:
    prompt = cell(page, index).locator(".jp-InputArea-prompt").first
    return (prompt.text_content() or "").strip() if prompt.count() else ""


# A MutationObserver on each watched cell's input prompt: a cell counts as finished once its prompt
# showed "[*]:" and then "[n]:" (the count may repeat after a kernel restart, so comparing counts
# is not enough), or as cancelled when it went from "[*]:" back to "[ ]:" (an earlier cell failed).
_ARM_WATCH_JS = """
(prompts) => {
  const store = (window.__harnessWatch = window.__harnessWatch || {});
  const key = "w" + Math.random().toString(36).slice(2);
  const states = prompts.map((el) => {
    const st = { busy: false, finished: false, cancelled: false };
    const check = () => {
      const t = (el.textContent || "").trim();
      if (t.includes("*")) { st.busy = true; return; }
      if (!st.busy) return;
      if (/^\\[\\s*\\d+\\s*\\]:?$/.test(t)) st.finished = true; else st.cancelled = true;
      obs.disconnect();
    };
    const obs = new MutationObserver(check);
    obs.observe(el, { childList: true, characterData: true, subtree: true });
    return st;
  });
  store[key] = states;
  return key;
}
"""
_WATCH_DONE_JS = "(key) => window.__harnessWatch[key].every((st) => st.finished || st.cancelled)"
_WATCH_STATES_JS = "(key) => window.__harnessWatch[key]"


def _arm_watch(page: Page, indices: Sequence[int]) -> str:
    handles = [cell(page, i).locator(".jp-InputArea-prompt").first.element_handle() for i in indices]
    return str(page.evaluate(_ARM_WATCH_JS, handles))


def _wait_watch(page: Page, key: str, what: str, timeout_ms: int) -> list[dict[str, bool]]:
    try:
        page.wait_for_function(_WATCH_DONE_JS, arg=key, timeout=timeout_ms, polling=50)
    except Exception as exc:
        states = page.evaluate(_WATCH_STATES_JS, key)
        raise TimeoutError(f"{what} did not finish within {timeout_ms} ms (per-cell states {states})") from exc
    return list(page.evaluate(_WATCH_STATES_JS, key))


def wait_for_cell_done(page: Page, index: int, previous_prompt: str = "", timeout_ms: int = CELL_TIMEOUT_MS) -> None:
    """Poll until cell ``index`` shows an execution count (``[n]:``) different from ``previous_prompt``.

    For cells started by something other than :func:`run_cell` (which watches the prompt itself).
    """
    deadline = time.monotonic() + timeout_ms / 1000
    while time.monotonic() < deadline:
        text = _prompt_text(page, index)
        if _PROMPT_DONE.match(text) and text != previous_prompt:
            return
        page.wait_for_timeout(50)
    raise TimeoutError(f"cell {index} did not finish within {timeout_ms} ms (prompt {_prompt_text(page, index)!r})")


def run_cell(page: Page, index: int, *, wait: bool = True, timeout_ms: int = CELL_TIMEOUT_MS) -> None:
    """Run cell ``index`` as a person does: click its editor, press Shift+Enter.

    With ``wait`` (default) returns once the cell has run: its prompt went to ``[*]:`` and then to
    ``[n]:`` (works after a kernel restart too, when counts start again at 1). Shift+Enter moves
    the selection on; on the last cell JupyterLab appends a new empty cell, as it does for a person.
    """
    editor = cell(page, index).locator(".jp-InputArea-editor").first
    editor.scroll_into_view_if_needed()
    key = _arm_watch(page, [index]) if wait else ""
    editor.click()
    page.keyboard.press("Shift+Enter")
    if wait:
        states = _wait_watch(page, key, f"cell {index}", timeout_ms)
        if states[0]["cancelled"]:
            raise RuntimeError(f"cell {index} was cancelled (an earlier queued cell failed?)")


def _click_menu(page: Page, menu: str, item: str | re.Pattern[str]) -> None:
    page.locator(".lm-MenuBar-itemLabel", has_text=re.compile(rf"^{re.escape(menu)}$")).first.click()
    pattern = item if isinstance(item, re.Pattern) else re.compile(rf"^{re.escape(item)}$")
    page.locator(".lm-Menu .lm-Menu-itemLabel", has_text=pattern).first.click()


def _code_cell_indices(page: Page, *, non_empty: bool = False) -> list[int]:
    flags = _notebook(page).evaluate(
        """(nb) => Array.from(nb.querySelectorAll(':scope .jp-Cell')).map((c) => [
               c.classList.contains('jp-CodeCell'),
               ((c.querySelector('.jp-InputArea-editor .cm-content') || {}).textContent || '').trim().length > 0])"""
    )
    return [i for i, (is_code, has_text) in enumerate(flags) if is_code and (has_text or not non_empty)]


def run_all(page: Page, *, timeout_ms: int = CELL_TIMEOUT_MS) -> None:
    """Run > Run All Cells, then wait until every non-empty code cell has run.

    When a cell raises, JupyterLab cancels the cells queued after it; this returns then too (the
    error is in that cell's output, see :func:`read_cell_text`).
    """
    indices = _code_cell_indices(page, non_empty=True)
    key = _arm_watch(page, indices)
    _click_menu(page, "Run", "Run All Cells")
    _wait_watch(page, key, "Run All Cells", timeout_ms)


def wait_for_output(page: Page, cell_index: int, selector: str, *, timeout_ms: int = CELL_TIMEOUT_MS) -> Locator:
    """Wait until ``selector`` is visible inside the output area of cell ``cell_index``; return it."""
    loc = cell(page, cell_index).locator(".jp-Cell-outputArea").locator(selector).first
    loc.wait_for(state="visible", timeout=timeout_ms)
    return loc


def cell_json(page: Page, cell_index: int) -> Any:
    """The JSON document printed on the last output line of cell ``cell_index``."""
    text = read_cell_text(page, cell_index)
    return json.loads(text.strip().splitlines()[-1])


def wait_for_cell_json(
    page: Page, cell_index: int, ready: Callable[[Any], bool], *, timeout_ms: int = CELL_TIMEOUT_MS
) -> Any:
    """Run cell ``cell_index`` (it prints one JSON line of kernel state) until ``ready`` holds for it.

    A browser action reaches the kernel as a message some time later: the test waits for the state it
    expects, not for a fixed delay. Returns the last JSON read; raises ``TimeoutError`` with it.
    """
    deadline = time.monotonic() + timeout_ms / 1000
    while True:
        run_cell(page, cell_index)
        got = cell_json(page, cell_index)
        if ready(got):
            return got
        if time.monotonic() > deadline:
            raise TimeoutError(f"cell {cell_index} never showed the expected state; last: {got}")


def read_cell_text(page: Page, cell_index: int) -> str:
    """Text of all outputs (``.jp-OutputArea-output``) of cell ``cell_index``, joined by newlines."""
    outputs = cell(page, cell_index).locator(".jp-OutputArea-output")
    return "\n".join((outputs.nth(i).inner_text() or "") for i in range(outputs.count())).strip()


def restart_kernel(page: Page, server: JupyterServer | None = None, timeout_ms: int = PAGE_TIMEOUT_MS) -> None:
    """Kernel > Restart Kernel…, accept the dialog, wait until the kernel is idle again."""
    kernels_before = {k["id"]: k.get("last_activity") for k in server.kernels()} if server else {}
    _click_menu(page, "Kernel", re.compile(r"^Restart Kernel…?$"))
    accept = page.locator(".jp-Dialog .jp-mod-accept").first
    accept.wait_for(state="visible", timeout=timeout_ms)
    accept.click()
    # the indicator passes through "restarting"/"starting"; wait to leave idle first if we can see it
    deadline = time.monotonic() + 5
    while time.monotonic() < deadline and kernel_status(page) == "idle":
        if server and any(k.get("last_activity") != kernels_before.get(k["id"]) for k in server.kernels()):
            break
        page.wait_for_timeout(50)
    wait_for_kernel_idle(page, server, timeout_ms)


def screenshot(page: Page, name: str, *, full_page: bool = False) -> Path:
    """Save a PNG of the page to ``<repo>/test-artifacts/<name>.png`` and return its path."""
    ARTIFACTS_DIR.mkdir(parents=True, exist_ok=True)
    safe = re.sub(r"[^A-Za-z0-9_.-]+", "_", name)
    path = ARTIFACTS_DIR / f"{safe}.png"
    page.screenshot(path=str(path), full_page=full_page)
    return path


def record_timing(name: str, seconds: float) -> None:
    """Add a measured duration to ``test-artifacts/browser-timings.json`` (read after a CI run)."""
    ARTIFACTS_DIR.mkdir(parents=True, exist_ok=True)
    path = ARTIFACTS_DIR / "browser-timings.json"
    try:
        data = json.loads(path.read_text())
    except (OSError, ValueError):
        data = {}
    data[name] = round(seconds, 3)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(json.dumps(data, indent=2, sort_keys=True))
    os.replace(tmp, path)


def axis_maps(view: Locator) -> tuple[tuple[float, float], tuple[float, float]]:
    """Screen pixel = a * value + b for the x and the y axis, fitted through the drawn tick marks."""
    ticks = view.evaluate(
        """(root) => Array.from(root.querySelectorAll('g.axis')).map((ax) =>
             Array.from(ax.querySelectorAll('.tick')).map((t) => {
               const m = t.getScreenCTM();  // the tick's origin on the screen
               return [parseFloat(t.querySelector('text').textContent.replace('\u2212', '-')), m.e, m.f];
             }))"""
    )
    maps = {}
    for axis in ticks:
        v = np.array([t[0] for t in axis if np.isfinite(t[0])])
        cx = np.array([t[1] for t in axis if np.isfinite(t[0])])
        cy = np.array([t[2] for t in axis if np.isfinite(t[0])])
        if len(v) < 2:
            continue
        key, pos = ("x", cx) if np.ptp(cx) > np.ptp(cy) else ("y", cy)
        a, b = np.polyfit(v, pos, 1)
        maps[key] = (float(a), float(b))
    return maps["x"], maps["y"]
