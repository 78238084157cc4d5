"""The HTML report: collect from a store, compare, render self-contained and inert."""

from __future__ import annotations

import dataclasses

import argparse
import re
from html.parser import HTMLParser

import pytest

from benchsuite.errors import InputError
from benchsuite.report.command import add_report_arguments, run_report
from benchsuite.report.html import build_report, collect_report, render_html
from benchsuite.report.matrix import VERDICT_LABELS, scale_class, verdict_label
from benchsuite.report.plots import scan_svg
from benchsuite.scoring import VERDICTS, curve_statistics
from benchsuite.store.db import ResultStore
from tests.report import make_row, make_run, store_with, synthetic_grid

EVIL_METHOD = """<script>alert("m&q")</script>'x"""
EVIL_MESSAGE = """<script>alert('msg')</script> "quoted" & <b>bold</b>"""
EVIL_TAG = """"><img src=x onerror=alert(1)>"""


class Page(HTMLParser):
    """Elements, attribute values and text of a page, as a browser's parser sees them."""

    def __init__(self, html: str):
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.ids: list[str] = []
        self.attrs: list[tuple[str, str]] = []
        self.text: list[str] = []
        self.feed(html)

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for name, value in attrs:
            self.attrs.append((name, value or ""))
            if name == "id":
                self.ids.append(value)

    def handle_data(self, data):
        self.text.append(data)


def _evil_run():
    run = make_run(methods=(EVIL_METHOD, "plain"))
    rows = []
    for n, length in enumerate((0.7, 1.0, 1.5)):
        for method, err in ((EVIL_METHOD, 3.0 + n), ("plain", 0.2)):
            rows.append(make_row(run.run_id, f"evil-scan@{length:g}", method, err, tags=(EVIL_TAG,),
                                 message=EVIL_MESSAGE, scan_parent="evil-scan", scan_length=length))
    return run, rows


def test_method_name_message_and_tag_render_inert():
    run, rows = _evil_run()
    html = render_html(build_report(run, rows))
    page = Page(html)
    assert page.tags.count("script") == 1                     # ours only
    assert "img" not in page.tags and "b" not in page.tags
    assert not any(name.startswith("on") for name, _ in page.attrs)
    text = "".join(page.text)
    assert EVIL_METHOD in text and EVIL_MESSAGE in text      # shown literally, as text
    assert ("data-tags", EVIL_TAG) in page.attrs              # an attribute value, not markup
    assert "&lt;script&gt;alert(&#34;m&amp;q&#34;)&lt;/script&gt;" in html
    svg = html[html.index("<svg"):html.index("</svg>")]
    assert "<script" not in svg and "&lt;script&gt;" in svg  # the plot legend escapes too


def test_page_is_self_contained(registry):
    run = make_run(methods=("alpha",))
    published = [{"method": "fci", "basis": "sto-3g", "energy_ha": -1.1373, "source": "szabo-ostlund-1996",
                  "from_memory": True, "error_mha": 0.02}]
    rows = [make_row(run.run_id, "h2", "alpha", 0.5, published=published),
            make_row(run.run_id, "h2o", "alpha", 2.5),
            make_row(run.run_id, "h2-scan@0.7", "alpha", 0.1, scan_parent="h2-scan", scan_length=0.7),
            make_row(run.run_id, "h2-scan@1", "alpha", 0.2, scan_parent="h2-scan", scan_length=1.0),
            make_row(run.run_id, "lih-scan@1.5", "alpha", 0.1, scan_parent="lih-scan", scan_length=1.5),
            make_row(run.run_id, "lih-scan@2", "alpha", 0.2, scan_parent="lih-scan", scan_length=2.0)]
    html = render_html(build_report(run, rows, registry))
    page = Page(html)
    assert not {"link", "img", "iframe", "object", "embed"} & set(page.tags)
    assert [v for n, v in page.attrs if n == "src"] == []
    assert all(v.startswith("#") for n, v in page.attrs if n in ("href", "xlink:href"))
    assert "default-src 'none'" in html and "@media print" in html
    assert all(u.startswith("#") for u in re.findall(r"url\(([^)]*)\)", html))   # clip paths only
    bib = re.search(r'<section id="bibliography">.*?</section>', html, re.S)
    assert bib and "https://" in bib.group(0)                 # the CCCBDB / DOI addresses, as text
    outside = html[:bib.start()] + html[bib.end():]
    assert "http://" not in outside and "https://" not in outside
    assert html.count("<svg") == 2 and len(page.ids) == len(set(page.ids))   # figures never share an id
    defined = set(page.ids)
    assert all(ref in defined for ref in re.findall(r'(?:url\(#|href="#)([^)"]+)', html))   # no dangling link
    keys = {case.geometry_source for name, case in registry.cases.items() if name in ("h2", "h2o", "h2-scan@1")}
    for key in keys | {"szabo-ostlund-1996"}:
        assert f'id="bib-{key}"' in html


