"""The terminal summary, the JUnit names and the naming helper: chemistry first, one decision."""

from __future__ import annotations

import xml.etree.ElementTree as ET

from benchsuite.report.gate import junit_xml
from benchsuite.report.html import stored_gate
from benchsuite.report.naming import basis_label, encoding_label, task_label
from benchsuite.report.terminal import render_summary
from tests.report import make_row, make_run


def _run():
    run = make_run(methods=("alpha", "beta"))
    rows = [make_row(run.run_id, "h2", "alpha", 0.2), make_row(run.run_id, "heh-cation", "alpha", -40.0),
            make_row(run.run_id, "h2", "beta", 3.0), make_row(run.run_id, "heh-cation", "beta", 0.9)]
    gate = stored_gate(run, rows)
    gate.update(n_scored=4, allow_inconclusive=False, require_converged=False, unconverged=[],
                stochastic={"n_tasks": 0}, baseline=None,
                worst=dict(gate["failing"][0], task_key="", threshold_mha=1.5936, converged=True, message=""),
                reasons=["2 of 4 task(s) not passing"], passed=False)
    gate["failing"] = [dict(t, threshold_mha=1.5936, encoding=rows[0].encoding, message="")
                       for t in sorted(gate["failing"], key=lambda t: -abs(t["error_mha"]))]
    gate["worst"]["encoding"] = rows[0].encoding
    return run, rows, gate


def test_summary_is_per_method_worst_first_and_ends_with_the_decision():
    run, rows, gate = _run()
    lines = render_summary(run, rows, gate).splitlines()
    alpha = next(ln for ln in lines if ln.startswith("alpha"))
    beta = next(ln for ln in lines if ln.startswith("beta"))
    assert alpha.split()[1:5] == ["2", "1", "/", "2"] and "-40.0000" in alpha and "heh-cation / STO-3G" in alpha
    assert "+3.0000" in beta and "h2 / STO-3G (fail)" in beta
    assert any("within 1 kcal/mol" in ln for ln in lines)
    start = lines.index("not passing, worst first (2):")
    first, second = lines[start + 1], lines[start + 2]
    assert first.split()[:2] == ["-40.0000", "mHa"] and "25.1 x thr" in first and "below-exact" not in first
    assert "heh-cation / STO-3G / jordan-wigner · alpha" in first and "h2 / STO-3G / jordan-wigner · beta" in second
    assert lines[-1] == "gate failed: 2 of 4 task(s) not passing"
    assert not any(ln.lstrip().startswith(("PASSED", "FAILED", "PASS ", "FAIL ")) for ln in lines)
    assert all("−" not in ln for ln in lines)                   # an ASCII minus: logs stay greppable


def test_junit_testcases_are_named_like_chemistry():
    run, rows, gate = _run()
    root = ET.fromstring(junit_xml(run, rows, gate))
    names = [c.get("name") for s in root.findall("testsuite") if s.get("name") == "alpha" for c in s]
    assert names == ["h2 / STO-3G / jordan-wigner · alpha", "heh-cation / STO-3G / jordan-wigner · alpha"]
    assert root.find("testsuite[@name='gate']/testcase/failure").get("message") == "2 of 4 task(s) not passing"


def test_basis_and_encoding_as_published():
    """Basis names as their authors print them (Hehre, Stewart & Pople 1969 STO-3G; Dunning 1989 cc-pVDZ;
    Hehre, Ditchfield & Pople 1972 6-31G; Weigend & Ahlrichs 2005 def2-SVP)."""
    assert [basis_label(b) for b in ("sto-3g", "cc-pvdz", "aug-cc-pvtz", "6-31g", "6-31g*", "6-311++g(d,p)",
                                     "def2-svp", "cc-pcvqz")] == [
        "STO-3G", "cc-pVDZ", "aug-cc-pVTZ", "6-31G", "6-31G*", "6-311++G(d,p)", "def2-SVP", "cc-pCVQZ"]
    assert basis_label("Li:6-31g,H:sto-3g") == "Li 6-31G, H STO-3G" and basis_label("my-basis") == "my-basis"
    assert encoding_label("parity+tapered/blocked") == "parity, blocked, tapered"
    assert task_label("h2", "sto-3g", "jordan-wigner/interleaved", "exact-sector") == \
        "h2 / STO-3G / jordan-wigner · exact-sector"
