"""Hostile plugins and stopped runs: every misbehaviour gets a status and a message, and no process
of a task or a run outlives it (checked in /proc, independently of the runner's own bookkeeping)."""

from __future__ import annotations

import json
import os
import re
import signal
import sqlite3
import subprocess
import sys
import time
import uuid
from pathlib import Path

import pytest

from benchsuite.methods import discovery
from benchsuite.methods.problem import build_problem
from benchsuite.runner import contract, execute
from benchsuite.runner.contract import MAX_MESSAGE_CHARS, MAX_METADATA_JSON_BYTES
from benchsuite.runner.isolation import CAPTURE_TAIL_BYTES, shutdown_forkserver
from benchsuite.store.db import ResultStore

PLUGINS = "tests.methods.plugins"
ROOT = Path(__file__).resolve().parents[1]
linux_only = pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs /proc")


@pytest.fixture(scope="module")
def h2(registry, ladder_cache):
    return build_problem(registry.case("h2"), cache=ladder_cache)


def _execute(h2, attr, **kw):
    method, failure = discovery.resolve_method(f"{PLUGINS}:{attr}")
    assert failure is None
    kw.setdefault("timeout_s", 20.0)
    return execute(method, h2.problem, exact_ha=h2.reference.energy_ha, **kw)


# (plugin, status, words in the message)
ZOO = [
    ("Raises", "error", "solver diverged in iteration 3"),
    ("CallsExit", "error", "sys.exit(3)"),
    ("KillsItself", "error", "signal SIGKILL"),
    ("Segfaults", "error", "signal SIGSEGV"),
    ("Aborts", "error", "signal SIGABRT"),
    ("HugeMessage", "error", "start of a long story"),
    ("Unpicklable", "error", "cannot be sent to a worker process"),
    ("EatsMemory", "error", "MemoryError"),
    ("StringEnergy", "invalid", "energy_ha = '-1.137' (str): not a finite number"),
    ("BoolEnergy", "invalid", "(bool): not a finite number"),
    ("HugeIntEnergy", "invalid", "outside the float range"),
    ("ImplausibleEnergy", "invalid", "not a plausible value"),
    ("OverflowIterations", "invalid", "iterations = 100000000000000000000: outside 0 .. 1000000000"),
    ("SetInResources", "invalid", "resources.shots = {100, 200} (set): not a finite number"),
    ("ObjectInResources", "invalid", "resources.circuit_depth = <object object"),
    ("ForgesPayload", "invalid", "worker result rejected: energy_ha = '-99' (str)"),
    ("NumpyEnergy", "ok", ""),
    ("FloodsStdout", "ok", ""),
    ("HugeMetadata", "ok", ""),
]


@pytest.mark.parametrize("attr, status, words", ZOO, ids=[z[0] for z in ZOO])
def test_hostile_plugin_gets_its_status(h2, attr, status, words):
    outcome = _execute(h2, attr, max_memory_mb=2048)
    assert outcome.status == status, outcome.message
    assert words in outcome.message
    assert len(outcome.message) <= MAX_MESSAGE_CHARS + 100
    assert len(json.dumps(outcome.to_dict())) < 200_000        # bounded, whatever the plugin did


def test_bounded_output_message_and_metadata(h2):
    flood = _execute(h2, "FloodsStdout")
    assert flood.captured_output.startswith("[... ") and "earlier bytes not kept" in flood.captured_output
    assert flood.captured_output.rstrip().endswith("C-level line from printf")
    assert len(flood.captured_output) <= CAPTURE_TAIL_BYTES + 100
    huge = _execute(h2, "HugeMessage")
    assert "characters not kept" in huge.message
    meta = _execute(h2, "HugeMetadata").metadata
    assert "metadata_truncated" in meta and len(json.dumps(meta)) < MAX_METADATA_JSON_BYTES
    crash = _execute(h2, "Segfaults")
    assert "Segmentation fault" in crash.captured_output          # faulthandler's report, kept
    memory = _execute(h2, "EatsMemory", max_memory_mb=1024)
    assert "memory limit is 1024 MiB" in memory.message


def test_solve_json_stays_clean_with_a_flooding_plugin(capfd, tmp_path, monkeypatch):
    from benchsuite import cli

    monkeypatch.setenv("BENCHSUITE_CACHE", str(tmp_path / "cache"))
    code = cli.main(["solve", "h2", "--method", f"{PLUGINS}:FloodsStdout", "--format", "json"])
    out = capfd.readouterr().out                                  # file descriptor 1, not just sys.stdout
    assert code == 0
    assert json.loads(out)["status"] == "ok"                      # nothing of the 4 MB in front of it