def test_every_verdict_is_spelled_out():
    run = make_run(methods=("m",))
    rows = []
    for n, v in enumerate(VERDICTS):
        status = v if v in ("error", "timeout", "invalid", "below-exact", "wrong-state") else "ok"
        err = {"pass": 0.1, "fail": 9.0, "inconclusive": 1.5, "below-exact": -50.0}.get(v)
        row = make_row(run.run_id, f"case-{n}", "m", err, status=status,
                       stderr_ha=0.001 if v == "inconclusive" else None)
        if v == "unconverged":                 # judged with --require-converged
            row = dataclasses.replace(row, verdict=v, converged=False)
        rows.append(row)
    data = build_report(run, rows)
    assert sorted(r.verdict for t in data.tables for r in t.rows) == sorted(VERDICTS)
    html = render_html(data)
    for v in VERDICTS:
        label, symbol = verdict_label(v)
        cell = re.search(rf'<span class="verdict v-{re.escape(v)}"><span class="sym" aria-hidden="true">'
                         rf'{re.escape(symbol)}</span> {re.escape(label)}</span>', html)
        assert cell, v
    assert "GATE FAILED" in html and f"{len(VERDICTS) - 1} of {len(VERDICTS)} task(s) not passing" in html


def test_accuracy_scale_bins_in_units_of_the_threshold():
    assert scale_class(0.15, 1.5) == "p0" and scale_class(-0.15, 1.5) == "n0"       # 0.1 thresholds: the edge
    assert scale_class(-1.5, 1.5) == "n1" and scale_class(1.6, 1.5) == "p2"
    assert scale_class(4.5, 1.5) == "p2" and scale_class(4.6, 1.5) == "p3"
    assert scale_class(-15.1, 1.5) == "n4" and scale_class(45.0, 1.5) == "p4"
    assert scale_class(150.0, 1.5) == "p5" and scale_class(151.0, 1.5) == "p6" and scale_class(-1e6, 1.5) == "n6"
    assert scale_class(None, 1.5) == "none"


def test_a_verdict_scoring_adds_later_still_renders(monkeypatch):
    """A verdict without a label of its own (a future one) is spelled from its name in the matrix,
    the tables and the counts; a known one keeps its label."""
    assert verdict_label("wrong-state") == ("WRONG STATE", VERDICT_LABELS["wrong-state"][1])
    assert verdict_label("spin-flip-drift")[0] == "SPIN FLIP DRIFT"
    run = make_run(methods=("m",))
    rows = [make_row(run.run_id, "h2", "m", 0.1), make_row(run.run_id, "lih", "m", 30.0)]
    rows[1].verdict = "spin-flip-drift"
    data = build_report(run, rows)
    assert data.verdicts == ["pass", "spin-flip-drift"] and data.counts == {"pass": 1, "spin-flip-drift": 1}
    assert [c.label for g in data.matrix.groups for row in g.rows for c in row.cells] == ["PASS", "SPIN FLIP DRIFT"]
    html = render_html(data)
    assert html.count("SPIN FLIP DRIFT") >= 3 and 'id="show-spin-flip-drift"' in html


