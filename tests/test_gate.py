"""The gate end to end: `benchsuite run` on real cases and methods, in real worker processes."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from benchsuite.store.db import ResultStore

PLUGINS = "tests.methods.plugins"


@pytest.fixture
def gate(tmp_path, monkeypatch, run_cli):
    """Run the CLI with a private database and cache; returns (code, stdout, stderr, paths)."""
    monkeypatch.setenv("BENCHSUITE_DB", str(tmp_path / "results.sqlite"))

    def run(*argv):
        return run_cli(*argv)

    run.db = tmp_path / "results.sqlite"
    run.dir = tmp_path
    return run


def test_smoke_run_outputs_agree(gate, registry):
    """Exit code, JSON, JUnit (parsed as XML) and database rows tell the same story."""
    js, xml_path = gate.dir / "run.json", gate.dir / "run.xml"
    code, out, err = gate("run", "--suite", "smoke", "--method", "exact-sector", "--method", "hf-bitstring",
                          "--workers", "2", "--json", str(js), "--junit", str(xml_path))
    n_cases = len(registry.suite_entries("smoke"))
    doc = json.loads(js.read_text())
    rows = ResultStore.open(gate.db, create=False).results(doc["run"]["run_id"])
    assert len(doc["results"]) == len(rows) == 2 * n_cases
    # exact diagonalisation passes everywhere; the HF determinant misses correlation (> 1.6 mHa)
    by_method = {}
    for r in doc["results"]:
        by_method.setdefault(r["method"], []).append(r)
    assert {r["verdict"] for r in by_method["exact-sector"]} == {"pass"}
    assert all(abs(r["error_mha"]) < 1e-5 for r in by_method["exact-sector"])
    assert {r["verdict"] for r in by_method["hf-bitstring"]} == {"fail"}
    assert code == 1                                     # any failing task fails the gate
    db = {(r.case, r.method): r for r in rows}
    for r in doc["results"]:
        stored = db[(r["case"], r["method"])]
        assert stored.verdict == r["verdict"] and stored.energy_ha == r["energy_ha"]
        assert stored.error_mha == pytest.approx(r["error_mha"], abs=1e-12)
        assert r["threshold_mha"] == pytest.approx(1.5936, abs=1e-4)
    tree = ET.parse(xml_path).getroot()
    suites = {s.get("name"): s for s in tree.findall("testsuite")}
    cases = [c for name in ("exact-sector", "hf-bitstring") for c in suites[name].findall("testcase")]
    assert len(cases) == len(rows)
    failures = [f for name in ("exact-sector", "hf-bitstring") for f in suites[name].findall("testcase/failure")]
    assert len(failures) == n_cases
    # the gate suite fails exactly when the exit code says so, and JSON carries the same decision
    assert suites["gate"].get("failures") == "1" and doc["gate"]["exit_code"] == code == 1
    assert doc["gate"]["reasons"] == [f"{n_cases} of {2 * n_cases} task(s) not passing"]
    for f in failures:
        assert "Eh" in f.get("message") and "mHa" in f.get("message")
    assert suites["hf-bitstring"].get("failures") == str(n_cases)
    assert suites["exact-sector"].get("failures") == "0"


def test_passing_run_exits_zero_and_command_line_threshold(gate):
    code, out, _ = gate("run", "--case", "h2", "heh-cation", "--method", "exact-sector")
    assert code == 0, out
    code, out, _ = gate("run", "--case", "h2", "--method", "hf-bitstring", "--threshold-mha", "50")
    assert code == 0, out


def test_fault_isolation_in_the_pool(gate):
    """A plugin that raises, one that hangs past the timeout and one that aborts its worker each
    get their status; the good method's tasks all complete."""
    js = gate.dir / "faults.json"
    code, out, err = gate("run", "--case", "h2", "heh-cation", "--method", f"{PLUGINS}:Raises",
                          "--method", f"{PLUGINS}:Hangs", "--method", f"{PLUGINS}:Aborts",
                          "--method", "exact-sector", "--timeout-s", "8", "--workers", "2",
                          "--json", str(js))
    assert code == 1
    results = json.loads(js.read_text())["results"]
    status = {(r["case"], r["method"].split(":")[-1]): r for r in results}
    assert len(results) == 8
    for case in ("h2", "heh-cation"):
        assert status[(case, "Raises")]["status"] == "error"
        assert "solver diverged" in status[(case, "Raises")]["message"]
        assert status[(case, "Hangs")]["status"] == "timeout"
        assert status[(case, "Aborts")]["status"] == "error"
        assert "SIGABRT" in status[(case, "Aborts")]["message"]
        assert status[(case, "exact-sector")]["verdict"] == "pass"


