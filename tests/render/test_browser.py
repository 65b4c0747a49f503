"""The HTML report in a real browser: headless Chromium driven by Playwright.

Checks what only a browser can show: the page loads nothing but itself, logs no error, and
fits a phone-width screen (a wide table scrolls inside its own box, never the page).
Screenshots are saved in each test's tmp_path for people to look at.

Chromium is Debian's package at /usr/bin/chromium (Playwright's own browser download is not
used). Without it these tests are skipped, unless the environment variable CI is set: then
a missing browser is a failure.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from reporter.render.html import render_html

CHROMIUM = Path("/usr/bin/chromium")
LAUNCH_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking",
               "--disable-component-update", "--no-first-run"]
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _require_browser():
    missing = []
    if not CHROMIUM.exists():
        missing.append(f"Chromium at {CHROMIUM} (apt-get install chromium)")
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        missing.append("the playwright package (pip install 'anova-report[test]')")
    if not missing:
        return
    message = "browser tests need " + " and ".join(missing)
    if os.environ.get("CI"):
        pytest.fail(message + "; CI is set, so this is a failure, not a skip")
    pytest.skip(message)


@pytest.fixture(scope="module")
def browser():
    _require_browser()
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        chromium = p.chromium.launch(executable_path=str(CHROMIUM), args=LAUNCH_ARGS)
        yield chromium
        chromium.close()


@pytest.fixture(scope="module")
def report_file(tmp_path_factory, build_document) -> Path:
    path = tmp_path_factory.mktemp("report") / "report.html"
    path.write_bytes(render_html(build_document()))
    return path


class Visit:
    """One page load with every request, console error and page error recorded.

    Requests that leave file:// are recorded and then aborted, so a test never reaches the
    network even when the page is wrong.
    """

    def __init__(self, browser, path: Path, width: int, height: int = 900):
        self.url = path.as_uri()
        self.requests: list[str] = []
        self.errors: list[str] = []
        self.page = browser.new_page(viewport={"width": width, "height": height})
        self.page.on("request", lambda r: self.requests.append(r.url))
        self.page.on("console", lambda m: self.errors.append(m.text) if m.type == "error" else None)
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))
        self.page.route("**/*", lambda route: route.continue_()
                        if route.request.url.startswith("file:") else route.abort())
        self.page.goto(self.url, wait_until="load")

    def overflow(self) -> tuple[int, int]:
        return tuple(self.page.evaluate(
            "[document.documentElement.scrollWidth, window.innerWidth]"))

    def screenshot(self, path: Path) -> bytes:
        self.page.screenshot(path=str(path), full_page=True)
        return path.read_bytes()


def test_report_loads_nothing_and_logs_no_error(browser, report_file, tmp_path, build_document):
    """At desktop width the page requests only itself and logs no console or page error."""
    visit = Visit(browser, report_file, 1280)
    assert visit.requests == [visit.url]
    assert visit.errors == []
    assert visit.page.title() == build_document().title
    assert visit.screenshot(tmp_path / "desktop.png").startswith(PNG_SIGNATURE)


@pytest.mark.parametrize("width", [390, 600, 900, 1280], ids=["phone", "small", "medium", "wide"])
def test_no_horizontal_overflow(browser, report_file, tmp_path, width):
    """The page is never wider than the window, from a 390-px phone to a desktop."""
    visit = Visit(browser, report_file, width, 844)
    scroll_width, inner_width = visit.overflow()
    assert scroll_width <= inner_width + 1
    assert visit.errors == []
    assert visit.screenshot(tmp_path / f"width-{width}.png").startswith(PNG_SIGNATURE)


def test_wide_table_scrolls_inside_its_box_on_a_phone(browser, report_file):
    """At 390 px the widest table is wider than its box and scrolls there, not the page."""
    visit = Visit(browser, report_file, 390, 844)
    box_scroll, box_width, box_right = visit.page.evaluate(
        "(() => { const b = document.querySelector('#hypotheses .table-scroll');"
        " return [b.scrollWidth, b.clientWidth, b.getBoundingClientRect().right]; })()"
    )
    assert box_scroll > box_width
    assert box_right <= 390
    assert visit.overflow()[0] <= 391


def test_listeners_see_a_stray_request(browser, tmp_path):
    """The checks can fail: a page with an outside image shows a request and an error."""
    stray = tmp_path / "stray.html"
    stray.write_text('<!DOCTYPE html><html lang="en"><head><meta charset="utf-8"><title>x</title>'
                     '</head><body><img src="https://example.org/x.png" alt=""></body></html>',
                     encoding="utf-8")
    visit = Visit(browser, stray, 800)
    assert "https://example.org/x.png" in visit.requests
    assert visit.errors
