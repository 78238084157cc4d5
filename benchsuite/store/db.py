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
* v3: ``results.captured_output`` (what the method's worker printed, bounded)
  and the hash chain of :mod:`benchsuite.store.chain`: ``results.seq``,
  ``results.row_hash``, ``runs.chain_head``, ``runs.chain_length``,
  ``runs.record_hash``.  Migrating seals the rows already stored (in the
  order they finished).

Opening checks that the tables and columns are there; a file that is not
SQLite, is truncated or damaged, lacks a table or has a schema version this
benchsuite does not know is an :class:`InputError` (exit 2), never a
traceback.

Tamper evidence
---------------
:meth:`ResultStore.get_run` and :meth:`ResultStore.results` verify the run's
record hash and its whole chain and raise
:class:`~benchsuite.store.chain.TamperedRunError` (an :class:`InputError`)
naming the run and the first edited row; every command that reads a run
(``compare``, ``export``, ``report``, ``table``, ``run --baseline``,
``--resume``) goes through them.  Replacing a row re-verifies the chain before
rehashing it, so benchsuite never re-seals an edit.

Bad values
----------
A row value that cannot be stored as its column's type (text in a number
column, ``iterations=10**20``, a set in ``resources``) is stored as NULL and
the row as ``invalid``, its message naming the field: one bad result never
makes a run unfinishable.

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

Concurrency and lock contention
-------------------------------
One writer: the runner's main process writes runs and results; worker
processes never touch the database.  Readers (``report``, ``export``) may
open the file while a run writes; WAL lets them see the last commit.  When
another process holds the write lock, every call retries with exponential
back-off (0.05 s doubling to 5 s) up to ``busy_wait_s`` in all
(:data:`DEFAULT_BUSY_WAIT_S`, or ``$BENCHSUITE_DB_BUSY_S``).  A result that
still cannot be written goes to the side file ``<db>.unsaved.jsonl``
(:mod:`benchsuite.store.unsaved`) with a notice on standard error; the next
write that gets through moves it into the database, and reading the run
from the same store first does so too (or raises
:class:`StoreBusyError`, exit 2, naming the side file; ``run --resume``
stores the rows kept there).

Duplicates
----------
``add_result`` for a ``(run_id, task_key)`` already stored replaces the row
(``INSERT OR REPLACE``): the last write wins.  ``--resume`` only computes
:meth:`ResultStore.missing_tasks`, so this happens only on purpose.
"""

from __future__ import annotations

import functools
import json
import os
import sqlite3
import sys
import time
from contextlib import contextmanager
from dataclasses import replace
from pathlib import Path

from benchsuite.errors import InputError
from benchsuite.scoring import STATUSES, VERDICTS
from benchsuite.store import unsaved
from benchsuite.store.chain import TamperedRunError, check_record, check_rows, genesis, record_hash, row_hash
from benchsuite.store.records import (REFERENCE_COLUMNS, RESULT_COLUMNS, RUN_COLUMNS, ResultRow, RunRecord,
                                      StoredReference, bound_text, dumps, from_db_values, reference_record,
                                      reference_sha256, storable_values, to_db_values, utc_now)

__all__ = ["DEFAULT_BUSY_WAIT_S", "MIGRATIONS", "SCHEMA_VERSION", "ResultStore", "StoreBusyError",
           "TamperedRunError", "default_db_path", "migrate"]

RUN_STATUSES = ("running", "complete", "interrupted")
DEFAULT_BUSY_WAIT_S = 600.0
BUSY_ATTEMPT_S = 5.0              # SQLite's own busy handler per attempt, inside the total wait
RESULT_NAMES = tuple(c.name for c in RESULT_COLUMNS)
RUN_NAMES = tuple(c.name for c in RUN_COLUMNS)
RESULT_CHAIN = ("seq", "row_hash")
RUN_CHAIN = ("chain_head", "chain_length", "record_hash")
MAX_MESSAGE_CHARS = 64 * 1024


class StoreBusyError(InputError):
    """The database stayed locked by another process for the whole bounded wait (exit code 2)."""


def default_db_path() -> Path:
    """``$BENCHSUITE_DB`` or ``.benchsuite/results.sqlite`` under the working directory."""
    return Path(os.environ.get("BENCHSUITE_DB", Path(".benchsuite") / "results.sqlite"))


def default_busy_wait_s() -> float:
    """``$BENCHSUITE_DB_BUSY_S`` (a non-negative number of seconds) or :data:`DEFAULT_BUSY_WAIT_S`."""
    text = os.environ.get("BENCHSUITE_DB_BUSY_S")
    if text is None:
        return DEFAULT_BUSY_WAIT_S
    try:
        value = float(text)
    except ValueError:
        value = float("nan")
    if not value >= 0 or value == float("inf"):
        raise InputError(f"must be a non-negative number of seconds, got {text!r}", field="BENCHSUITE_DB_BUSY_S")
    return value


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


def _v3_chain(conn: sqlite3.Connection) -> None:
    """Captured worker output per task; a hash chain over each run's rows (tamper evidence)."""
    conn.execute("ALTER TABLE results ADD COLUMN captured_output TEXT NOT NULL DEFAULT ''")
    conn.execute("ALTER TABLE results ADD COLUMN seq INTEGER")
    conn.execute("ALTER TABLE results ADD COLUMN row_hash TEXT")
    conn.execute("ALTER TABLE runs ADD COLUMN chain_head TEXT")
    conn.execute("ALTER TABLE runs ADD COLUMN chain_length INTEGER")
    conn.execute("ALTER TABLE runs ADD COLUMN record_hash TEXT")
    conn.execute("CREATE UNIQUE INDEX results_by_seq ON results(run_id, seq)")
    for (run_id,) in conn.execute("SELECT run_id FROM runs").fetchall():
        keys = conn.execute("SELECT task_key FROM results WHERE run_id = ? ORDER BY finished_at, rowid",
                            (run_id,)).fetchall()
        conn.executemany("UPDATE results SET seq = ? WHERE run_id = ? AND task_key = ?",
                         [(seq, run_id, key) for seq, (key,) in enumerate(keys, start=1)])
        _rehash_from(conn, run_id, 1)
        _reseal(conn, run_id)