def test_compare_reports_the_worsened_case(gate):
    """Two stored runs; in the second one case's energy is 2 mHa worse: exactly that is reported."""
    gate("run", "--case", "h2", "heh-cation", "--method", f"{PLUGINS}:HartreeFockPlugin",
         "--threshold-mha", "100")
    gate("run", "--case", "h2", "heh-cation", "--method", f"{PLUGINS}:HartreeFockPlugin",
         "--threshold-mha", "100")
    store = ResultStore.open(gate.db, create=False)
    base, new = [r.run_id for r in store.list_runs()][:2]
    base, new = sorted([base, new], key=lambda rid: store.get_run(rid).started_at)
    # worsen one stored result by 2 mHa, as a regressed solver would
    rows = [r for r in store.results(new) if r.case == "heh-cation"]
    worse = rows[0]
    worse.energy_ha += 0.002
    worse.error_mha += 2.0
    store.add_result(worse)
    code, out, err = gate("compare", base, new, "--db", str(gate.db))
    assert code == 1
    lines = [ln for ln in out.splitlines() if ln.strip().startswith("regression")]
    assert len(lines) == 1 and "heh-cation" in lines[0] and "error-grew" in lines[0]
    assert "changed configuration" not in out          # same plugin, same options, same packages
    code, out, _ = gate("compare", base, base, "--db", str(gate.db))
    assert code == 0 and "comparison passed" in out


def test_sigkill_then_resume_stores_every_task_once(tmp_path):
    """SIGKILL a real `benchsuite run` part-way; --resume completes it with nothing lost or doubled."""
    env = {**os.environ, "BENCHSUITE_DB": str(tmp_path / "r.sqlite"), "BENCHSUITE_CACHE": str(tmp_path / "c"),
           "PYTHONPATH": str(Path(__file__).resolve().parents[1])}
    cmd = [sys.executable, "-m", "benchsuite.cli", "run", "--suite", "smoke", "--method", "exact-sector",
           "--method", "hf-bitstring", "--method", f"{PLUGINS}:HartreeFockPlugin", "--workers", "1",
           "--threshold-mha", "30"]
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            start_new_session=True)
    store_path = tmp_path / "r.sqlite"
    deadline = time.time() + 120
    stored = 0
    while time.time() < deadline and proc.poll() is None:
        time.sleep(0.2)
        if store_path.exists():
            try:
                runs = ResultStore.open(store_path, create=False).list_runs()
                stored = len(ResultStore.open(store_path, create=False).results(runs[0].run_id)) if runs else 0
            except Exception:
                stored = 0
            if stored >= 3:
                break
    assert proc.poll() is None, "the run finished before it could be killed"
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    store = ResultStore.open(store_path, create=False)
    run_id = store.list_runs()[0].run_id
    before = {r.task_key for r in store.results(run_id)}
    assert 3 <= len(before) < 18
    done = subprocess.run([sys.executable, "-m", "benchsuite.cli", "run", "--resume", run_id], env=env,
                          capture_output=True, text=True, timeout=300)
    assert done.returncode in (0, 1), done.stderr
    rows = ResultStore.open(store_path, create=False).results(run_id)
    keys = [r.task_key for r in rows]
    assert len(keys) == len(set(keys)) == 18
    assert before <= set(keys)
    assert {r.threshold_mha for r in rows} == {30.0}      # the resumed part kept the run's settings


def test_dask_cluster_matches_the_process_pool(gate):
    """A real dask.distributed LocalCluster (2 worker processes on loopback) gives the same results."""
    distributed = pytest.importorskip("dask.distributed")
    local_json, dask_json = gate.dir / "local.json", gate.dir / "dask.json"
    args = ["run", "--case", "h2", "lih", "oh", "--method", "exact-sector", "--method", "hf-bitstring"]
    gate(*args, "--json", str(local_json))
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        code, out, err = gate(*args, "--scheduler", cluster.scheduler_address, "--json", str(dask_json))
    local = {(r["case"], r["method"]): r for r in json.loads(local_json.read_text())["results"]}
    remote = {(r["case"], r["method"]): r for r in json.loads(dask_json.read_text())["results"]}
    assert set(local) == set(remote) and len(local) == 6
    for key, r in local.items():
        assert remote[key]["status"] == r["status"] == "ok"
        assert remote[key]["verdict"] == r["verdict"]
        assert remote[key]["energy_ha"] == pytest.approx(r["energy_ha"], abs=1e-10)
