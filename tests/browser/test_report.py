"""The HTML report in chromium: it loads from file:// with no request leaving the page and no error.

Every request the page makes must be the report file itself or a data: URL (the inline
thumbnails). The browser is set offline first, so a network fetch could not succeed anyway; a
Content-Security-Policy violation or a script would show up as a console error or a dialog.
"""

from __future__ import annotations

from pathlib import Path

import pytest

import logitscope
from logitscope.report import write_report
from test_report import HOSTILE, LONG_NAME, hostile_frame, long_frame

from .harness import ARTIFACTS_DIR

pytestmark = pytest.mark.browser


def _open(page, path: Path) -> tuple[list[str], list[str]]:
    """Open ``path`` offline; return (requests, dialogs)."""
    requests: list[str] = []
    dialogs: list[str] = []
    page.on("request", lambda r: requests.append(r.url))
    page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
    page.context.set_offline(True)
    page.goto(path.resolve().as_uri(), wait_until="load")
    return requests, dialogs


def _only_the_file_and_data(requests: list[str], path: Path) -> list[str]:
    url = path.resolve().as_uri()
    return [r for r in requests if r != url and not r.startswith("data:")]


def test_demo_report_loads_offline_with_no_request_and_no_error(browser_page, browser_log, tmp_path: Path) -> None:
    from logitscope.relabel_store import RelabelStore

    frame = logitscope.load_demo("mailroom")
    store = RelabelStore(tmp_path / "marks.json", frame)
    store.add("card-01043", "four", note="the loop is open: reads as a four")
    store.add("card-00005", "three")
    path = tmp_path / "mailroom-report.html"
    write_report(
        frame,
        path,
        fit_temperature=True,
        target_accuracy=0.98,
        per_class=True,
        title="Mail room digits, postcode reader",
        relabel=store,
    )
    requests, dialogs = _open(browser_page, path)
    assert _only_the_file_and_data(requests, path) == []
    assert requests[0] == path.resolve().as_uri()
    assert browser_log.errors() == [] and browser_log.failed_requests == [] and dialogs == []
    # every plot rendered with a size, every inline thumbnail decoded
    sizes = browser_page.eval_on_selector_all(
        "svg.chart", "els => els.map(e => [e.getBoundingClientRect().width, e.getBoundingClientRect().height])"
    )
    assert len(sizes) >= 9 and all(w > 100 and h > 50 for w, h in sizes)
    images = browser_page.eval_on_selector_all("img", "els => els.map(e => [e.complete, e.naturalWidth])")
    assert images and all(done and width > 0 for done, width in images)
    # the numbers are on the page as text
    assert browser_page.locator("#threshold-value").inner_text() != ""
    for box in ("#caution", "#caution-per-class", "#caution-held-out"):  # beside every decision
        assert "Caution." in browser_page.locator(box).inner_text()
    # the style block ran under the policy (a refused style would leave the page unstyled): the header rule shows
    border = browser_page.eval_on_selector("header", "e => getComputedStyle(e).borderBottomWidth")
    assert border == "3px"
    assert browser_page.evaluate("document.documentElement.scrollWidth") <= 1400
    ARTIFACTS_DIR.mkdir(parents=True, exist_ok=True)
    browser_page.screenshot(path=str(ARTIFACTS_DIR / "report-mailroom.png"), full_page=True)
    for section in ("calibration", "sweep", "threshold", "held-out", "mixups", "doubtful", "marks"):
        browser_page.locator(f"#{section}").screenshot(path=str(ARTIFACTS_DIR / f"report-mailroom-{section}.png"))


def test_a_megabyte_class_name_keeps_the_page_its_width(browser_page, browser_log, tmp_path: Path) -> None:
    path = tmp_path / "long.html"
    write_report(long_frame(), path, target_accuracy=0.9, per_class=True, title="T" * 5000)
    _open(browser_page, path)
    assert browser_log.errors() == []
    # the page is as wide as the window: no row, cell or heading grows with the 1 MB name
    assert browser_page.evaluate("document.documentElement.scrollWidth") <= 1400
    widest = browser_page.eval_on_selector_all(
        "main *", "els => Math.max(...els.map(e => e.getBoundingClientRect().width))"
    )
    assert widest <= 1400
    # the name is cut on the page, whole (up to the hover limit) in the title shown on hover
    cell = browser_page.locator("#threshold-per-class td.class-name").first
    shown, title = cell.inner_text(), cell.get_attribute("title")
    assert shown.endswith("…") and len(shown) <= 40
    assert title.startswith(LONG_NAME[:1000]) and title.endswith(f"({len(LONG_NAME):,} characters in all)")
    ARTIFACTS_DIR.mkdir(parents=True, exist_ok=True)
    browser_page.screenshot(path=str(ARTIFACTS_DIR / "report-long-names.png"), full_page=False)


@pytest.mark.parametrize("labels", [True, False])
def test_hostile_names_are_shown_as_text_and_never_run(browser_page, browser_log, tmp_path: Path, labels: bool):
    path = tmp_path / f"hostile-{labels}.html"
    options = {"fit_temperature": True, "target_accuracy": 0.9} if labels else {}
    write_report(hostile_frame(labels), path, title=HOSTILE[0], **options)
    requests, dialogs = _open(browser_page, path)
    assert dialogs == []  # no alert(1) ran
    assert _only_the_file_and_data(requests, path) == []  # the <img src=x> never became a request
    assert browser_log.errors() == []
    assert browser_page.eval_on_selector_all("script", "els => els.length") == 0
    text = browser_page.locator("main").inner_text()
    for name in HOSTILE:
        assert name in text  # shown literally
    assert HOSTILE[0] in browser_page.title()
    if not labels:
        assert "What needs labels" in text and browser_page.locator("#needs-labels-list").is_visible()
        ARTIFACTS_DIR.mkdir(parents=True, exist_ok=True)
        browser_page.screenshot(path=str(ARTIFACTS_DIR / "report-unlabelled-hostile.png"), full_page=True)
