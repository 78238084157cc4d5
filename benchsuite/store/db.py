"""The results database: SQLite, one file, versioned schema.

Default location ``.benchsuite/results.sqlite`` under the working directory,
or ``$BENCHSUITE_DB``, or ``--db`` (:func:`default_db_path`).

Schema
------
``schema_version(version, applied_at, description)``: one row per applied
migration; the schema version is the largest.  :data:`MIGRATIONS` is the
ordered list of migration functions; opening a database applies the missing
ones, each in its own transaction, so an old file is brought up to date and a
killed migration leaves the previous version intact.  A file from a newer
benchsuite is refused (:class:`InputError`).

* v1: ``runs`` (one row per invocation, key ``run_id``) and ``results`` (one
  row per task, key ``(run_id, task_key)``, ``run_id`` references ``runs``);
  columns as in :mod:`benchsuite.store.records`, JSON columns checked with
  ``json_valid``.
* v2: indexes ``results_by_task`` (case, basis, encoding, method: a task's
  history across runs) and ``runs_by_status`` (status, started_at: the latest
  complete run).

Durability
----------
WAL journal with ``synchronous=NORMAL``.  Every write is one transaction
(``BEGIN IMMEDIATE`` .. ``COMMIT``): a process killed at any moment, SIGKILL
included, leaves each row either fully stored or absent, and the next opener
rolls back the unfinished tail of the WAL.  A committed transaction survives
the death of the process (it is in the operating system's cache); with
NORMAL, only an operating-system crash or power cut may lose the last few
commits, never consistency, and a lost task is simply rerun by
``--resume``.  FULL would add an fsync per task for that case alone.  WAL
needs a local filesystem (not NFS).

Concurrency
-----------
One writer: the runner's main process writes runs and results; worker
processes never touch the database.  Readers (``report``, ``export``) may
open the file while a run writes; WAL lets them see the last commit.

Duplicates
----------
``add_result`` for a ``(run_id, task_key)`` already stored replaces the row
(``INSERT OR REPLACE``): the last write wins.  ``--resume`` only computes
:meth:`ResultStore.missing_tasks`, so this happens only on purpose.
"""

from __future__ import annotations

import os
import sqlite3
from contextlib import contextmanager
from pathlib import Path

from benchsuite.errors import InputError
from benchsuite.scoring import STATUSES, VERDICTS
from benchsuite.store.records import (RESULT_COLUMNS, RUN_COLUMNS, ResultRow, RunRecord, dumps,
                                      from_db_values, to_db_values, utc_now)

RUN_STATUSES = ("running", "complete", "interrupted")
BUSY_TIMEOUT_S = 30.0


def default_db_path() -> Path:
    """``$BENCHSUITE_DB`` or ``.benchsuite/results.sqlite`` under the working directory."""
    return Path(os.environ.get("BENCHSUITE_DB", Path(".benchsuite") / "results.sqlite"))


# -- migrations ------------------------------------------------------------------------

def _json(col: str, required: bool = True) -> str:
    if required:
        return f'"{col}" TEXT NOT NULL CHECK (json_valid("{col}"))'
    return f'"{col}" TEXT CHECK ("{col}" IS NULL OR json_valid("{col}"))'


def _v1_tables(conn: sqlite3.Connection) -> None:
    """runs and results."""
    conn.execute(f"""CREATE TABLE runs (
        run_id TEXT PRIMARY KEY NOT NULL, started_at TEXT NOT NULL, command TEXT NOT NULL, suite TEXT,
        {_json("cases")}, {_json("methods")}, {_json("options")}, encoding TEXT NOT NULL,
        threshold_mha REAL NOT NULL, threshold_source TEXT NOT NULL, seed INTEGER NOT NULL,
        {_json("packages")}, {_json("git")}, {_json("plugin_git")}, {_json("machine")}, finished_at TEXT,
        status TEXT NOT NULL CHECK (status IN ('running', 'complete', 'interrupted')), {_json("summary")})""")
    conn.execute(f"""CREATE TABLE results (
        run_id TEXT NOT NULL REFERENCES runs(run_id), task_key TEXT NOT NULL, "case" TEXT NOT NULL,
        basis TEXT NOT NULL, encoding TEXT NOT NULL, method TEXT NOT NULL, {_json("options")},
        status TEXT NOT NULL, verdict TEXT NOT NULL, energy_ha REAL, stderr_ha REAL, reference_method TEXT,
        reference_energy_ha REAL, error_mha REAL, threshold_mha REAL NOT NULL, converged INTEGER,
        iterations INTEGER, seconds REAL NOT NULL, message TEXT NOT NULL, n_qubits INTEGER, n_terms INTEGER,
        one_norm_ha REAL, qwc_groups INTEGER, {_json("resources")}, {_json("metadata")},
        {_json("parameters", required=False)}, {_json("secondary")}, space TEXT NOT NULL, {_json("tags")},
        scan_parent TEXT, scan_length REAL, {_json("scf")}, finished_at TEXT NOT NULL,
        PRIMARY KEY (run_id, task_key))""")


