"""Tamper evidence: rows edited, deleted, added or reordered outside benchsuite are refused.

The edits are made through a separate sqlite3 connection, as a plugin or a
careless user with the sqlite3 shell would make them.  Every command that reads
a run (compare, export, report, table) must exit 2 naming the run and the row.
"""

from __future__ import annotations

import dataclasses
import sqlite3

import pytest

from benchsuite.store import ResultStore
from benchsuite.store.chain import TamperedRunError
from benchsuite.store.export import render_export
from tests.store import sample_key, sample_row, sample_run

BASE, NEW = "r20261201-223015-base", "r20261202-080000-new0"
N = 6


@pytest.fixture
def db(tmp_path):
    path = tmp_path / "results.sqlite"
    with ResultStore.open(path) as store:
        for run_id in (BASE, NEW):
            store.begin_run(sample_run(run_id))
            for i in range(N):
                store.add_result(sample_row(run_id, i))
            store.finish_run(run_id, "complete", {"tasks": N})
    return path


def sql(path, statement, *args):
    with sqlite3.connect(path) as conn:
        conn.execute(statement, args)


FAILED = sample_key(1)          # sample row 1 is ok / fail


EDITS = {
    "verdict set to pass": ("UPDATE results SET verdict = 'pass' WHERE run_id = ? AND task_key = ?", FAILED),
    "energy nudged": ("UPDATE results SET energy_ha = energy_ha + 1e-9 WHERE run_id = ? AND task_key = ?", FAILED),
    "error zeroed": ("UPDATE results SET error_mha = 0.0 WHERE run_id = ? AND task_key = ?", FAILED),
    "message emptied": ("UPDATE results SET message = 'x' WHERE run_id = ? AND task_key = ?", FAILED),
    "json field rewritten": ("UPDATE results SET resources = '{}' WHERE run_id = ? AND task_key = ?", FAILED),
    "hash cleared": ("UPDATE results SET row_hash = NULL WHERE run_id = ? AND task_key = ?", FAILED),
}


@pytest.mark.parametrize("edit", EDITS, ids=list(EDITS))
def test_an_edited_row_is_refused_naming_run_and_task(db, edit):
    statement, key = EDITS[edit]
    sql(db, statement, BASE, key)
    with ResultStore.open(db) as store:
        with pytest.raises(TamperedRunError, match=f"run {BASE}, task {key}.*edited") as info:
            store.results(BASE)
        assert info.value.run_id == BASE and info.value.task_key == key
        assert len(store.results(NEW)) == N                       # the other run is untouched and usable


@pytest.mark.parametrize("edit", ["delete", "insert", "swap order", "run summary", "run threshold",
                                  "run status"])
def test_deleted_added_reordered_rows_and_an_edited_run_record_are_refused(db, edit):
    if edit == "delete":
        sql(db, "DELETE FROM results WHERE run_id = ? AND task_key = ?", BASE, sample_key(N - 1))
    elif edit == "insert":                                       # a copy of a row under another key, hash and all
        with sqlite3.connect(db) as conn:
            conn.executescript(f"""
                CREATE TEMP TABLE extra AS SELECT * FROM results WHERE run_id = '{NEW}' AND seq = 1;
                UPDATE extra SET run_id = '{BASE}', task_key = 'h2/sto-3g/jordan-wigner/hf#added', seq = {N + 1};
                INSERT INTO results SELECT * FROM extra;""")
    elif edit == "swap order":
        sql(db, "UPDATE results SET seq = -seq WHERE run_id = ? AND seq IN (1, 2)", BASE)
        sql(db, "UPDATE results SET seq = CASE seq WHEN -1 THEN 2 ELSE 1 END WHERE run_id = ? AND seq < 0", BASE)
    elif edit == "run summary":
        sql(db, """UPDATE runs SET summary = '{"gate":{"passed":true}}' WHERE run_id = ?""", BASE)
    elif edit == "run threshold":
        sql(db, "UPDATE runs SET threshold_mha = 100.0 WHERE run_id = ?", BASE)
    else:
        sql(db, "UPDATE runs SET status = 'running' WHERE run_id = ?", BASE)
    with ResultStore.open(db) as store, pytest.raises(TamperedRunError, match=f"run {BASE}"):
        store.results(BASE)