def test_unpicklable_method_same_status_in_run_and_solve(run_cli, tmp_path, monkeypatch):
    monkeypatch.setenv("BENCHSUITE_DB", str(tmp_path / "r.sqlite"))
    code, out, _ = run_cli("solve", "h2", "--method", f"{PLUGINS}:Unpicklable", "--format", "json")
    solved = json.loads(out)
    js = tmp_path / "run.json"
    run_cli("run", "--case", "h2", "--method", f"{PLUGINS}:Unpicklable", "--json", str(js))
    (row,) = json.loads(js.read_text())["results"]
    assert solved["status"] == row["status"] == "error"
    assert "cannot be sent to a worker process" in solved["message"] and "cannot be sent" in row["message"]


def test_worker_environment_has_no_database_path(h2, tmp_path, monkeypatch):
    db = tmp_path / "results.sqlite"
    sqlite3.connect(db).execute("CREATE TABLE results (x)").connection.commit()
    monkeypatch.setenv("BENCHSUITE_DB", str(db))
    shutdown_forkserver()                   # the next worker's fork server starts with this environment
    try:
        outcome = _execute(h2, "WritesDatabase")
    finally:
        monkeypatch.delenv("BENCHSUITE_DB")
        shutdown_forkserver()
    assert outcome.status == "ok" and outcome.metadata["found_database"] is False
    tables = {r[0] for r in sqlite3.connect(db).execute("SELECT name FROM sqlite_master")}
    assert tables == {"results"}


@pytest.mark.parametrize("raw, status, words", [
    ([1, 2], "error", "not a mapping"),
    ({"status": "fine"}, "error", "not one of"),
    ({"status": "ok", "energy_ha": "-1.0"}, "invalid", "energy_ha = '-1.0'"),
    ({"status": "ok"}, "invalid", "status ok without an energy"),
    ({"status": "ok", "energy_ha": -1.0, "stderr_ha": -0.1}, "invalid", "negative"),
    ({"status": "ok", "energy_ha": -1.0, "iterations": -4}, "invalid", "outside 0"),
    ({"status": "ok", "energy_ha": -1.0, "resources": {"gates": 3}}, "invalid", "unknown field"),
    ({"status": "ok", "energy_ha": -1.0, "problem": {"n_qubits": "4"}}, "invalid", "problem.n_qubits"),
    ({"status": "ok", "energy_ha": float("nan")}, "invalid", "not a finite number"),
])
def test_parent_rechecks_what_a_worker_sent(raw, status, words):
    fields = contract.checked_fields(raw, needs_energy=True)
    assert fields["status"] == status and words in fields["message"]


def test_parent_drops_unknown_keys_and_refuses_garbage():
    fields = contract.checked_fields({"status": "ok", "energy_ha": -1.0, "evil": object()}, needs_energy=True)
    assert fields == {"status": "ok", "energy_ha": -1.0}
    assert contract.decode_fields(b"\x80not json", True)["status"] == "error"
    assert "refused" in contract.decode_fields(b" " * (contract.MAX_PAYLOAD_BYTES + 1), True)["message"]


# -- processes ---------------------------------------------------------------------

def _alive(pid: int) -> bool:
    """Running and not a zombie (psutil if installed, else /proc)."""
    try:
        import psutil
    except ImportError:
        try:
            return Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0] != "Z"
        except (FileNotFoundError, ProcessLookupError):
            return False
    try:
        return psutil.Process(pid).status() != psutil.STATUS_ZOMBIE
    except psutil.NoSuchProcess:
        return False


def _child_pid(outcome) -> int:
    match = re.search(r"child pid (\d+)", outcome.captured_output)
    assert match, outcome.captured_output
    return int(match.group(1))


def _gone_within(pids, seconds: float) -> bool:
    deadline = time.monotonic() + seconds
    while any(_alive(p) for p in pids):
        if time.monotonic() > deadline:
            return False
        time.sleep(0.1)
    return True


@linux_only
def test_timeout_ends_the_plugins_child(h2):
    outcome = _execute(h2, "ForksSleepAndHangs", timeout_s=3.0)
    assert outcome.status == "timeout"
    assert _gone_within([_child_pid(outcome)], 2.0)


@linux_only
def test_a_child_left_by_a_finished_plugin_is_ended(h2):
    outcome = _execute(h2, "SleepsWithChild", options={"wait_s": 0.1})
    assert outcome.status == "ok"
    assert _gone_within([_child_pid(outcome)], 2.0)


def _run_processes(marker: str) -> list[int]:
    """Live processes (not zombies) whose environment carries the run's marker."""
    found = []
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            if marker.encode() in (entry / "environ").read_bytes() and _alive(int(entry.name)):
                found.append(int(entry.name))
        except OSError:
            continue
    return found


