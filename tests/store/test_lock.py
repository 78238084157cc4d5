"""Lock contention: another process holds the database's write lock while results arrive.

The holder is a separate Python process that takes ``BEGIN IMMEDIATE`` on the
file and keeps it until the test writes a line to its stdin.  Short settings
(``busy_wait_s`` well under a second) stand in for the default 600 s.
"""

from __future__ import annotations

import json
import os
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from benchsuite.store import ResultStore
from benchsuite.store.db import StoreBusyError
from tests.store import sample_key, sample_row, sample_run

RUN = "r20261201-223015-lock"
ROOT = Path(__file__).resolve().parents[2]
HOLDER = """
import sqlite3, sys, time
conn = sqlite3.connect(sys.argv[1], isolation_level=None, timeout=30)
conn.execute("BEGIN IMMEDIATE")
print("held", flush=True)
sys.stdin.readline() if sys.argv[2] == "stdin" else time.sleep(float(sys.argv[2]))
conn.execute("COMMIT")
"""


class Holder:
    """Holds the write lock of ``db`` in another process until :meth:`release` (or ``seconds``)."""

    def __init__(self, db: Path, seconds: float | None = None):
        self.proc = subprocess.Popen([sys.executable, "-c", HOLDER, str(db), "stdin" if seconds is None
                                      else str(seconds)], stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
        assert self.proc.stdout.readline() == "held\n"

    def release(self) -> None:
        if self.proc.poll() is None:
            try:
                self.proc.stdin.write("go\n")
                self.proc.stdin.flush()
            except BrokenPipeError:                  # a timed holder ended between poll() and write
                pass
        assert self.proc.wait(30) == 0
        try:
            self.proc.stdin.close()
        except BrokenPipeError:                      # "go" still buffered for a holder that has gone
            pass
        self.proc.stdout.close()


@pytest.fixture
def db(tmp_path):
    path = tmp_path / "results.sqlite"
    with ResultStore.open(path) as store:
        store.begin_run(sample_run(RUN))
    return path


def side_entries(db: Path) -> list[dict]:
    side = db.with_name(db.name + ".unsaved.jsonl")
    return [json.loads(line) for line in side.read_text().splitlines()] if side.exists() else []


def test_a_write_waits_out_a_short_lock(db):
    with ResultStore.open(db, busy_wait_s=60) as store:
        holder = Holder(db, seconds=1.0)             # releases by itself, well within the wait
        store.add_result(sample_row(RUN, 0))
        holder.release()
        assert store.unsaved == 0 and [r.task_key for r in store.results(RUN)] == [sample_key(0)]
    assert side_entries(db) == []


def test_results_survive_a_lock_held_past_the_wait(db):
    notices = []
    with ResultStore.open(db, busy_wait_s=0.3, notice=notices.append) as store:
        holder = Holder(db)
        store.add_result(sample_row(RUN, 0))
        store.add_result(sample_row(RUN, 1))         # follows the first without the full wait
        assert store.unsaved == 2 and [e["task_key"] for e in side_entries(db)] == [sample_key(0), sample_key(1)]
        assert len(notices) == 1 and "unsaved.jsonl" in notices[0] and "locked" in notices[0]
        with pytest.raises(StoreBusyError, match=r"2 computed result\(s\) are kept in .*unsaved.jsonl.*--resume"):
            store.results(RUN)                       # never a run judged without its rows
        holder.release()
        store.add_result(sample_row(RUN, 2))         # the next write that gets through stores them all
        assert store.unsaved == 0 and "now stored" in notices[-1]
        assert store.results(RUN) == sorted((sample_row(RUN, i) for i in range(3)), key=lambda r: r.task_key)
    assert side_entries(db) == []


def test_rows_kept_aside_by_a_killed_process_are_stored_on_resume(db):
    """The writer dies with rows in the side file; the next process resuming the run stores them."""
    store = ResultStore.open(db, busy_wait_s=0.2, notice=lambda text: None)
    holder = Holder(db)
    for i in range(3):
        store.add_result(sample_row(RUN, i))
    store.close()                                     # as good as killed: nothing flushed
    holder.release()
    assert len(side_entries(db)) == 3
    with ResultStore.open(db, notice=lambda text: None) as store:
        assert store.missing_tasks(RUN, [sample_key(i) for i in range(4)]) == [sample_key(i) for i in range(4)]
        store.resume_run(RUN)
        assert store.missing_tasks(RUN, [sample_key(i) for i in range(4)]) == [sample_key(3)]
        assert len(store.results(RUN)) == 3
    assert side_entries(db) == []


def test_a_side_file_row_of_an_unknown_run_is_kept(db, tmp_path):
    from benchsuite.store import unsaved
    from benchsuite.store.db import RESULT_NAMES
    from benchsuite.store.records import storable_values

    side = unsaved.side_path(db)
    unsaved.append(side, "r-gone", "k", RESULT_NAMES, storable_values(sample_row("r-gone", 0))[0])
    with ResultStore.open(db) as store:
        store.add_result(sample_row(RUN, 0))
    assert [e["run_id"] for e in side_entries(db)] == ["r-gone"]


def test_open_and_read_while_another_process_writes(db):
    holder = Holder(db)
    try:
        with ResultStore.open(db, busy_wait_s=0.2) as store:      # WAL: readers never wait for the writer
            assert store.results(RUN) == [] and store.get_run(RUN).run_id == RUN
    finally:
        holder.release()


@pytest.mark.slow
def test_run_through_a_lock_held_from_another_process(tmp_path):
    """``benchsuite run`` while another process holds the lock: nothing computed is lost.

    The run's only task finishes while the lock is held: its row goes to the
    side file and the run stops with exit 2 naming it; ``--resume`` stores it
    without computing it again and completes the run.
    """
    db, gate = tmp_path / "results.sqlite", tmp_path / "gate"
    gate.mkdir()
    env = {**os.environ, "PYTHONPATH": str(ROOT), "GATE_DIR": str(gate), "BENCHSUITE_DB_BUSY_S": "0.5",
           "BENCHSUITE_CACHE": str(tmp_path / "cache")}
    cmd = [sys.executable, "-m", "benchsuite.cli", "run", "--case", "h2", "--method",
           "tests.store.plugins:GatedSolver", "--db", str(db), "--workers", "1"]
    proc = subprocess.Popen(cmd, cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while not (gate / "started").exists():
        assert proc.poll() is None and time.monotonic() < deadline, proc.communicate()
        time.sleep(0.05)
    holder = Holder(db)
    (gate / "go").touch()
    out, err = proc.communicate(timeout=120)
    holder.release()
    assert proc.returncode == 2, (out, err)
    assert "unsaved.jsonl" in err and "--resume" in err and "Traceback" not in err
    assert len(side_entries(db)) == 1
    with sqlite3.connect(db) as conn:
        (run_id,), = conn.execute("SELECT run_id FROM runs").fetchall()
        assert conn.execute("SELECT count(*) FROM results").fetchone() == (0,)
    (gate / "go").unlink()
    (gate / "started").unlink()                         # a recomputation would leave this file again
    done = subprocess.run(cmd[:4] + ["--resume", run_id, "--db", str(db)], cwd=tmp_path, env=env,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stdout + done.stderr
    assert not (gate / "started").exists()
    with ResultStore.open(db) as store:
        run, rows = store.get_run(run_id), store.results(run_id)
    assert run.status == "complete" and len(rows) == 1 and rows[0].verdict == "pass"
    assert side_entries(db) == []
