"""SIGKILL at random moments while a child process streams results into the database.

The child (this module run with ``-m``) resumes the run, writes every missing
task in its own transaction and finishes the run.  The parent kills it at
random moments (one round before it has even opened the database), and after
each kill checks, through its own sqlite3 connection: integrity, every row
complete and equal to what the child meant to write, and that
``missing_tasks`` names exactly the tasks not stored.  A trigger counts every
insert, so the final check proves no task was ever written twice: each
resumed child ran only the missing tasks.
"""

from __future__ import annotations

import json
import os
import random
import select
import signal
import sqlite3
import subprocess
import sys
from pathlib import Path

from benchsuite.store import ResultStore
from benchsuite.store.records import RESULT_COLUMNS
from tests.store import sample_key, sample_row, sample_run

RUN = "r20261201-223015-kill"
N_TASKS = 400
PAD = 1500            # floats of metadata per row, so a write (and a WAL checkpoint) takes a while
ROUNDS = 6
ROOT = Path(__file__).resolve().parents[2]
KEYS = [sample_key(i) for i in range(N_TASKS)]


def child(db: str) -> None:
    """Resume the run, store each missing task, finish."""
    with ResultStore.open(db) as store:
        store.resume_run(RUN)
        print("ready", flush=True)
        index = {k: i for i, k in enumerate(KEYS)}
        for key in store.missing_tasks(RUN, KEYS):
            store.add_result(sample_row(RUN, index[key], PAD))
        store.finish_run(RUN, "complete", {"tasks": N_TASKS})


def prepare(db: Path) -> None:
    """The run row, and an audit table filled by a trigger on every insert into results."""
    with ResultStore.open(db) as store:
        store.begin_run(sample_run(RUN))
    with sqlite3.connect(db) as conn:
        conn.execute("CREATE TABLE audit (task_key TEXT NOT NULL)")
        conn.execute("CREATE TRIGGER audit_insert AFTER INSERT ON results "
                     "BEGIN INSERT INTO audit VALUES (NEW.task_key); END")


def spawn(db: Path) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "tests.store.test_kill_consistency", str(db)], cwd=ROOT,
                            stdout=subprocess.PIPE, env={**os.environ, "PYTHONPATH": str(ROOT)})


def kill_at_random(proc: subprocess.Popen, rng: random.Random, before_ready: bool) -> int:
    """SIGKILL the child after a random delay (from spawn, or from its ``ready``); its return code."""
    if not before_ready:
        ready, _, _ = select.select([proc.stdout], [], [], 60)
        assert ready and proc.stdout.readline() == b"ready\n"
    try:
        return proc.wait(rng.uniform(0.0, 0.12))
    except subprocess.TimeoutExpired:
        proc.send_signal(signal.SIGKILL)
        return proc.wait()
    finally:
        proc.stdout.close()


def stored_keys_checked(db: Path) -> list[str]:
    """Check the file as SQLite sees it and every row in it; return the stored keys."""
    with sqlite3.connect(db) as conn:
        assert conn.execute("PRAGMA integrity_check").fetchall() == [("ok",)]
        assert conn.execute("PRAGMA foreign_key_check").fetchall() == []
        names = ", ".join(c.sql for c in RESULT_COLUMNS)
        rows = conn.execute(f"SELECT {names} FROM results").fetchall()
        audit = conn.execute("SELECT task_key, count(*) FROM audit GROUP BY task_key").fetchall()
    index = {k: i for i, k in enumerate(KEYS)}
    for values in rows:
        for col, value in zip(RESULT_COLUMNS, values):
            assert value is not None or not col.required, (col.name, values[1])
            if col.kind == "json" and value is not None:
                json.loads(value)
    keys = [values[1] for values in rows]
    assert len(keys) == len(set(keys))
    assert dict(audit) == {k: 1 for k in keys}            # written once, never rewritten
    with ResultStore.open(db) as store:
        assert store.results(RUN) == sorted((sample_row(RUN, index[k], PAD) for k in keys),
                                            key=lambda r: r.task_key)
        assert store.missing_tasks(RUN, KEYS) == [k for k in KEYS if k not in set(keys)]
    return keys


def test_sigkill_at_random_moments_leaves_a_consistent_resumable_database(tmp_path):
    db = tmp_path / "results.sqlite"
    prepare(db)
    rng = random.Random(20261201)
    progress, killed_mid_run = [], 0
    for round_no in range(ROUNDS):
        code = kill_at_random(spawn(db), rng, before_ready=round_no == 0)
        keys = stored_keys_checked(db)
        killed_mid_run += code == -signal.SIGKILL and 0 < len(keys) < N_TASKS
        progress.append(len(keys))
    assert progress == sorted(progress)
    assert killed_mid_run >= 2, progress                  # the kills really landed mid-stream
    final = spawn(db)
    assert final.wait(120) == 0
    final.stdout.close()
    assert sorted(stored_keys_checked(db)) == sorted(KEYS)
    with ResultStore.open(db) as store:
        run = store.get_run(RUN)
    assert (run.status, run.summary) == ("complete", {"tasks": N_TASKS})


if __name__ == "__main__":
    child(sys.argv[1])
