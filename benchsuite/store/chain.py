"""Tamper evidence: a SHA-256 hash chain over each run's stored rows.

Every result row carries ``seq`` (1, 2, ... in the order the run first stored
its tasks) and ``row_hash``::

    row_hash[k] = SHA-256( row_hash[k-1] | canonical(row k) )
    row_hash[0] = SHA-256( "benchsuite-chain-v1" | run_id )        (the genesis)

``canonical(row)`` is the JSON list of ``[column, value]`` pairs of every
stored column of :data:`~benchsuite.store.records.RESULT_COLUMNS`, values as
bound to SQLite (floats at full precision), sorted keys, no spaces.  The run
row carries the chain's head (``chain_head``, the last ``row_hash``) and
length (``chain_length``), and ``record_hash`` = SHA-256 over every run
column plus head and length, so an edited run record (its summary, its gate
decision, its status) is caught too.

Verification (:func:`check_run`, :func:`check_rows`) recomputes everything
from the stored values and names the first row that disagrees.  What it
catches: any edit of a stored value outside benchsuite (``UPDATE results SET
verdict='pass'``), a deleted, added or reordered row, an edited run record.
What it cannot catch: someone who recomputes the chain with this code; there
is no secret key.  Rows stored before schema v3 were sealed when the
database was migrated, so edits made before then go unseen.
"""

from __future__ import annotations

import hashlib
import json

from benchsuite.errors import InputError

CHAIN_VERSION = "benchsuite-chain-v1"


class TamperedRunError(InputError):
    """A stored run whose rows or record no longer match their hashes (exit code 2)."""

    def __init__(self, run_id: str, what: str, path=None, task_key: str | None = None):
        self.run_id, self.task_key = run_id, task_key
        row = f", task {task_key}" if task_key else ""
        super().__init__(f"run {run_id}{row}: {what}; the database was changed outside benchsuite, "
                         "so this run is not used (rerun it, or restore the database from a copy)", path)


def _sha(*parts: str) -> str:
    return hashlib.sha256("|".join(parts).encode()).hexdigest()


def genesis(run_id: str) -> str:
    """The hash a run's chain starts from."""
    return _sha(CHAIN_VERSION, run_id)


def canonical(names, values) -> str:
    """The canonical JSON of ``[[name, value], ...]`` (values as stored: text, finite float, int, None)."""
    return json.dumps([[n, v] for n, v in zip(names, values)], separators=(",", ":"), allow_nan=False,
                      ensure_ascii=False)


def row_hash(previous: str, names, values) -> str:
    """The hash of one row chained on ``previous``."""
    return _sha(previous, canonical(names, values))


def record_hash(names, values, head: str, length: int) -> str:
    """The hash of a run record (its stored values) with its chain's head and length."""
    return _sha(CHAIN_VERSION, canonical(names, values), head, str(length))


def check_record(run_id: str, names, values, head, length, stored, path=None) -> None:
    """Raise :class:`TamperedRunError` unless the run record matches its ``record_hash``."""
    if head is None or length is None or stored != record_hash(names, values, head, length):
        raise TamperedRunError(run_id, "the run's record (settings, status or summary) does not match its "
                               "record hash", path)


def check_rows(run_id: str, names, rows, head: str, length: int, path=None) -> None:
    """Raise :class:`TamperedRunError` unless ``rows`` -- ``(seq, row_hash, task_key, values)``
    ordered by ``seq`` -- form exactly the chain that ends in ``head`` after ``length`` rows."""
    previous = genesis(run_id)
    for position, (seq, stored, key, values) in enumerate(rows, start=1):
        if seq != position:
            raise TamperedRunError(run_id, f"row {position} of the hash chain is missing or out of order "
                                   f"(found sequence number {seq!r})", path, key)
        expected = row_hash(previous, names, values)
        if stored != expected:
            raise TamperedRunError(run_id, f"row {position} was edited after it was stored (its values do not "
                                   "match its hash)", path, key)
        previous = expected
    if len(rows) != length or previous != head:
        raise TamperedRunError(run_id, f"the run stored {length} row(s) and {len(rows)} remain, or the last "
                               "row is not the one stored last: a row was deleted or replaced", path)
