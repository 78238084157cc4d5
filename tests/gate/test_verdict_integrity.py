"""The gate's verdict cannot be talked round: baselines match tasks by what they are, every output
renders one decision, summaries cover every task.  End to end through ``benchsuite run``."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
DRIFT = "tests.gate.plugins:DriftingSolver"
STALLED = "tests.gate.plugins:StalledSolver"


@pytest.fixture
def bench(tmp_path):
    """``benchsuite run ...`` in a subprocess (the plugin default is read at import, per process)."""

    def run(*argv, default_mha: float = 0.4, extra_path: list[str] = ()):
        env = dict(os.environ, QUARRY_DRIFT_DEFAULT_MHA=str(default_mha),
                   BENCHSUITE_CACHE=str(tmp_path / "cache"), BENCHSUITE_DB=str(tmp_path / "results.sqlite"),
                   PYTHONPATH=os.pathsep.join([*extra_path, str(REPO)]))
        proc = subprocess.run([sys.executable, "-m", "benchsuite.cli", *argv], cwd=tmp_path, env=env,
                              capture_output=True, text=True, timeout=600)
        return proc.returncode, proc.stdout, proc.stderr

    run.dir = tmp_path
    return run


def _outputs(d: Path):
    doc = json.loads((d / "run.json").read_text())
    junit = ET.parse(d / "run.xml").getroot()
    html = (d / "run.html").read_text()
    return doc, junit, html


def _suites(junit):
    return {s.get("name"): s for s in junit.findall("testsuite")}


def test_changed_option_default_is_a_regression_in_every_output(bench):
    """Same plugin spec, new default (0.4 -> 2.4 mHa bias): every smoke task regresses, the change is named,
    and exit code, terminal, JSON, JUnit and HTML all say the gate failed."""
    code, out, err = bench("run", "--suite", "smoke", "--method", DRIFT, "--workers", "2", default_mha=0.4)
    assert code == 0, out + err
    d = bench.dir
    code, out, err = bench("run", "--suite", "smoke", "--method", DRIFT, "--workers", "2", "--baseline", "latest",
                           "--json", str(d / "run.json"), "--junit", str(d / "run.xml"),
                           "--report", str(d / "run.html"), default_mha=2.4)
    assert code == 1, out + err
    regressions = [ln for ln in out.splitlines() if ln.strip().startswith("regression")]
    assert len(regressions) == 6 and all("pass->not-pass" in ln for ln in regressions)
    assert out.count("changed configuration: option bias_mha: 0.4 -> 2.4") == 6
    doc, junit, html = _outputs(d)
    gate = doc["gate"]
    assert gate["exit_code"] == 1 and not gate["passed"]
    assert gate["baseline"]["regressions"] == 6 and gate["baseline"]["n_common"] == 6
    assert all(c["config"] == ["option bias_mha: 0.4 -> 2.4"] for c in gate["baseline"]["changes"])
    base_suite = next(s for name, s in _suites(junit).items() if name.startswith("baseline "))
    assert base_suite.get("failures") == "6"
    assert _suites(junit)["gate"].get("failures") == "1"
    assert "GATE FAILED" in html and "GATE PASSED" not in html
    assert "6 regression(s) against baseline" in html and "option bias_mha: 0.4 -&gt; 2.4" in html


def test_a_regression_alone_fails_every_output(bench):
    """Every task still passes (0.4 -> 0.9 mHa), but |error| grew by 0.5 mHa > 0.1 mHa: the gate fails, and
    the HTML banner, JUnit and JSON agree with exit code 1."""
    bench("run", "--case", "h2", "lih", "--method", DRIFT, default_mha=0.4)
    d = bench.dir
    code, out, err = bench("run", "--case", "h2", "lih", "--method", DRIFT, "--baseline", "latest",
                           "--json", str(d / "run.json"), "--junit", str(d / "run.xml"),
                           "--report", str(d / "run.html"), default_mha=0.9)
    assert code == 1, out + err
    doc, junit, html = _outputs(d)
    assert doc["counts"] == {"pass": 2}
    assert doc["gate"]["reasons"] == ["2 regression(s) against baseline " + doc["gate"]["baseline"]["base_id"]]
    assert _suites(junit)["gate"].get("failures") == "1"
    assert "GATE FAILED" in html
    assert out.strip().splitlines()[-1].startswith("gate failed: 2 regression(s)")


def test_compare_with_no_common_task_fails(bench):
    bench("run", "--case", "h2", "--method", DRIFT)
    bench("run", "--case", "lih", "--method", DRIFT)
    from benchsuite.store.db import ResultStore

    with ResultStore.open(bench.dir / "results.sqlite", create=False) as store:
        first, second = [r.run_id for r in store.list_runs()]
    code, out, _ = bench("compare", first, second)
    assert code == 1 and "share no task" in out
    assert "1 baseline task(s) missing" in out


def test_new_tasks_fail_unless_allowed(bench):
    bench("run", "--case", "h2", "--method", DRIFT)
    code, out, _ = bench("run", "--case", "h2", "lih", "--method", DRIFT, "--baseline", "latest")
    assert code == 1 and "1 task(s) not in the baseline (allow them with --allow-new)" in out
    code, out, _ = bench("run", "--case", "h2", "lih", "--method", DRIFT, "--baseline", "latest", "--allow-new")
    assert code == 0, out


def test_unconverged_is_flagged_and_can_be_required(bench):
    code, out, _ = bench("run", "--case", "h2", "--method", STALLED)
    assert code == 0 and "not converged (1, flagged only)" in out
    code, out, _ = bench("run", "--case", "h2", "--method", STALLED, "--require-converged")
    assert code == 1 and "unconverged" in out and "they fail the gate (--require-converged)" in out


def test_demo_summary_names_the_worst_error_of_any_status(bench):
    """The demo solver's HeH+ result (three electrons instead of two) is far below exact; the summary's
    worst error and first failing line are that task, not 0.0000."""
    code, out, err = bench("run", "--case", "h2", "heh-cation", "--method", "exact-sector",
                           "--method", "tallowick.adapter:TallowickMethod",
                           extra_path=[str(REPO / "examples" / "tallowick")])
    assert code == 1, out + err
    worst = next(ln for ln in out.splitlines() if ln.startswith("worst error:"))
    assert "tallowick" in worst and "heh-cation" in worst
    value = float(worst.split()[2])
    assert -165.0 < value < -163.0                 # about -164.2 mHa, the cation's lost electron
    lines = out.splitlines()
    first_failing = lines[next(i for i, ln in enumerate(lines) if ln.startswith("not passing")) + 1]
    assert "heh-cation" in first_failing
    table = [ln for ln in lines if ln.startswith("tallowick")][0]
    assert "164." in table                           # the method table's worst |error| too