def _v4_references(conn: sqlite3.Connection) -> None:
    """Each run's reference ladders, one row per (run, case, basis); result rows point to theirs."""
    conn.execute(f"""CREATE TABLE reference_ladders (
        run_id TEXT NOT NULL REFERENCES runs(run_id), "case" TEXT NOT NULL, basis TEXT NOT NULL,
        primary_method TEXT, primary_energy_ha REAL, uncertainty_ha REAL, space TEXT NOT NULL,
        {_json("ladder")}, sha256 TEXT NOT NULL, stored_at TEXT NOT NULL,
        PRIMARY KEY (run_id, "case", basis))""")


_REFERENCE_SQL = ", ".join(f'"{c}"' for c in REFERENCE_COLUMNS)


#: Ordered: MIGRATIONS[i] takes the schema from version i to i + 1.  Append only.
MIGRATIONS = (_v1_tables, _v2_indexes, _v3_chain, _v4_references)
SCHEMA_VERSION = len(MIGRATIONS)


def _schema_version(conn: sqlite3.Connection, path=None) -> int:
    found = conn.execute("SELECT COALESCE(MAX(version), 0) FROM schema_version").fetchone()[0]
    if not isinstance(found, int) or found < 0:
        raise InputError(f"schema version {found!r} is not a version number: not a benchsuite results database",
                         path)
    return found


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


@contextmanager
def _snapshot(conn: sqlite3.Connection):
    """A read transaction: every SELECT inside sees the same commit (WAL snapshot)."""
    conn.execute("BEGIN")
    try:
        yield conn
    finally:
        conn.execute("COMMIT")


def migrate(conn: sqlite3.Connection, path, upto: int | None = None) -> int:
    """Apply the missing migrations up to ``upto`` (default: all); return the schema version."""
    conn.execute("CREATE TABLE IF NOT EXISTS schema_version (version INTEGER PRIMARY KEY, "
                 "applied_at TEXT NOT NULL, description TEXT NOT NULL)")
    target = SCHEMA_VERSION if upto is None else upto
    found = _schema_version(conn, path)
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


# -- the chain in SQL ------------------------------------------------------------------

def _select(columns, table: str, extra=()) -> str:
    names = [c.sql for c in columns] + list(extra)
    return f"SELECT {', '.join(names)} FROM {table}"


def _insert(columns, table: str, verb: str = "INSERT", extra=()) -> str:
    names = [c.sql for c in columns] + list(extra)
    return f"{verb} INTO {table} ({', '.join(names)}) VALUES ({', '.join('?' for _ in names)})"


