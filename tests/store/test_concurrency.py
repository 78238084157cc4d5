"""Two writer processes and a reader on one run: the chain stays whole and no reader sees a false edit.

Each writer stores its own half of the tasks into the same run, interleaving
with the other under SQLite's write lock; the parent reads the run
(``results`` verifies the whole chain) as fast as it can meanwhile.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

from benchsuite.store import ResultStore
from tests.store import sample_key, sample_row, sample_run

RUN = "r20261201-223015-conc"
N_TASKS = 120
ROOT = Path(__file__).resolve().parents[2]


def writer(db: str, parity: int) -> None:
    with ResultStore.open(db, busy_wait_s=60) as store:
        for i in range(parity, N_TASKS, 2):
            store.add_result(sample_row(RUN, i, 50))


def test_two_writers_and_a_reader_keep_the_chain_valid(tmp_path):
    db = tmp_path / "results.sqlite"
    with ResultStore.open(db) as store:
        store.begin_run(sample_run(RUN))
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    procs = [subprocess.Popen([sys.executable, "-m", "tests.store.test_concurrency", str(db), str(p)], cwd=ROOT,
                              env=env) for p in (0, 1)]
    reads, seen = 0, set()
    with ResultStore.open(db) as reader:
        while any(p.poll() is None for p in procs):
            seen.add(len(reader.results(RUN)))          # raises TamperedRunError on any inconsistency
            reads += 1
        assert [p.wait() for p in procs] == [0, 0]
        rows = reader.results(RUN)
    assert sorted(r.task_key for r in rows) == sorted(sample_key(i) for i in range(N_TASKS))
    assert rows == sorted((sample_row(RUN, i, 50) for i in range(N_TASKS)), key=lambda r: r.task_key)
    assert reads > 0 and len(seen) > 1, seen           # the reader really read mid-stream


if __name__ == "__main__":
    writer(sys.argv[1], int(sys.argv[2]))
