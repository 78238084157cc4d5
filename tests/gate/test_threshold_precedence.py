"""Which pass threshold a task gets: command line, then case file, then suite, then 1 kcal/mol.

Checked through `benchsuite run` on scratch cases with the HF determinant, whose error on H2/STO-3G
(the minimal-basis correlation energy, about 20.5 mHa: Szabo & Ostlund, Modern Quantum Chemistry, 1989,
chapter 4) lies between the thresholds used here, so each source flips the verdict.
"""

from __future__ import annotations

import json

import pytest

from tests.conftest import H2_CASE

SUITE = 'name = "scratch-loose"\ndescription = "scratch suite"\ncases = ["scratch-h2*"]\nthreshold_mha = {t}\n'


@pytest.fixture
def cases(scratch, tmp_path, monkeypatch):
    monkeypatch.setenv("BENCHSUITE_DB", str(tmp_path / "r.sqlite"))
    scratch(H2_CASE, "scratch-h2.toml")
    scratch(H2_CASE.replace('name = "scratch-h2"', 'name = "scratch-h2-strict"') + "threshold_mha = 5.0\n",
            "scratch-h2-strict.toml")
    (tmp_path / "suites").mkdir()
    (tmp_path / "suites" / "loose.toml").write_text(SUITE.format(t=30.0))
    return tmp_path


def _rows(run_cli, cases, *argv):
    out = cases / "run.json"
    code, _, err = run_cli("run", "--cases", str(cases), "--method", "hf-bitstring", "--json", str(out), *argv)
    assert code in (0, 1), err
    return {r["case"]: r for r in json.loads(out.read_text())["results"]}


def test_suite_threshold_applies_where_the_case_sets_none(run_cli, cases):
    rows = _rows(run_cli, cases, "--suite", "scratch-loose")
    loose, strict = rows["scratch-h2"], rows["scratch-h2-strict"]
    assert 15.0 < abs(loose["error_mha"]) < 25.0           # the correlation energy sits between 5 and 30 mHa
    assert loose["threshold_mha"] == 30.0 and loose["verdict"] == "pass"
    assert strict["threshold_mha"] == 5.0 and strict["verdict"] == "fail"   # the case file beats the suite


def test_command_line_beats_case_and_suite(run_cli, cases):
    rows = _rows(run_cli, cases, "--suite", "scratch-loose", "--threshold-mha", "1.0")
    assert {r["threshold_mha"] for r in rows.values()} == {1.0}
    assert {r["verdict"] for r in rows.values()} == {"fail"}


def test_default_is_one_kcal_per_mol(run_cli, cases):
    rows = _rows(run_cli, cases, "--case", "scratch-h2")
    assert rows["scratch-h2"]["threshold_mha"] == pytest.approx(1.5936, abs=1e-4)