def _v2_indexes(conn: sqlite3.Connection) -> None:
    """Indexes for a task's history across runs and for the latest complete run."""
    conn.execute('CREATE INDEX results_by_task ON results("case", basis, encoding, method)')
    conn.execute("CREATE INDEX runs_by_status ON runs(status, started_at)")


#: Ordered: MIGRATIONS[i] takes the schema from version i to i + 1.  Append only.
MIGRATIONS = (_v1_tables, _v2_indexes)
SCHEMA_VERSION = len(MIGRATIONS)


def _schema_version(conn: sqlite3.Connection) -> int:
    return conn.execute("SELECT COALESCE(MAX(version), 0) FROM schema_version").fetchone()[0]


@contextmanager
def _transaction(conn: sqlite3.Connection):
    """``BEGIN IMMEDIATE`` .. ``COMMIT``, rolled back on any exception."""
    conn.execute("BEGIN IMMEDIATE")
    try:
        yield conn
    except BaseException:
        conn.execute("ROLLBACK")
        raise
    conn.execute("COMMIT")


def migrate(conn: sqlite3.Connection, path, upto: int | None = None) -> int:
    """Apply the missing migrations up to ``upto`` (default: all); return the schema version."""
    conn.execute("CREATE TABLE IF NOT EXISTS schema_version (version INTEGER PRIMARY KEY, "
                 "applied_at TEXT NOT NULL, description TEXT NOT NULL)")
    target = SCHEMA_VERSION if upto is None else upto
    found = _schema_version(conn)
    if found > SCHEMA_VERSION:
        raise InputError(f"results database has schema version {found}; this benchsuite knows up to "
                         f"{SCHEMA_VERSION}: upgrade benchsuite or use another --db", path)
    for version in range(found + 1, target + 1):
        with _transaction(conn):
            if _schema_version(conn) >= version:      # another process got there first
                continue
            step = MIGRATIONS[version - 1]
            step(conn)
            conn.execute("INSERT INTO schema_version VALUES (?, ?, ?)", (version, utc_now(), step.__doc__.strip()))
    return _schema_version(conn)


# -- the store ------------------------------------------------------------------------

def _select(columns, table: str) -> str:
    return f"SELECT {', '.join(c.sql for c in columns)} FROM {table}"


def _insert(columns, table: str, verb: str = "INSERT") -> str:
    return (f"{verb} INTO {table} ({', '.join(c.sql for c in columns)}) "
            f"VALUES ({', '.join('?' for _ in columns)})")


