"""The pytest plugin in a solver's own repository: the Tallowick example's test file, run by a fresh
pytest process in a copy of examples/tallowick (a git checkout of its own)."""

from __future__ import annotations

import importlib.metadata
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from benchsuite import api

REPO = Path(__file__).resolve().parents[2]
TALLOWICK = REPO / "examples" / "tallowick"
#: The one-line fix of examples/tallowick/README.md: pass the charge and multiplicity on.
FIX = ("Molecule(symbols=tuple(case.symbols))",
       "Molecule(symbols=tuple(case.symbols), charge=case.charge, multiplicity=case.multiplicity)")
#: A change that costs 2 mHa everywhere (inside a 5 mHa threshold, outside the 0.1 mHa baseline limit).
OFFSET = ("energy_ha=res.eigenvalue,", "energy_ha=res.eigenvalue + 0.002,")


def solver_repo(root: Path, name: str, *edits: tuple[str, str]) -> Path:
    """A copy of the Tallowick repository with ``edits`` applied to its adapter, committed to git."""
    dst = root / name
    shutil.copytree(TALLOWICK, dst, ignore=shutil.ignore_patterns("__pycache__", "*.egg-info", ".benchsuite"))
    adapter = dst / "tallowick" / "adapter.py"
    text = adapter.read_text()
    for old, new in edits:
        assert old in text
        text = text.replace(old, new)
    adapter.write_text(text)
    git = ["git", "-c", "user.name=Quarry Lane", "-c", "user.email=lab@example.invalid"]
    for cmd in (["init", "-q"], ["add", "-A"], ["commit", "-qm", name]):
        subprocess.run(git + cmd, cwd=dst, check=True, capture_output=True)
    return dst


def _plugin_args() -> list[str]:
    """``-p benchsuite.pytest_plugin`` where benchsuite's metadata predates its pytest11 entry point
    (an editable install made before it was added); otherwise the entry point loads it."""
    registered = any(ep.value == "benchsuite.pytest_plugin" for ep in importlib.metadata.entry_points(group="pytest11"))
    return [] if registered else ["-p", "benchsuite.pytest_plugin"]