def test_collect_from_store(tmp_path, registry):
    run, rows = synthetic_grid(n_cases=6, scan_points=4)
    rows[0].message = "first row"
    with store_with(tmp_path / "r.sqlite", run, rows) as store:
        data = collect_report(store, run.run_id, registry)
    assert data.n_tasks == 18 and [s.method for s in data.summaries] == ["alpha", "beta", "gamma"]
    assert sum(data.counts.values()) == 18
    by_method = {t.summary.method: t for t in data.tables}
    assert by_method["gamma"].show_sigma and not by_method["alpha"].show_sigma
    assert data.n_failing == sum(1 for r in rows if r.verdict != "pass") and not data.gate_passed
    # matrix: 6 rows x 3 methods, each cell the stored error; the scan's points one group, in bond order
    lines = [row for g in data.matrix.groups for row in g.rows]
    assert len(lines) == 6 and all(len(row.cells) == 3 for row in lines)
    stored = {(r.case, r.method): r.error_mha for r in rows}
    for row in lines:
        for column, cell in zip(data.matrix.columns, row.cells):
            assert cell.error_mha == stored[(row.case, column.method)]
    scan_group = next(g for g in data.matrix.groups if g.key == "fake-scan")
    assert [row.scan_length for row in scan_group.rows] == [0.5, 0.75, 1.0, 1.25]
    # tables worst first: failing before passing, then by |error|
    for t in data.tables:
        failing = [r.verdict != "pass" for r in t.rows]
        assert failing == sorted(failing, reverse=True)
        errs = [abs(r.error_mha) for r in t.rows if r.verdict != "pass"]
        assert errs == sorted(errs, reverse=True)
    # the scan: four points in length order, statistics as scoring computes them
    (scan,) = data.scans
    assert scan.name == "fake-scan" and scan.lengths == [0.5, 0.75, 1.0, 1.25]
    beta = next(s for s in scan.series if s.method == "beta")
    expected = curve_statistics("fake-scan", [r.error_mha for r in rows if r.method == "beta" and r.scan_parent])
    assert beta.stats == expected
    # ladders: one per case, deltas from the stored rung energies
    assert len(data.ladders) == 6
    lad = data.ladders[0]
    hf = lad.rung("hf")
    assert hf.delta_mha == pytest.approx(1000 * (hf.energy_ha - lad.primary_energy_ha))
    assert data.ladder_rungs == ["hf", "mp2", "ccsd", "ccsd(t)"]
    assert data.provenance.results_hash and data.provenance.run_id == run.run_id


def test_report_of_30_cases_by_3_methods_stays_small():
    run, rows = synthetic_grid(n_cases=30, scan_points=10)
    html = render_html(build_report(run, rows))
    size = len(html.encode("utf-8"))
    print(f"30 cases x 3 methods: {size:,} bytes")
    assert size < 2 * 1024 * 1024
    assert html.count('<tr id="task-') == 90 and html.count('<tr data-verdict=') == 90   # tasks and resources
    assert html.count('<td class="cell s-') == 90                                      # the matrix


def test_scan_svg_is_inline_ready():
    run, rows = synthetic_grid(n_cases=5, scan_points=5)
    (scan,) = build_report(run, rows).scans
    a, b = scan_svg(scan, "one"), scan_svg(scan, "two")
    assert a.startswith("<svg") and a.endswith("</svg>")
    for bad in ("<?xml", "<!DOCTYPE", "http", "<metadata"):
        assert bad not in a
    assert a == scan_svg(scan, "one")                         # same data, same bytes
    ids_a, ids_b = set(re.findall(r' id="([^"]+)"', a)), set(re.findall(r' id="([^"]+)"', b))
    assert ids_a and not ids_a & ids_b


def test_report_command(tmp_path, capsys):
    run, rows = synthetic_grid(n_cases=3, scan_points=0)
    store_with(tmp_path / "r.sqlite", run, rows).close()
    parser = argparse.ArgumentParser()
    add_report_arguments(parser)
    out = tmp_path / "sub" / "report.html"
    args = parser.parse_args([run.run_id[:12], "--db", str(tmp_path / "r.sqlite"), "--out", str(out)])
    assert run_report(args) == 0
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert run.run_id in capsys.readouterr().out
    with pytest.raises(InputError, match="no run"):
        run_report(parser.parse_args(["nope", "--db", str(tmp_path / "r.sqlite"), "--out", str(out)]))
    with pytest.raises(InputError):
        run_report(parser.parse_args(["latest", "--db", str(tmp_path / "missing.sqlite"), "--out", str(out)]))


def test_real_run_report(real_run, registry):
    """The demo plugin's bug shows on the real run: below-exact on the cation only."""
    with ResultStore.open(real_run.db, create=False) as store:
        data = collect_report(store, real_run.run_id, registry)
    verdicts = {(r.case, r.method): r.verdict for t in data.tables for r in t.rows}
    plugin = "tallowick.adapter:TallowickMethod"
    assert verdicts[("heh-cation", plugin)] == "below-exact", real_run.output
    assert verdicts[("h2", plugin)] == "pass" and verdicts[("h2", "exact-sector")] == "pass"
    assert verdicts[("h2", "hf-bitstring")] == "fail"
    assert not data.gate_passed and real_run.returncode == 1
    assert {c.key for c in data.bibliography} >= {registry.cases[name].geometry_source for name in ("h2", "heh-cation")}
    html = render_html(data)
    assert "BELOW EXACT" in html and "wrong sector or constant?" in html


