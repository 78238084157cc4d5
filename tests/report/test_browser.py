"""The report in a real browser: headless Chromium (Debian's ``chromium``) driven by Playwright.

No browser download: Playwright's Python package launches the system
executable (``$BENCHSUITE_CHROMIUM``, else ``chromium`` on PATH, else
``/usr/bin/chromium``).  Without Playwright or Chromium these tests skip with
the reason, unless ``BENCHSUITE_REQUIRE_BROWSER=1`` (set by ``.ci/run``), in
which case they fail.
"""

from __future__ import annotations

import os
import shutil
import time
from pathlib import Path

import pytest

from benchsuite.report.html import build_report, render_html, write_report
from benchsuite.store.db import ResultStore
from tests.report import synthetic_grid

CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def _chromium() -> tuple[str | None, str]:
    """(executable, reason it is unusable)."""
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return None, "the playwright Python package is not installed (pip install playwright)"
    path = os.environ.get("BENCHSUITE_CHROMIUM") or shutil.which("chromium") or "/usr/bin/chromium"
    if not Path(path).is_file():
        return None, "no Chromium executable (apt-get install -y chromium, or set BENCHSUITE_CHROMIUM)"
    return path, ""


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    path, reason = _chromium()
    if path is None:
        if os.environ.get("BENCHSUITE_REQUIRE_BROWSER") == "1":
            pytest.fail(f"BENCHSUITE_REQUIRE_BROWSER=1 but {reason}")
        pytest.skip(reason)
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        context = pw.chromium.launch_persistent_context(
            str(tmp_path_factory.mktemp("chromium-profile")), executable_path=path, headless=True,
            args=CHROMIUM_ARGS, viewport={"width": 1280, "height": 900})
        yield context
        context.close()


class Watched:
    """A page with its console errors, uncaught exceptions, dialogs and requests recorded."""

    def __init__(self, context):
        self.page = context.new_page()
        self.errors: list[str] = []
        self.dialogs: list[str] = []
        self.requests: list[str] = []
        self.page.on("console", lambda msg: self.errors.append(msg.text) if msg.type == "error" else None)
        self.page.on("pageerror", lambda exc: self.errors.append(str(exc)))
        self.page.on("request", lambda req: self.requests.append(req.url))
        self.page.on("dialog", lambda d: (self.dialogs.append(d.message), d.dismiss()))

    def open(self, path: Path) -> float:
        """Navigate to the file; seconds until the load event."""
        start = time.perf_counter()
        self.page.goto(path.resolve().as_uri(), wait_until="load")
        return time.perf_counter() - start

    def others(self, path: Path) -> list[str]:
        """Requests other than the report file itself."""
        return [u for u in self.requests if u != path.resolve().as_uri()]

    def visible_rows(self, selector: str = "table.results tbody tr") -> list:
        return self.page.locator(f"{selector}:visible").all()


def test_real_report_in_chromium(browser, real_run, registry, tmp_path):
    with ResultStore.open(real_run.db, create=False) as store:
        rows = store.results(real_run.run_id)
        report = write_report(store, real_run.run_id, tmp_path / "report.html", registry)
    failing = [r for r in rows if r.verdict != "pass"]
    assert failing and len(failing) < len(rows)

    w = Watched(browser)
    w.open(report)
    assert len(w.visible_rows()) == len(rows)
    assert w.page.locator("#filter-status").inner_text() == f"Result rows shown: {len(rows)} of {len(rows)}."

    w.page.select_option("#filter-verdict", "not-pass")
    shown = w.visible_rows()
    assert len(shown) == len(failing)
    assert {row.get_attribute("data-verdict") for row in shown} == {r.verdict for r in failing}
    for row in shown:
        text = row.locator("span.verdict").inner_text()
        assert "PASS" not in text and ("FAIL" in text or "BELOW EXACT" in text)

    w.page.select_option("#filter-verdict", "fail")
    assert len(w.visible_rows()) == sum(r.verdict == "fail" for r in rows)
    w.page.select_option("#filter-verdict", "all")
    w.page.select_option("#filter-tag", "cation")
    assert {row.get_attribute("data-case") for row in w.visible_rows()} == {"heh-cation"}
    w.page.click("#filter-reset")
    assert len(w.visible_rows()) == len(rows)

    # sorting: the error column of the first method table, ascending then descending
    table = w.page.locator("table.results").first
    header = table.locator("thead th", has_text="error / mHa")
    column = [h.inner_text() for h in table.locator("thead th").all()].index(header.inner_text())
    header.locator("button").click()

    def errors():
        return [float(c.get_attribute("data-v")) for c in table.locator(f"tbody tr td:nth-child({column + 1})").all()]

    assert errors() == sorted(errors()) and header.get_attribute("aria-sort") == "ascending"
    header.locator("button").click()
    assert errors() == sorted(errors(), reverse=True)

    w.page.screenshot(path=str(tmp_path / "report.png"), full_page=True)
    assert (tmp_path / "report.png").stat().st_size > 10_000

    # on paper: no controls, every row, verdicts still spelled out
    w.page.emulate_media(media="print")
    assert not w.page.locator("#controls").is_visible() and len(w.visible_rows()) == len(rows)
    assert w.page.locator("table.results span.verdict:visible").count() == len(rows)
    w.page.pdf(path=str(tmp_path / "report.pdf"))
    assert (tmp_path / "report.pdf").read_bytes().startswith(b"%PDF")
    assert w.errors == [] and w.dialogs == []
    assert w.others(report) == []


def test_escaping_holds_in_the_browser(browser, tmp_path):
    from tests.report.test_html import EVIL_METHOD, _evil_run

    run, rows = _evil_run()
    path = tmp_path / "evil.html"
    path.write_text(render_html(build_report(run, rows)), encoding="utf-8")
    w = Watched(browser)
    w.open(path)
    assert w.page.evaluate("document.scripts.length") == 1
    assert w.page.evaluate("document.querySelectorAll('img, b').length") == 0
    assert w.page.locator("h3", has_text=EVIL_METHOD).count() == 1
    assert w.dialogs == [] and w.errors == [] and w.others(path) == []


def test_30_cases_by_3_methods_loads(browser, tmp_path, capsys):
    run, rows = synthetic_grid(n_cases=30, scan_points=10)
    path = tmp_path / "large.html"
    path.write_text(render_html(build_report(run, rows)), encoding="utf-8")
    w = Watched(browser)
    seconds = w.open(path)
    nav_ms = w.page.evaluate("performance.getEntriesByType('navigation')[0].loadEventEnd")
    assert len(w.visible_rows()) == 90
    w.page.select_option("#filter-verdict", "not-pass")
    assert len(w.visible_rows()) == sum(r.verdict != "pass" for r in rows)
    assert w.errors == [] and w.others(path) == []
    with capsys.disabled():
        print(f"\n[report figures] 30 cases x 3 methods: {path.stat().st_size:,} bytes; "
              f"load {seconds:.3f} s (navigation loadEventEnd {nav_ms:.0f} ms)")