def _run_row(conn: sqlite3.Connection, run_id: str):
    """``(values, head, length, record_hash)`` of the stored run, or None."""
    row = conn.execute(_select(RUN_COLUMNS, "runs", RUN_CHAIN) + " WHERE run_id = ?", (run_id,)).fetchone()
    if row is None:
        return None
    n = len(RUN_COLUMNS)
    return row[:n], row[n], row[n + 1], row[n + 2]


def _checked_run(conn: sqlite3.Connection, run_id: str, path=None):
    """``(values, head, length)`` of the run after checking its record hash; None if absent."""
    found = _run_row(conn, run_id)
    if found is None:
        return None
    values, head, length, stored = found
    check_record(run_id, RUN_NAMES, values, head, length, stored, path)
    return values, head, length


def _reseal(conn: sqlite3.Connection, run_id: str) -> None:
    """Recompute the run's record hash from what is stored now (call only after checking it)."""
    values, head, length, _ = _run_row(conn, run_id)
    conn.execute("UPDATE runs SET record_hash = ? WHERE run_id = ?",
                 (record_hash(RUN_NAMES, values, head, length), run_id))


def _chain_rows(conn: sqlite3.Connection, run_id: str, from_seq: int = 1) -> list:
    """``(seq, row_hash, task_key, values)`` of the run's rows with ``seq >= from_seq`` (NULL seq first)."""
    rows = conn.execute(_select(RESULT_COLUMNS, "results", RESULT_CHAIN)
                        + " WHERE run_id = ? AND (seq IS NULL OR seq >= ?) ORDER BY seq", (run_id, from_seq))
    n = len(RESULT_COLUMNS)
    return [(r[n], r[n + 1], r[1], r[:n]) for r in rows]


def _rehash_from(conn: sqlite3.Connection, run_id: str, seq: int) -> None:
    """Recompute ``row_hash`` of the rows from ``seq`` on and the run's head and length."""
    previous = genesis(run_id)
    if seq > 1:
        previous = conn.execute("SELECT row_hash FROM results WHERE run_id = ? AND seq = ?",
                                (run_id, seq - 1)).fetchone()[0]
    for row_seq, _, key, values in _chain_rows(conn, run_id, seq):
        previous = row_hash(previous, RESULT_NAMES, values)
        conn.execute("UPDATE results SET row_hash = ? WHERE run_id = ? AND seq = ?", (previous, run_id, row_seq))
    length = conn.execute("SELECT count(*) FROM results WHERE run_id = ?", (run_id,)).fetchone()[0]
    conn.execute("UPDATE runs SET chain_head = ?, chain_length = ? WHERE run_id = ?", (previous, length, run_id))


def _put_row(conn: sqlite3.Connection, run_id: str, key: str, values: tuple, path=None) -> None:
    """Store one row's values (inside a transaction): appended to the chain, or replacing its stored row."""
    found = _checked_run(conn, run_id, path)
    if found is None:
        raise sqlite3.IntegrityError(f"FOREIGN KEY constraint failed: no run {run_id!r}")
    _, head, length = found
    old = conn.execute("SELECT seq FROM results WHERE run_id = ? AND task_key = ?", (run_id, key)).fetchone()
    if old is None:
        seq, digest = length + 1, row_hash(head, RESULT_NAMES, values)
        conn.execute(_insert(RESULT_COLUMNS, "results", extra=RESULT_CHAIN), values + (seq, digest))
        conn.execute("UPDATE runs SET chain_head = ?, chain_length = ? WHERE run_id = ?", (digest, seq, run_id))
    else:
        check_rows(run_id, RESULT_NAMES, _chain_rows(conn, run_id), head, length, path)   # never re-seal an edit
        conn.execute(_insert(RESULT_COLUMNS, "results", "INSERT OR REPLACE", RESULT_CHAIN), values + (old[0], None))
        _rehash_from(conn, run_id, old[0])
    _reseal(conn, run_id)


def _storable_row(row: ResultRow) -> tuple:
    """The row's values as stored; a row with a value its column cannot hold becomes ``invalid``."""
    values, notes = storable_values(row)
    if not notes:
        return values
    message = "stored as invalid, a value could not be stored: " + "; ".join(notes)
    if row.message:
        message += f"; the method said: {row.message}"
    bad = replace(row, status="invalid", verdict="invalid", message=bound_text(message, MAX_MESSAGE_CHARS))
    return storable_values(bad)[0]