def run_pytest(repo: Path, db: Path, cache_dir: Path, *args: str) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if not k.startswith("PYTEST_")}
    env.update(PYTHONPATH=os.pathsep.join([str(repo), str(REPO)]), BENCHSUITE_CACHE=str(cache_dir),
               OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    cmd = [sys.executable, "-m", "pytest", "-p", "no:cacheprovider", *_plugin_args(), f"--bs-db={db}", *args]
    return subprocess.run(cmd, cwd=repo, env=env, capture_output=True, text=True, timeout=900)


def _git_head(repo: Path) -> str:
    return subprocess.run(["git", "rev-parse", "HEAD"], cwd=repo, capture_output=True, text=True).stdout.strip()


def test_exact_solver_passes_and_the_run_is_listed(tmp_path, cache_dir, run_cli):
    repo = solver_repo(tmp_path, "tallowick-fixed", FIX)
    db = tmp_path / "results.sqlite"
    proc = run_pytest(repo, db, cache_dir, "--bs-suite", "smoke")
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "6 passed" in proc.stdout and "gate passed" in proc.stdout
    code, out, _ = run_cli("runs", "--db", str(db), "--format", "json")
    (listed,) = json.loads(out)
    assert code == 0 and listed["source"] == "pytest" and listed["suite"] == "smoke"
    assert listed["methods"] == ["tallowick"] and listed["counts"] == {"pass": 6} and listed["passed"] is True
    assert listed["commit"] == _git_head(repo)
    run = api.load_run(listed["run_id"][:14], db).record
    assert run.plugin_git["tallowick"]["version"] == "0.9.0rc1"
    assert "tests/test_accuracy.py::test_tallowick_energy[heh-cation/sto-3g]" in run.summary["pytest"]["nodes"]
    code, out, _ = run_cli("table", "latest", "--db", str(db), "--format", "csv")
    assert code == 0 and out.count("tallowick") == 6
    code, out, _ = run_cli("report", listed["run_id"][:14], "--db", str(db), "--out", str(tmp_path / "r.html"))
    assert code == 0 and "gate passed" in out and "tallowick" in (tmp_path / "r.html").read_text()


def test_sector_bug_fails_naming_the_case_and_the_error(tmp_path, cache_dir):
    """The shipped 0.9.0rc1 ignores the charge: HeH+ solved in the neutral sector, 164 mHa below FCI
    (examples/tallowick/README.md)."""
    db = tmp_path / "results.sqlite"
    proc = run_pytest(solver_repo(tmp_path, "tallowick-0.9.0rc1"), db, cache_dir, "--bs-suite", "smoke")
    assert proc.returncode == 1
    assert "1 failed, 5 passed" in proc.stdout
    line = next(ln for ln in proc.stdout.splitlines() if ln.startswith("E ") and "heh-cation (sto-3g)" in ln)
    for part in ("tallowick energy -3.01", "vs fci -2.85", "error -164.1", " mHa, threshold 1.5936 mHa (1 kcal/mol",
                 "verdict below-exact", "wrong sector"):
        assert part in line, line
    stored = api.load_run("latest", db)
    assert stored.decision.counts == {"pass": 5, "below-exact": 1}


def test_xdist_stores_each_result_exactly_once(tmp_path, cache_dir):
    pytest.importorskip("xdist")
    db = tmp_path / "results.sqlite"
    proc = run_pytest(solver_repo(tmp_path, "tallowick-fixed", FIX), db, cache_dir, "--bs-suite", "smoke", "-n", "2")
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert len(api.list_runs(db)) == 1
    stored = api.load_run("latest", db)
    nodes = [r.metadata["pytest_node"] for r in stored.rows]
    assert len(stored.rows) == 6 and len(set(nodes)) == 6 and len({r.task_key for r in stored.rows}) == 6
    assert {r.case for r in stored.rows} == {e.case.name for e in api.load_suite("smoke")}
    assert stored.record.summary["pytest"]["workers"] == 2


def test_baseline_regression_of_2_mha_fails_the_session(tmp_path, cache_dir):
    db = tmp_path / "results.sqlite"
    select = ("--bs-case=h2", "--bs-case=lih", "--bs-threshold-mha=5")
    first = run_pytest(solver_repo(tmp_path, "before", FIX), db, cache_dir, *select)
    assert first.returncode == 0, first.stdout + first.stderr
    second = run_pytest(solver_repo(tmp_path, "after", FIX, OFFSET), db, cache_dir, *select, "--bs-baseline=latest")
    assert "2 passed" in second.stdout                   # each result is inside its 5 mHa threshold ...
    assert second.returncode == 1                        # ... but the session fails on the baseline
    assert "2 regression(s) against baseline" in second.stdout and "error-grew" in second.stdout
    assert "|error| 0.0000 -> 2.0000 mHa" in second.stdout


def test_benchmark_time_is_stored_beside_the_accuracy(tmp_path, cache_dir):
    pytest.importorskip("pytest_benchmark")
    repo = solver_repo(tmp_path, "tallowick-fixed", FIX)
    (repo / "tests" / "test_timed.py").write_text(
        "from tallowick.adapter import TallowickMethod\n\n\n"
        "def test_timed(bs_problem, bs_accuracy, benchmark):\n"
        "    solver = TallowickMethod()\n"
        "    options = {o.name: o.default for o in solver.options}\n"
        "    result = benchmark.pedantic(solver.run, args=(bs_problem.problem, options), rounds=3)\n"
        "    bs_accuracy(result, method='tallowick-timed')\n")
    db = tmp_path / "results.sqlite"
    proc = run_pytest(repo, db, cache_dir, "tests/test_timed.py", "--bs-case=h2", "--benchmark-enable")
    assert proc.returncode == 0, proc.stdout + proc.stderr
    (row,) = api.load_run("latest", db).rows
    bench = row.metadata["benchmark"]
    assert bench["rounds"] == 3 and row.seconds == bench["mean_s"] and bench["min_s"] <= bench["mean_s"]
    assert row.verdict == "pass"


def test_bad_selection_and_unusable_database_are_usage_errors(tmp_path, cache_dir):
    repo = solver_repo(tmp_path, "tallowick-fixed", FIX)
    unknown = run_pytest(repo, tmp_path / "r.sqlite", cache_dir, "--bs-suite", "no-such-suite")
    assert unknown.returncode == pytest.ExitCode.USAGE_ERROR and "unknown suite 'no-such-suite'" in unknown.stderr
    folder = tmp_path / "a-folder"
    folder.mkdir()
    proc = run_pytest(repo, folder, cache_dir, "--bs-case=h2")
    assert proc.returncode == pytest.ExitCode.USAGE_ERROR and "is a directory" in proc.stderr
    assert "passed" not in proc.stdout                     # refused before any test ran


@pytest.mark.slow
def test_entry_point_in_a_fresh_environment(tmp_path, cache_dir):
    """benchsuite's wheel in a new venv (other dependencies borrowed read-only through a .pth line, as in
    tests/test_packaging.py): pytest finds the plugin through the pytest11 entry point alone."""
    import sysconfig

    def ok(cmd, **kw):
        proc = subprocess.run(cmd, capture_output=True, text=True, timeout=900, **kw)
        assert proc.returncode == 0, f"{cmd}\n{proc.stdout}\n{proc.stderr}"
        return proc

    ok([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(tmp_path / "dist"), str(REPO)])
    venv = tmp_path / "venv"
    ok([sys.executable, "-m", "venv", str(venv)])
    py = venv / "bin" / "python"
    site = ok([str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"]).stdout.strip()
    Path(site, "borrowed-dependencies.pth").write_text(sysconfig.get_paths()["purelib"] + "\n")
    ok([str(py), "-m", "pip", "install", "-q", "--no-deps", str(next((tmp_path / "dist").glob("benchsuite-*.whl")))])
    repo = solver_repo(tmp_path, "tallowick-fixed", FIX)
    env = {k: v for k, v in os.environ.items() if not k.startswith("PYTEST_") and k != "PYTHONPATH"}
    env.update(PYTHONPATH=str(repo), BENCHSUITE_CACHE=str(cache_dir))
    proc = subprocess.run([str(py), "-m", "pytest", "-p", "no:cacheprovider", "--bs-suite", "smoke",
                           f"--bs-db={tmp_path / 'r.sqlite'}"], cwd=repo, env=env, capture_output=True, text=True,
                          timeout=900)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "benchsuite-0.1.0" in proc.stdout and "6 passed" in proc.stdout      # the plugins line names it
    runs = subprocess.run([str(venv / "bin" / "benchsuite"), "runs", "--db", str(tmp_path / "r.sqlite")],
                          env=env, capture_output=True, text=True, timeout=300)
    assert runs.returncode == 0 and "pytest  smoke  tallowick" in runs.stdout


def test_marker_and_options_choose_the_cases_with_readable_ids(tmp_path, cache_dir):
    repo = solver_repo(tmp_path, "tallowick-fixed", FIX)
    (repo / "tests" / "test_pinned.py").write_text(
        "import pytest\n\n\n"
        "@pytest.mark.benchsuite_cases('h2', 'heh-cation')\n"
        "def test_pinned(bs_case):\n"
        "    assert bs_case.case.name in ('h2', 'heh-cation')\n")
    listed = run_pytest(repo, tmp_path / "r.sqlite", cache_dir, "--co", "-q").stdout.splitlines()
    ids = [ln.split("::", 1)[1] for ln in listed if "::" in ln]
    assert ids == ["test_tallowick_energy[h2/sto-3g]", "test_tallowick_energy[heh-cation/sto-3g]",
                   "test_tallowick_energy[lih/sto-3g]", "test_tallowick_energy[hf/sto-3g]",
                   "test_tallowick_energy[h4-square/sto-3g]", "test_tallowick_energy[oh/sto-3g]",
                   "test_pinned[h2/sto-3g]", "test_pinned[heh-cation/sto-3g]"]     # default: the smoke suite
    listed = run_pytest(repo, tmp_path / "r.sqlite", cache_dir, "--co", "-q", "--bs-case=lih",
                        "--bs-basis=6-31g").stdout.splitlines()
    ids = [ln.split("::", 1)[1] for ln in listed if "::" in ln]
    assert ids == ["test_tallowick_energy[lih/6-31g]", "test_pinned[h2/6-31g]", "test_pinned[heh-cation/6-31g]"]