def test_benchsuite_never_reseals_an_edit(db):
    """Replacing a row (as finalising a run does) after an edit elsewhere in the chain is refused."""
    sql(db, "UPDATE results SET verdict = 'pass' WHERE run_id = ? AND task_key = ?", BASE, FAILED)
    with ResultStore.open(db) as store:
        with pytest.raises(TamperedRunError, match=FAILED):
            store.add_result(dataclasses.replace(sample_row(BASE, 3), message="finalised"))
        with pytest.raises(TamperedRunError):
            store.results(BASE)
    sql(db, """UPDATE runs SET summary = '{}' WHERE run_id = ?""", NEW)
    with ResultStore.open(db) as store:
        with pytest.raises(TamperedRunError, match="record"):
            store.finish_run(NEW, "complete", {"tasks": N})
        with pytest.raises(TamperedRunError, match="record"):
            store.get_run(NEW)


def test_replacing_and_appending_keep_a_valid_chain(db):
    with ResultStore.open(db) as store:
        store.resume_run(NEW)
        store.add_result(dataclasses.replace(sample_row(NEW, 2), message="again"))     # mid-chain replacement
        store.add_result(sample_row(NEW, N))                                           # appended
        store.finish_run(NEW)
        rows = store.results(NEW)
    assert len(rows) == N + 1 and {r.message for r in rows if r.task_key == sample_key(2)} == {"again"}
    with sqlite3.connect(db) as conn:
        seqs = [s for s, in conn.execute("SELECT seq FROM results WHERE run_id = ? ORDER BY seq", (NEW,))]
    assert seqs == list(range(1, N + 2))


# -- through the command line ----------------------------------------------------------

def _tampered(db):
    sql(db, "UPDATE results SET verdict = 'pass' WHERE run_id = ? AND task_key = ?", BASE, FAILED)


@pytest.mark.parametrize("argv", [("compare", BASE, NEW), ("compare", NEW, BASE), ("export", BASE),
                                  ("export", BASE, "--format", "json"), ("table", BASE),
                                  ("report", BASE, "--out", "{out}")])
def test_commands_refuse_an_edited_verdict(db, run_cli, tmp_path, argv):
    before = run_cli(*[a.format(out=tmp_path / "before.html") for a in argv], "--db", str(db))
    assert before[0] in (0, 1), before[2]
    _tampered(db)
    out = tmp_path / "after.html"
    code, stdout, stderr = run_cli(*[a.format(out=out) for a in argv], "--db", str(db))
    assert code == 2, (stdout, stderr)
    assert f"run {BASE}, task {FAILED}" in stderr and "edited" in stderr and "Traceback" not in stderr
    assert stdout == "" and not out.exists()


def test_chain_head_follows_the_documented_formula(db):
    """Recompute the head from the raw rows with hashlib alone, as chain.py's docstring defines it."""
    import hashlib
    import json

    from benchsuite.store.records import RESULT_COLUMNS

    names = [c.name for c in RESULT_COLUMNS]
    with sqlite3.connect(db) as conn:
        rows = conn.execute(f"SELECT {', '.join(c.sql for c in RESULT_COLUMNS)} FROM results WHERE run_id = ? "
                            "ORDER BY seq", (BASE,)).fetchall()
    digest = hashlib.sha256(f"benchsuite-chain-v1|{BASE}".encode()).hexdigest()
    for values in rows:
        body = json.dumps([[n, v] for n, v in zip(names, values)], separators=(",", ":"), ensure_ascii=False)
        digest = hashlib.sha256(f"{digest}|{body}".encode()).hexdigest()
    with ResultStore.open(db) as store:
        assert store.chain(BASE) == {"head_sha256": digest, "rows": N}
        exported = json.loads(render_export(store, BASE, "json"))
    assert exported["chain"] == {"head_sha256": digest, "rows": N}


def test_resume_refuses_an_edited_run_before_computing(db, run_cli):
    _tampered(db)
    with ResultStore.open(db) as store, pytest.raises(TamperedRunError, match=FAILED):
        store.resume_run(BASE)
    code, stdout, stderr = run_cli("run", "--resume", BASE, "--db", str(db))
    assert code == 2 and f"run {BASE}, task {FAILED}" in stderr
    with ResultStore.open(db) as store:
        assert store.list_runs()[0].status == "complete"            # left as it was