def _check_tables(conn: sqlite3.Connection, path) -> None:
    """Every table and column this version reads is present."""
    want = {"runs": RUN_NAMES + RUN_CHAIN, "results": RESULT_NAMES + RESULT_CHAIN}
    for table, names in want.items():
        have = {r[1] for r in conn.execute(f"PRAGMA table_info({table})")}
        if not have:
            raise InputError(f"table {table!r} is missing: not a complete benchsuite results database", path)
        lacking = [n for n in names if n not in have]
        if lacking:
            raise InputError(f"table {table!r} lacks column(s) {', '.join(lacking)}: the file's schema does not "
                             "match its version number", path)


def _is_busy(exc: BaseException) -> bool:
    text = str(exc).lower()
    return isinstance(exc, sqlite3.OperationalError) and ("locked" in text or "busy" in text)


def _guarded(method):
    """Retry the call while the database is busy (bounded); a damaged file is an InputError."""
    @functools.wraps(method)
    def call(self, *args, **kwargs):
        return self._retry(lambda: method(self, *args, **kwargs))
    return call


# -- the store ------------------------------------------------------------------------

class ResultStore:
    """Runs and results in one SQLite file; see the module docstring for the guarantees.

    Use :meth:`open`; a store is a context manager that closes its connection.
    ``unsaved`` counts the rows this store had to put in the side file
    (:attr:`side_path`) and that are not yet in the database.
    """

    def __init__(self, conn: sqlite3.Connection, path: Path, busy_wait_s: float = DEFAULT_BUSY_WAIT_S,
                 notice=None):
        self._conn = conn
        self.path = path
        self.busy_wait_s = busy_wait_s
        self.side_path = unsaved.side_path(path)
        self.unsaved = 0
        self._notice = notice or (lambda text: print(f"benchsuite: {text}", file=sys.stderr, flush=True))

    @classmethod
    def open(cls, path=None, create: bool = True, upto: int | None = None, busy_wait_s: float | None = None,
             notice=None) -> ResultStore:
        """Open (and with ``create``, make, parent folders included) the database at ``path``.

        ``path=None`` means :func:`default_db_path`.  Without ``create`` a
        missing file is an :class:`InputError`.  ``upto`` stops migrating at
        that schema version (for tests of migrations: such a store reads and
        writes no rows).  ``busy_wait_s`` bounds the wait for another
        process's lock (default :func:`default_busy_wait_s`); ``notice(text)``
        tells the user about results kept in the side file (default: stderr).
        """
        path = Path(default_db_path() if path is None else path)
        busy_wait_s = default_busy_wait_s() if busy_wait_s is None else float(busy_wait_s)
        if path.is_dir():
            raise InputError("is a directory, not a results database", path)
        if not path.exists():
            if not create:
                raise InputError("no results database here (run `benchsuite run` first, or give --db)", path)
            path.parent.mkdir(parents=True, exist_ok=True)
        conn = sqlite3.connect(path, isolation_level=None, timeout=min(BUSY_ATTEMPT_S, busy_wait_s))
        store = cls(conn, path, busy_wait_s, notice)
        try:
            store._retry(lambda: store._prepare(upto))
        except BaseException:
            conn.close()
            raise
        return store

    def _prepare(self, upto: int | None) -> None:
        self._conn.execute("PRAGMA journal_mode=WAL")
        self._conn.execute("PRAGMA synchronous=NORMAL")
        self._conn.execute("PRAGMA foreign_keys=ON")
        if migrate(self._conn, self.path, upto) == SCHEMA_VERSION:
            _check_tables(self._conn, self.path)

    def close(self) -> None:
        self._conn.close()

    def __enter__(self) -> ResultStore:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    @property
    def schema_version(self) -> int:
        return self._retry(lambda: _schema_version(self._conn, self.path))

    def _retry(self, call, wait_s: float | None = None):
        """``call()``, retried with back-off while the database is locked, at most ``wait_s`` in all
        (default ``busy_wait_s``; 0 means one short attempt).

        Raises :class:`StoreBusyError` when the wait is used up, and an
        :class:`InputError` for a damaged or foreign file.
        """
        wait_s = self.busy_wait_s if wait_s is None else wait_s
        attempt_ms = int(1000 * min(BUSY_ATTEMPT_S, max(wait_s, 0.1)))
        self._conn.execute(f"PRAGMA busy_timeout = {attempt_ms}")
        deadline, delay = time.monotonic() + wait_s, 0.05
        while True:
            try:
                return call()
            except sqlite3.DatabaseError as exc:
                if not _is_busy(exc):
                    if isinstance(exc, sqlite3.IntegrityError):
                        raise
                    raise InputError(f"not a usable results database: {exc}", self.path) from exc
                left = deadline - time.monotonic()
                if left <= 0:
                    raise StoreBusyError(f"the database stayed locked by another process for "
                                         f"{wait_s:g} s ({exc})", self.path) from exc
                time.sleep(min(delay, left))
                delay = min(2 * delay, BUSY_ATTEMPT_S)

    # -- runs ---------------------------------------------------------------------------

    @_guarded
    def begin_run(self, run: RunRecord) -> None:
        """Store a new run (status ``running``); a run id already present is a ValueError."""
        if self.run_exists(run.run_id):
            raise ValueError(f"run {run.run_id} already exists in {self.path}")
        with _transaction(self._conn) as conn:
            conn.execute(_insert(RUN_COLUMNS, "runs"), to_db_values(run, RUN_COLUMNS))
            conn.execute("UPDATE runs SET chain_head = ?, chain_length = 0 WHERE run_id = ?",
                         (genesis(run.run_id), run.run_id))
            _reseal(conn, run.run_id)

    def run_exists(self, run_id: str) -> bool:
        return self._retry(lambda: self._conn.execute("SELECT 1 FROM runs WHERE run_id = ?",
                                                      (run_id,)).fetchone() is not None)

    @_guarded
    def get_run(self, run_id: str) -> RunRecord:
        """The run with exactly this id, its record hash checked.

        An unknown id is an :class:`InputError` naming the database; an
        edited record a :class:`TamperedRunError`.
        """
        found = _checked_run(self._conn, run_id, self.path)
        if found is None:
            raise self._unknown(run_id)
        return from_db_values(RunRecord, RUN_COLUMNS, found[0])

    @_guarded
    def list_runs(self) -> list[RunRecord]:
        """All runs, oldest first (not verified: see :meth:`get_run`)."""
        rows = self._conn.execute(_select(RUN_COLUMNS, "runs") + " ORDER BY started_at, rowid").fetchall()
        return [from_db_values(RunRecord, RUN_COLUMNS, r) for r in rows]

    def _update_run(self, run_id: str, sql: str, args: tuple) -> None:
        """One checked update of the run's row, resealed (flushing kept-aside rows first)."""
        def write():
            with unsaved.take(self.side_path) as (entries, keep), _transaction(self._conn) as conn:
                self._put_side_rows(conn, entries, keep)
                if _checked_run(conn, run_id, self.path) is None:
                    raise self._unknown(run_id)
                conn.execute(sql, args + (run_id,))
                _reseal(conn, run_id)
        try:
            self._retry(write)
        except StoreBusyError as exc:
            if self.unsaved:
                raise StoreBusyError(f"{exc.detail}; {self.unsaved} computed result(s) are kept in "
                                     f"{self.side_path}: `benchsuite run --resume {run_id}` stores them once the "
                                     "database is free", self.path) from None
            raise
        self._side_rows_stored()

    def finish_run(self, run_id: str, status: str = "complete", summary: dict | None = None) -> None:
        """Mark a run ``complete`` or ``interrupted``, with its finishing time and summary."""
        if status not in RUN_STATUSES:
            raise ValueError(f"run status {status!r} is not one of {RUN_STATUSES}")
        self._update_run(run_id, "UPDATE runs SET status = ?, finished_at = ?, summary = ? WHERE run_id = ?",
                         (status, utc_now(), dumps(summary or {})))

    def resume_run(self, run_id: str) -> RunRecord:
        """Set a stored run back to ``running`` (for ``--resume``) and return it.

        Rows kept in the side file (by any process) are stored first, so the
        resumed run does not compute them again.  An edited run is refused
        (:class:`TamperedRunError`) before anything is computed for it.
        """
        self.results(run_id)
        self._update_run(run_id, "UPDATE runs SET status = 'running', finished_at = NULL WHERE run_id = ?", ())
        return self.get_run(run_id)

    @_guarded
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
        """Store one task's row in its own transaction (replacing a stored row with the same key).

        A value its column cannot hold makes the row ``invalid`` (see the
        module docstring).  If the database stays locked for the whole bounded
        wait, the row goes to the side file and a notice says so; once one
        row went there, later rows try once and follow it without waiting,
        until a write gets through and stores them all.
        """
        if row.status not in STATUSES:
            raise ValueError(f"result status {row.status!r} is not one of {STATUSES}")
        if row.verdict not in VERDICTS:
            raise ValueError(f"verdict {row.verdict!r} is not one of {VERDICTS}")
        values = _storable_row(row)

        def write():
            with unsaved.take(self.side_path) as (entries, keep), _transaction(self._conn) as conn:
                self._put_side_rows(conn, entries, keep)
                _put_row(conn, row.run_id, row.task_key, values, self.path)
        try:
            self._retry(write, 0.0 if self.unsaved else None)
        except StoreBusyError as exc:
            unsaved.append(self.side_path, row.run_id, row.task_key, RESULT_NAMES, values)
            self.unsaved += 1
            if self.unsaved == 1:
                self._notice(f"{exc}; the result of {row.task_key} and any that follow while it stays locked are "
                             f"kept in {self.side_path} and stored as soon as the database is free")
            return
        except sqlite3.IntegrityError as exc:      # unknown run, or None in a required field
            raise ValueError(f"cannot store {row.task_key} of run {row.run_id} in {self.path}: {exc}") from exc
        self._side_rows_stored()

    @_guarded
    def add_results(self, rows: list[ResultRow]) -> None:
        """Store many new rows of one run in one transaction, chained in the given order, the record
        resealed once (for callers holding all rows at once: a scored results file).  A key already
        stored, or two rows with one key, is a ValueError; no side-file fallback (a lock held for the
        whole wait is a :class:`StoreBusyError`)."""
        if not rows:
            return
        run_id = rows[0].run_id
        for row in rows:
            if row.status not in STATUSES or row.verdict not in VERDICTS or row.run_id != run_id:
                raise ValueError(f"{row.task_key}: unknown status/verdict or another run")
        keyed = [(row.task_key, _storable_row(row)) for row in rows]
        with _transaction(self._conn) as conn:
            found = _checked_run(conn, run_id, self.path)
            if found is None:
                raise ValueError(f"no run {run_id!r} in {self.path}")
            _, head, length = found
            stored = {k for (k,) in conn.execute("SELECT task_key FROM results WHERE run_id = ?", (run_id,))}
            for key, values in keyed:
                if key in stored:
                    raise ValueError(f"{key} is already stored in run {run_id}")
                stored.add(key)
                length, head = length + 1, row_hash(head, RESULT_NAMES, values)
                conn.execute(_insert(RESULT_COLUMNS, "results", extra=RESULT_CHAIN), values + (length, head))
            conn.execute("UPDATE runs SET chain_head = ?, chain_length = ? WHERE run_id = ?", (head, length, run_id))
            _reseal(conn, run_id)

    def _put_side_rows(self, conn: sqlite3.Connection, entries: list, keep: list) -> None:
        """Store the side file's entries (each in a savepoint); keep those that cannot be stored."""
        for entry in entries:
            conn.execute("SAVEPOINT side_row")
            try:
                values = tuple(entry["values"].get(n) for n in RESULT_NAMES)
                _put_row(conn, entry["run_id"], entry["task_key"], values, self.path)
            except (sqlite3.IntegrityError, InputError, KeyError, TypeError):
                conn.execute("ROLLBACK TO side_row")
                keep.append(entry)
            conn.execute("RELEASE side_row")

    def _side_rows_stored(self) -> None:
        if self.unsaved:
            self._notice(f"the {self.unsaved} result(s) kept in {self.side_path} are now stored in {self.path}")
            self.unsaved = 0

    def store_unsaved(self, run_id: str | None = None) -> None:
        """Move every row of the side file into the database (bounded wait; :class:`StoreBusyError`)."""
        def write():
            with unsaved.take(self.side_path) as (entries, keep), _transaction(self._conn) as conn:
                self._put_side_rows(conn, entries, keep)
        try:
            self._retry(write)
        except StoreBusyError as exc:
            then = f"`benchsuite run --resume {run_id}`" if run_id else "`benchsuite run --resume`"
            raise StoreBusyError(f"{exc.detail}; {self.unsaved} computed result(s) are kept in {self.side_path}: "
                                 f"{then} stores them once the database is free", self.path) from None
        self._side_rows_stored()

    @_guarded
    def results(self, run_id: str) -> list[ResultRow]:
        """Every stored row of the run, ordered by task key, after checking the run's hash chain.

        Rows this store kept in the side file are stored first.  An edited
        row or record is a :class:`TamperedRunError` naming the run and row.
        """
        if self.unsaved:
            self.store_unsaved(run_id)
        with _snapshot(self._conn) as conn:
            found = _checked_run(conn, run_id, self.path)
            if found is None:
                raise self._unknown(run_id)
            rows = _chain_rows(conn, run_id)
        check_rows(run_id, RESULT_NAMES, rows, found[1], found[2], self.path)
        return sorted((from_db_values(ResultRow, RESULT_COLUMNS, r[3]) for r in rows), key=lambda r: r.task_key)

    def chain(self, run_id: str) -> dict:
        """``{"head_sha256", "rows"}`` of the run's verified hash chain (publish the head to anchor it)."""
        rows = self.results(run_id)
        found = self._retry(lambda: _run_row(self._conn, run_id))
        return {"head_sha256": found[1], "rows": len(rows)}

    @_guarded
    def stored_task_keys(self, run_id: str) -> set[str]:
        return {r[0] for r in self._conn.execute("SELECT task_key FROM results WHERE run_id = ?", (run_id,))}

    @_guarded
    def add_reference(self, run_id: str, ladder: dict) -> None:
        """Store the reference ladder document of one (case, basis) of the run, once: a pair already
        stored for the run is kept (a resumed run reuses the ladder its first rows were judged on).

        ``ladder`` is :meth:`benchsuite.chem.ladder.Ladder.to_json`'s document; its primary rung,
        energy (Eh), uncertainty u (Eh; 0 for an exact rung) and space label are columns of their own.
        """
        record = reference_record(run_id, ladder)
        values = tuple(dumps(record.ladder) if c == "ladder" else getattr(record, c) for c in REFERENCE_COLUMNS)

        def write():
            with _transaction(self._conn) as conn:
                conn.execute(f"INSERT OR IGNORE INTO reference_ladders ({_REFERENCE_SQL}) "
                             f"VALUES ({', '.join('?' * len(values))})", values)
        self._retry(write)

    @_guarded
    def references(self, run_id: str) -> list[StoredReference]:
        """The run's reference ladders by (case, basis), each checked against its SHA-256 (an edited
        one is a :class:`TamperedRunError`); empty for a run stored before schema v4."""
        rows = self._conn.execute(f"SELECT {_REFERENCE_SQL} FROM reference_ladders WHERE run_id = ? "
                                  'ORDER BY "case", basis', (run_id,)).fetchall()
        out = []
        for values in rows:
            record = StoredReference(**dict(zip(REFERENCE_COLUMNS, values)))
            record.ladder = json.loads(record.ladder)
            if record.sha256 != reference_sha256(run_id, record.ladder):
                raise TamperedRunError(run_id, f"the reference ladder of {record.case} / {record.basis} does not "
                                       "match its SHA-256", self.path)
            out.append(record)
        return out

    @_guarded
    def measured_seconds(self, task_keys, exclude_run: str | None = None) -> dict[str, float]:
        """``task key -> seconds`` of the latest completed row of each key in any stored run (a
        timeout, error or invalid result measured no cost and is left out); the cost model's history."""
        keys = list(dict.fromkeys(task_keys))
        out: dict[str, float] = {}
        for i in range(0, len(keys), 500):
            chunk = keys[i:i + 500]
            marks = ",".join("?" * len(chunk))
            for key, seconds in self._conn.execute(
                    f"SELECT task_key, seconds FROM results WHERE task_key IN ({marks}) AND run_id IS NOT ? "
                    "AND status IN ('ok', 'below-exact', 'wrong-state') ORDER BY finished_at",
                    (*chunk, exclude_run)):
                out[key] = float(seconds)
        return out

    def missing_tasks(self, run_id: str, task_keys) -> list[str]:
        """The keys of ``task_keys`` with no stored row in the run, in the given order, once each."""
        stored = self.stored_task_keys(run_id)
        return [k for k in dict.fromkeys(task_keys) if k not in stored]
