"""The corrupted-database matrix: every damage, every command that reads the database -> exit 2.

Each command gets a clear message naming the file (and, for a schema
problem, what is wrong), never a traceback and never exit 3.
"""

from __future__ import annotations

import random
import sqlite3

import pytest

from benchsuite.store import ResultStore
from tests.store import sample_row, sample_run

RUN, OTHER = "r20261201-223015-dmg1", "r20261201-223016-dmg2"


def _healthy(path):
    with ResultStore.open(path) as store:
        for run_id in (RUN, OTHER):
            store.begin_run(sample_run(run_id))
            for i in range(20):
                store.add_result(sample_row(run_id, i, metadata_size=200))     # several pages of rows
            store.finish_run(run_id, "complete", {})


def _truncate(fraction):
    def damage(path):
        data = path.read_bytes()
        path.write_bytes(data[:int(len(data) * fraction)])
    return damage


def _garbage(path):
    path.write_bytes(random.Random(7).randbytes(path.stat().st_size))


def _garbage_pages(path):
    """Keep the 100-byte header, overwrite the rest: SQLite opens it and then finds it malformed."""
    data = bytearray(path.read_bytes())
    data[100:] = random.Random(8).randbytes(len(data) - 100)
    path.write_bytes(bytes(data))


def _sql(*statements):
    def damage(path):
        with sqlite3.connect(path) as conn:
            for s in statements:
                conn.execute(s)
    return damage


DAMAGES = {
    "truncated to 60%": (_truncate(0.6), "not a usable results database"),
    "truncated to 100 bytes": (_truncate(100 / 4096), "not a usable results database"),
    "garbage bytes": (_garbage, "not a usable results database"),
    "garbage after the header": (_garbage_pages, "not a usable results database"),
    "text file": (lambda p: p.write_text("run_id,verdict\nr1,pass\n" * 200), "not a usable results database"),
    "newer schema version": (_sql("INSERT INTO schema_version VALUES (99, 'x', 'from the future')"),
                             "schema version 99"),
    "schema version not a number": (_sql("DROP TABLE schema_version", "CREATE TABLE schema_version (version, "
                                         "applied_at, description)",
                                         "INSERT INTO schema_version VALUES ('three', 'x', 'x')"),
                                    "not a version number"),
    "missing results table": (_sql("DROP TABLE results"), "table 'results' is missing"),
    "missing runs table": (_sql("PRAGMA foreign_keys=OFF", "DROP TABLE runs"), "table 'runs' is missing"),
    "missing chain column": (_sql("DROP INDEX results_by_seq", "ALTER TABLE results DROP COLUMN row_hash"),
                             "lacks column(s) row_hash"),
    "missing schema_version table": (_sql("DROP TABLE schema_version"), "not a usable results database"),
}
COMMANDS = {
    "compare": ("compare", RUN, OTHER),
    "export": ("export", RUN, "--format", "json"),
    "report": ("report", RUN, "--out", "{out}"),
    "table": ("table", RUN, "--format", "latex"),
    "run --resume": ("run", "--resume", RUN),
}


@pytest.mark.parametrize("command", COMMANDS, ids=list(COMMANDS))
@pytest.mark.parametrize("damage", DAMAGES, ids=list(DAMAGES))
def test_damaged_database_is_exit_2_with_a_message(tmp_path, run_cli, damage, command):
    db = tmp_path / "results.sqlite"
    _healthy(db)
    how, says = DAMAGES[damage]
    how(db)
    out = tmp_path / "report.html"
    argv = [a.format(out=out) for a in COMMANDS[command]]
    code, stdout, stderr = run_cli(*argv, "--db", str(db))
    assert code == 2, (stdout, stderr)
    assert stderr.startswith("benchsuite: error: ") and str(db) in stderr and "Traceback" not in stderr
    assert says in stderr, stderr
    assert not out.exists()


def test_a_directory_as_the_database_is_exit_2(tmp_path, run_cli):
    code, _, stderr = run_cli("export", RUN, "--db", str(tmp_path))
    assert code == 2 and "is a directory" in stderr