class ResultStore:
    """Runs and results in one SQLite file; see the module docstring for the guarantees.

    Use :meth:`open`; a store is a context manager that closes its connection.
    """

    def __init__(self, conn: sqlite3.Connection, path: Path):
        self._conn = conn
        self.path = path

    @classmethod
    def open(cls, path=None, create: bool = True, upto: int | None = None) -> "ResultStore":
        """Open (and with ``create``, make, parent folders included) the database at ``path``.

        ``path=None`` means :func:`default_db_path`.  Without ``create`` a
        missing file is an :class:`InputError`.  ``upto`` stops migrating at
        that schema version (for tests and tooling).
        """
        path = Path(default_db_path() if path is None else path)
        if not path.exists():
            if not create:
                raise InputError("no results database here (run `benchsuite run` first, or give --db)", path)
            path.parent.mkdir(parents=True, exist_ok=True)
        conn = sqlite3.connect(path, isolation_level=None, timeout=BUSY_TIMEOUT_S)
        try:
            conn.execute("PRAGMA journal_mode=WAL")
            conn.execute("PRAGMA synchronous=NORMAL")
            conn.execute("PRAGMA foreign_keys=ON")
            migrate(conn, path, upto)
        except sqlite3.DatabaseError as exc:
            conn.close()
            raise InputError(f"not a usable results database: {exc}", path) from exc
        except BaseException:
            conn.close()
            raise
        return cls(conn, path)

    def close(self) -> None:
        self._conn.close()

    def __enter__(self) -> "ResultStore":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    @property
    def schema_version(self) -> int:
        return _schema_version(self._conn)

    # -- runs ---------------------------------------------------------------------------

    def begin_run(self, run: RunRecord) -> None:
        """Store a new run (status ``running``); a run id already present is a ValueError."""
        if self.run_exists(run.run_id):
            raise ValueError(f"run {run.run_id} already exists in {self.path}")
        with _transaction(self._conn) as conn:
            conn.execute(_insert(RUN_COLUMNS, "runs"), to_db_values(run, RUN_COLUMNS))

    def run_exists(self, run_id: str) -> bool:
        return self._conn.execute("SELECT 1 FROM runs WHERE run_id = ?", (run_id,)).fetchone() is not None

    def get_run(self, run_id: str) -> RunRecord:
        """The run with exactly this id; an unknown id is an :class:`InputError` naming the database."""
        row = self._conn.execute(_select(RUN_COLUMNS, "runs") + " WHERE run_id = ?", (run_id,)).fetchone()
        if row is None:
            raise self._unknown(run_id)
        return from_db_values(RunRecord, RUN_COLUMNS, row)

    def list_runs(self) -> list[RunRecord]:
        """All runs, oldest first."""
        rows = self._conn.execute(_select(RUN_COLUMNS, "runs") + " ORDER BY started_at, rowid").fetchall()
        return [from_db_values(RunRecord, RUN_COLUMNS, r) for r in rows]

    def finish_run(self, run_id: str, status: str = "complete", summary: dict | None = None) -> None:
        """Mark a run ``complete`` or ``interrupted``, with its finishing time and summary."""
        if status not in RUN_STATUSES:
            raise ValueError(f"run status {status!r} is not one of {RUN_STATUSES}")
        self.get_run(run_id)
        with _transaction(self._conn) as conn:
            conn.execute("UPDATE runs SET status = ?, finished_at = ?, summary = ? WHERE run_id = ?",
                         (status, utc_now(), dumps(summary or {}), run_id))

    def resume_run(self, run_id: str) -> RunRecord:
        """Set a stored run back to ``running`` (for ``--resume``) and return it."""
        self.get_run(run_id)
        with _transaction(self._conn) as conn:
            conn.execute("UPDATE runs SET status = 'running', finished_at = NULL WHERE run_id = ?", (run_id,))
        return self.get_run(run_id)

    def resolve_run_id(self, spec: str, exclude: str | None = None, suite: str | None = None,
                       any_status: bool = False) -> str:
        """A full run id, a unique prefix of one, or ``latest`` (the latest complete run).

        ``exclude`` leaves one run out (a run's baseline is never itself);
        ``suite`` restricts ``latest`` to runs of that suite; ``any_status``
        lets ``latest`` be a run still ``running`` or ``interrupted`` (for
        ``--resume latest``).
        """
        if spec == "latest":
            return self._latest(exclude, suite, any_status)
        if self.run_exists(spec):
            return spec
        found = [r[0] for r in self._conn.execute(
            "SELECT run_id FROM runs WHERE substr(run_id, 1, ?) = ? ORDER BY run_id", (len(spec), spec))]
        if len(found) == 1:
            return found[0]
        if found:
            raise InputError(f"run id prefix {spec!r} matches {len(found)} runs: {', '.join(found[:6])}",
                             self.path)
        raise self._unknown(spec)

    def _latest(self, exclude: str | None, suite: str | None, any_status: bool) -> str:
        row = self._conn.execute(
            "SELECT run_id FROM runs WHERE (? OR status = 'complete') AND run_id IS NOT ? "
            "AND (? IS NULL OR suite = ?) ORDER BY started_at DESC, rowid DESC LIMIT 1",
            (any_status, exclude, suite, suite)).fetchone()
        if row is None:
            kind = "run" if any_status else "complete run"
            which = "" if suite is None else f" of suite {suite!r}"
            raise InputError(f"no {kind}{which} to use as 'latest'", self.path)
        return row[0]

    def _unknown(self, run_id: str) -> InputError:
        recent = [r[0] for r in self._conn.execute("SELECT run_id FROM runs ORDER BY rowid DESC LIMIT 5")]
        known = f"; most recent: {', '.join(recent)}" if recent else "; the database holds no runs"
        return InputError(f"no run {run_id!r}{known}", self.path)

    # -- results ------------------------------------------------------------------------

    def add_result(self, row: ResultRow) -> None:
        """Store one task's row in its own transaction (replacing a stored row with the same key)."""
        if row.status not in STATUSES:
            raise ValueError(f"result status {row.status!r} is not one of {STATUSES}")
        if row.verdict not in VERDICTS:
            raise ValueError(f"verdict {row.verdict!r} is not one of {VERDICTS}")
        values = to_db_values(row, RESULT_COLUMNS)
        try:
            with _transaction(self._conn) as conn:
                conn.execute(_insert(RESULT_COLUMNS, "results", "INSERT OR REPLACE"), values)
        except sqlite3.IntegrityError as exc:      # unknown run, or None in a required field
            raise ValueError(f"cannot store {row.task_key} of run {row.run_id} in {self.path}: {exc}") from exc

    def results(self, run_id: str) -> list[ResultRow]:
        """Every stored row of the run, ordered by task key."""
        self.get_run(run_id)
        rows = self._conn.execute(_select(RESULT_COLUMNS, "results") + " WHERE run_id = ? ORDER BY task_key",
                                  (run_id,)).fetchall()
        return [from_db_values(ResultRow, RESULT_COLUMNS, r) for r in rows]

    def stored_task_keys(self, run_id: str) -> set[str]:
        return {r[0] for r in self._conn.execute("SELECT task_key FROM results WHERE run_id = ?", (run_id,))}

    def missing_tasks(self, run_id: str, task_keys) -> list[str]:
        """The keys of ``task_keys`` with no stored row in the run, in the given order, once each."""
        stored = self.stored_task_keys(run_id)
        return [k for k in dict.fromkeys(task_keys) if k not in stored]
