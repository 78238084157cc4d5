"""The report in a real browser: headless Chromium (Debian's ``chromium``) driven by Playwright.

No browser download: Playwright's Python package launches the system
executable (``$BENCHSUITE_CHROMIUM``, else ``chromium`` on PATH, else
``/usr/bin/chromium``).  Without Playwright or Chromium these tests skip with
the reason, unless ``BENCHSUITE_REQUIRE_BROWSER=1`` (set by ``.ci/run``), in
which case they fail.

Screenshots of the report (the masthead with the accuracy matrix, a curve) go
to ``$BENCHSUITE_SCREENSHOTS`` when it names a directory (the committed ones in
``reports/screenshots/`` are made so), else to the test's temporary directory.
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
    assert w.page.locator("table.matrix td.cell[data-verdict]").count() == len(rows)
    decision = w.page.locator("aside.decision").inner_text()
    assert "GATE FAILED" in decision and "exit code 1" in decision and real_run.returncode == 1

    w.page.click("label:has(#show-not-pass)")
    shown = w.visible_rows()
    assert len(shown) == len(failing)
    assert {row.get_attribute("data-verdict") for row in shown} == {r.verdict for r in failing}
    for row in shown:
        text = row.locator("span.verdict").inner_text()
        assert "PASS" not in text and ("FAIL" in text or "BELOW EXACT" in text)
    assert w.page.locator("table.matrix td.cell.dim").count() == len(rows) - len(failing)   # faded, not hidden

    w.page.click("label:has(#show-fail)")
    assert len(w.visible_rows()) == sum(r.verdict == "fail" for r in rows)
    w.page.click("label:has(#show-all)")
    w.page.select_option("#filter-tag", "cation")
    assert {row.get_attribute("data-case") for row in w.visible_rows()} == {"heh-cation"}
    w.page.click("#filter-reset")
    assert len(w.visible_rows()) == len(rows) and w.page.locator("table.matrix td.cell.dim").count() == 0

    # a matrix cell leads to its task's row
    w.page.locator("table.matrix td.cell a").first.click()
    target = w.page.evaluate("location.hash").lstrip("#")
    assert target.startswith("task-") and w.page.locator(f"tr#{target}").is_visible()

    _check_sorting(w.page.locator("table.results").first)
    w.page.screenshot(path=str(tmp_path / "report.png"), full_page=True)
    assert (tmp_path / "report.png").stat().st_size > 10_000
    _check_print(w, rows, tmp_path)
    assert w.errors == [] and w.dialogs == []
    assert w.others(report) == []


def _check_sorting(table) -> None:
    """The error column of a method table sorts ascending, then descending."""
    header = table.locator("thead th", has_text="error / mHa")
    column = [h.inner_text() for h in table.locator("thead th").all()].index(header.inner_text())
    header.locator("button").click()

    def errors():
        return [float(c.get_attribute("data-v")) for c in table.locator(f"tbody tr td:nth-child({column + 1})").all()]

    assert errors() == sorted(errors()) and header.get_attribute("aria-sort") == "ascending"
    header.locator("button").click()
    assert errors() == sorted(errors(), reverse=True)


def _check_print(w, rows, tmp_path) -> None:
    """On paper: no controls, every row, verdicts still spelled out."""
    w.page.emulate_media(media="print")
    assert not w.page.locator("#controls").is_visible() and len(w.visible_rows()) == len(rows)
    assert w.page.locator("table.results span.verdict:visible").count() == len(rows)
    w.page.pdf(path=str(tmp_path / "report.pdf"))
    assert (tmp_path / "report.pdf").read_bytes().startswith(b"%PDF")
    w.page.emulate_media(media="screen")


def _screenshot_dir(tmp_path: Path) -> Path:
    out = Path(os.environ.get("BENCHSUITE_SCREENSHOTS") or tmp_path)
    out.mkdir(parents=True, exist_ok=True)
    return out


def test_matrix_and_curves_look_right_and_are_captured(browser, scan_run, registry, tmp_path):
    """The report of a run with a scan: every result row one line high whatever its tags and note, the
    matrix one cell per task in molecule groups, the curve drawn; screenshots of both."""
    with ResultStore.open(scan_run.db, create=False) as store:
        rows = store.results(scan_run.run_id)
        report = write_report(store, scan_run.run_id, tmp_path / "scan.html", registry,
                              title="Tallowick 0.9.0rc1 beside the built-in methods: H2 curve, HeH+, LiH")
    w = Watched(browser)
    w.page.set_viewport_size({"width": 1360, "height": 1000})
    w.open(report)
    assert w.page.locator("table.matrix td.cell[data-verdict]").count() == len(rows)
    groups = [g.inner_text().split("\n")[0] for g in w.page.locator("table.matrix th.mol").all()]
    assert groups == ["H2", "HHe+", "HLi"]            # subscripts and superscripts as text
    for table in w.page.locator("table.results").all():
        heights = table.evaluate("t => Array.from(t.tBodies[0].rows, r => r.getBoundingClientRect().height)")
        assert max(heights) - min(heights) < 4.0, heights          # tags and notes never add a line to a row
    assert w.page.locator("#curves svg").count() == 1
    shots = _screenshot_dir(tmp_path)
    w.page.screenshot(path=str(shots / "report-accuracy-matrix.png"),
                      clip={"x": 0, "y": 0, "width": 1360, "height": 1000})
    w.page.locator("#curves figure").first.screenshot(path=str(shots / "report-curve-h2.png"))
    for name in ("report-accuracy-matrix.png", "report-curve-h2.png"):
        assert (shots / name).stat().st_size > 20_000
    assert w.errors == [] and w.others(report) == []


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
    assert w.page.locator("table.matrix th.meth", has_text=EVIL_METHOD).count() == 1
    assert w.dialogs == [] and w.errors == [] and w.others(path) == []


def test_30_cases_by_3_methods_loads(browser, tmp_path, capsys):
    run, rows = synthetic_grid(n_cases=30, scan_points=10)
    path = tmp_path / "large.html"
    path.write_text(render_html(build_report(run, rows)), encoding="utf-8")
    w = Watched(browser)
    seconds = w.open(path)
    nav_ms = w.page.evaluate("performance.getEntriesByType('navigation')[0].loadEventEnd")
    assert len(w.visible_rows()) == 90
    w.page.click("label:has(#show-not-pass)")
    assert len(w.visible_rows()) == sum(r.verdict != "pass" for r in rows)
    assert w.errors == [] and w.others(path) == []
    with capsys.disabled():
        print(f"\n[report figures] 30 cases x 3 methods: {path.stat().st_size:,} bytes; "
              f"load {seconds:.3f} s (navigation loadEventEnd {nav_ms:.0f} ms)")