def _start_run(tmp_path, *extra):
    """`benchsuite run` of a plugin that forks a `sleep`, stopped once its tasks are running."""
    marker = f"BENCHSUITE_TEST_RUN={uuid.uuid4().hex}"
    (tmp_path / "tmp").mkdir()
    env = {**os.environ, "BENCHSUITE_DB": str(tmp_path / "r.sqlite"), "BENCHSUITE_CACHE": str(tmp_path / "c"),
           "PYTHONPATH": str(ROOT), "TMPDIR": str(tmp_path / "tmp"), marker.split("=")[0]: marker.split("=")[1]}
    cmd = [sys.executable, "-m", "benchsuite.cli", "run", "--case", "h2", "heh-cation",
           "--method", f"{PLUGINS}:SleepsWithChild", "--method", "exact-sector", "--workers", "2", *extra]
    proc = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and proc.poll() is None:
        if any("sleep" in Path(f"/proc/{p}/cmdline").read_bytes().decode(errors="replace")
               for p in _run_processes(marker) if Path(f"/proc/{p}").exists()):
            break
        time.sleep(0.1)
    assert proc.poll() is None, "the run finished before it could be stopped"
    return proc, marker, env


def _crash_notes(tmp_path) -> str:
    """What an exit 3 left behind (the command writes its traceback to a crash note in TMPDIR)."""
    return "".join(p.read_text(errors="replace") for p in (tmp_path / "tmp").glob("benchsuite-crash-*"))


def _remaining_after(marker: str, seconds: float) -> list[int]:
    deadline = time.monotonic() + seconds
    while (left := _run_processes(marker)) and time.monotonic() < deadline:
        time.sleep(0.1)
    return left


@linux_only
@pytest.mark.slow   # intermittent exit 3 (internal error) under the full parallel suite: under investigation
@pytest.mark.parametrize("signum, code", [
    (signal.SIGTERM, 143), pytest.param(signal.SIGINT, 130, marks=pytest.mark.slow)])
def test_signal_stops_the_run_and_every_process(tmp_path, signum, code):
    proc, marker, _ = _start_run(tmp_path)
    proc.send_signal(signum)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == code, err + _crash_notes(tmp_path)
    assert "Traceback" not in err
    assert _remaining_after(marker, 5.0) == []
    assert list((tmp_path / "tmp").glob("benchsuite-output-*")) == []      # captured output files removed


@linux_only
@pytest.mark.slow
def test_sigkill_of_the_run_leaves_no_process(tmp_path):
    proc, marker, _ = _start_run(tmp_path)
    proc.kill()
    proc.wait()
    assert _remaining_after(marker, 5.0) == []
    assert list((tmp_path / "tmp").glob("benchsuite-output-*")) == []      # the watchdogs removed them


@linux_only
@pytest.mark.slow   # same intermittent exit 3 under the full parallel suite as the signal test above
def test_interrupted_run_is_marked_and_resumes_once(tmp_path):
    proc, marker, env = _start_run(tmp_path)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 143, err + _crash_notes(tmp_path)
    store = ResultStore.open(tmp_path / "r.sqlite", create=False)
    run = store.list_runs()[0]
    assert run.status == "interrupted"
    assert "interrupted" in err.strip().splitlines()[-1] and run.run_id in err.strip().splitlines()[-1]
    done = subprocess.run([sys.executable, "-m", "benchsuite.cli", "run", "--resume", run.run_id], env=env,
                          capture_output=True, text=True, timeout=300)
    assert done.returncode in (0, 1), done.stderr + _crash_notes(tmp_path)
    keys = [r.task_key for r in ResultStore.open(tmp_path / "r.sqlite", create=False).results(run.run_id)]
    assert len(keys) == len(set(keys)) == 4


@linux_only
def test_dask_path_worker_contains_the_plugin_too(h2):
    """The fresh-interpreter worker that Dask jobs use: same capture, same group kill on timeout."""
    import pickle

    from benchsuite.runner import DirectJob, _subprocess_work

    def job(attr):
        method, _ = discovery.resolve_method(f"{PLUGINS}:{attr}")
        return pickle.dumps(DirectJob(method, h2.problem, {}))

    flood = _subprocess_work(job("FloodsStdout"), 60.0, 2048)
    assert flood["status"] == "ok" and flood["captured_output"].rstrip().endswith("C-level line from printf")
    hang = _subprocess_work(job("ForksSleepAndHangs"), 4.0, 2048)
    assert hang["status"] == "timeout"
    assert _gone_within([int(re.search(r"child pid (\d+)", hang["captured_output"]).group(1))], 2.0)