def _gate(run, rows, **changes):
    """A stored-shape gate decision over ``rows`` (the report never decides; it renders this)."""
    from benchsuite.report.html import stored_gate

    gate = stored_gate(run, rows)
    gate.update(changes)
    return gate


def test_matrix_groups_molecules_and_shows_convergence_and_configuration(registry):
    """h2 and the h2-scan points are one molecule (H2), in bond order; a not-converged result and a
    changed configuration show in their cells; the decision's reasons are stated, not recounted."""
    run = make_run(methods=("alpha", "beta"))
    rows = [make_row(run.run_id, case, method, err, scan_parent=parent, scan_length=length)
            for case, parent, length in (("h2-scan@1", "h2-scan", 1.0), ("h2", None, None),
                                         ("h2-scan@0.7", "h2-scan", 0.7), ("heh-cation", None, None))
            for method, err in (("alpha", 0.2), ("beta", 5.0))]
    rows[0].converged = False
    change = {"kind": "error-grew", "method": "beta", "case": "h2", "basis": "sto-3g", "encoding": rows[0].encoding,
              "before": "0.1", "after": "5.0", "detail": "", "config": ["option depth: 2 -> 1"]}
    baseline = {"base_id": "r-old", "n_common": 8, "regressions": 1, "max_increase_mha": 0.1, "changes": [change],
                "config_changes": [], "problems": []}
    run.summary = {"gate": _gate(run, rows, baseline=baseline, reasons=["a reason of the stored decision"])}
    data = build_report(run, rows, registry)
    groups = {g.formula_text: g for g in data.matrix.groups}
    assert set(groups) == {"H₂", "HHe⁺"}
    assert [r.case for r in groups["H₂"].rows] == ["h2", "h2-scan@0.7", "h2-scan@1"]
    assert groups["H₂"].rows[1].geometry == "h2-scan, r = 0.7 Å" and groups["H₂"].formula_html == "H<sub>2</sub>"
    cells = {(row.case, col.method): c for g in data.matrix.groups for row in g.rows
             for col, c in zip(data.matrix.columns, row.cells)}
    assert cells[("h2-scan@1", "alpha")].not_converged and not cells[("h2", "alpha")].not_converged
    assert cells[("h2", "beta")].config == ["option depth: 2 -> 1"] and cells[("h2", "beta")].regression == "error-grew"
    assert cells[("h2", "beta")].title == "h2 / STO-3G / jordan-wigner, interleaved · beta"
    html = render_html(data)
    assert "↻ not converged" in html and "⚙ config changed" in html and "▲ regression" in html
    assert "a reason of the stored decision" in html and "GATE FAILED" in html and "exit code 1" in html
    assert 'id="curves"' in html                                 # a scan: its curve section
    assert "H<sub>2</sub>" in html and "HHe<sup>+</sup>" in html


def test_empty_sections_are_left_out():
    run = make_run(methods=("alpha",))
    rows = [make_row(run.run_id, "h2", "alpha", 0.2)]
    run.summary = {"gate": _gate(run, rows, passed=True, reasons=[], failing=[], exit_code=0)}
    html = render_html(build_report(run, rows))
    assert 'id="curves"' not in html and 'href="#curves"' not in html      # no scan, no curves
    assert 'id="baseline"' not in html and 'id="bibliography"' not in html
    assert "GATE PASSED" in html and "GATE FAILED" not in html and "exit code 0" in html


def test_error_axis_is_logarithmic_with_the_threshold_line():
    """|error| on a log axis from the floor (or a decade under the smallest error) to a decade over
    the largest, the threshold always inside; errors under the floor are named on the plot."""
    from benchsuite.report.plots import ERROR_FLOOR_MHA, error_axis_limits

    assert error_axis_limits([0.0, 1e-9, -277.0], 1.5936) == (ERROR_FLOOR_MHA, 1000.0)
    assert error_axis_limits([5.0, -40.0], 1.5936) == (0.1, 1000.0)
    assert error_axis_limits([None], 1.5936) == (0.1, 10.0)
    run = make_run(methods=("exact", "rough"))
    rows = [make_row(run.run_id, f"s@{x:g}", m, err, scan_parent="s", scan_length=x)
            for x in (0.7, 1.0, 1.5) for m, err in (("exact", 1e-7), ("rough", -12.0 * x))]
    (scan,) = build_report(run, rows).scans
    svg = scan_svg(scan, "axis")
    assert "threshold 1.59 mHa" in svg and "|error| / mHa" in svg
    assert "at or below 0.001 mHa: exact" in svg and "rough" not in svg.split("at or below")[1].split("<")[0]
