"""Fixtures for real-browser tests: a JupyterLab server and a chromium page driven by Playwright.

- ``jupyter_server`` (session): one ``python -m jupyter lab`` for the whole run, in its own process
  group, with private Jupyter config/data/settings directories (the labextensions pip installed
  under ``sys.prefix`` stay visible). Stopped at the end of the session.
- ``notebook_dir`` (function): an empty folder inside the server root for this test; every kernel
  is shut down after the test.
- ``browser_page`` / ``browser_log`` (function): a fresh chromium context and page (1400x1000);
  ``browser_log`` collects console errors, page errors and requests of that page. On failure a
  screenshot ``test-artifacts/FAILED-<test>.png`` is saved.

Without /usr/bin/chromium or the playwright package these fixtures skip the test, except when
``CI=true``, where they fail it: CI must run the browser tests.
"""

from __future__ import annotations

import re
from collections.abc import Generator, Iterator
from typing import Any

import pytest

from .harness import (
    PAGE_TIMEOUT_MS,
    VIEWPORT,
    BrowserLog,
    JupyterServer,
    in_ci,
    launch_chromium,
    missing_browser_requirements,
    record_timing,
    screenshot,
    start_jupyter_server,
    stop_jupyter_server,
)


def _require_browser() -> None:
    missing = missing_browser_requirements()
    if not missing:
        return
    message = "browser tests need: " + ", ".join(missing)
    if in_ci():
        pytest.fail(message + " (CI=true: browser tests must run)", pytrace=False)
    pytest.skip(message)


@pytest.hookimpl(wrapper=True)
def pytest_runtest_makereport(
    item: pytest.Item, call: pytest.CallInfo[Any]
) -> Generator[None, pytest.TestReport, pytest.TestReport]:
    report = yield
    setattr(item, f"_report_{report.when}", report)  # read by _page_and_log to screenshot failures
    return report


@pytest.fixture(scope="session")
def jupyter_server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[JupyterServer]:
    """A JupyterLab server for the whole session (see module docstring)."""
    _require_browser()
    base = tmp_path_factory.mktemp("jupyter")
    server = start_jupyter_server(base / "root", base / "home")
    record_timing("jupyterlab_start_s", server.startup_seconds)
    try:
        yield server
    finally:
        stop_jupyter_server(server)


@pytest.fixture
def notebook_dir(jupyter_server: JupyterServer, request: pytest.FixtureRequest) -> Iterator[Any]:
    """An empty folder inside the server root for this test.

    Saved layouts are cleared before and after, and every kernel is shut down afterwards.
    """
    name = re.sub(r"[^A-Za-z0-9_.-]+", "_", request.node.name)[:80]
    path = jupyter_server.root_dir / name
    path.mkdir(parents=True, exist_ok=True)
    jupyter_server.reset_workspaces()
    try:
        yield path
    finally:
        jupyter_server.shutdown_all_kernels()
        jupyter_server.reset_workspaces()


@pytest.fixture(scope="module")
def chromium_browser() -> Iterator[Any]:
    """Playwright with Debian's chromium, one per test module.

    Module scope (not session): Playwright's sync API holds an event loop of its own, which must be
    gone before other modules (nbclient) run asyncio code in this process.
    """
    _require_browser()
    from playwright.sync_api import sync_playwright

    pw = sync_playwright().start()
    try:
        browser = launch_chromium(pw)
        try:
            yield browser
        finally:
            browser.close()
    finally:
        pw.stop()


@pytest.fixture
def _page_and_log(chromium_browser: Any, request: pytest.FixtureRequest) -> Iterator[tuple[Any, BrowserLog]]:
    context = chromium_browser.new_context(viewport=VIEWPORT)
    context.set_default_timeout(PAGE_TIMEOUT_MS)
    page = context.new_page()
    log = BrowserLog().attach(page)
    try:
        yield page, log
    finally:
        report = getattr(request.node, "_report_call", None)
        if report is not None and report.failed:
            try:
                screenshot(page, f"FAILED-{request.node.name}")
            except Exception:  # the page may be gone; the test failure is what matters
                pass
        context.close()


@pytest.fixture
def browser_page(_page_and_log: tuple[Any, BrowserLog]) -> Any:
    """A fresh chromium page (Playwright ``Page``) at 1400x1000."""
    return _page_and_log[0]


@pytest.fixture
def browser_log(_page_and_log: tuple[Any, BrowserLog]) -> BrowserLog:
    """Console errors, page errors and requests of ``browser_page`` (see ``harness.BrowserLog``)."""
    return _page_and_log[1]
