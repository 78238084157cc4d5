"""The side file of results the database could not take: ``<db>.unsaved.jsonl``.

When the database stays locked by another process longer than the store's
bounded wait, a computed row is not lost: :func:`append` writes it, one JSON
object per line ``{"run_id", "task_key", "values": {column: value}}`` with the
values exactly as they would have been bound to SQLite, and the next write
that gets through (or ``benchsuite run --resume``) moves the rows into the
database (:func:`take`).  Appends and takes hold an exclusive ``flock`` on
the file, so two processes never interleave lines or take the same rows.
"""

from __future__ import annotations

import fcntl
import json
import os
from contextlib import contextmanager
from pathlib import Path


def side_path(db_path) -> Path:
    """``<db>.unsaved.jsonl`` beside the database."""
    db_path = Path(db_path)
    return db_path.with_name(db_path.name + ".unsaved.jsonl")


def _open_locked(path: Path) -> int:
    """An fd of ``path`` holding its exclusive lock, on the file the path names *now*.

    A taker unlinks the file while holding the lock; whoever waited for the
    lock on the old file then opens the new one instead of writing into a
    file nobody will read.
    """
    while True:
        fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_APPEND, 0o644)
        fcntl.flock(fd, fcntl.LOCK_EX)
        try:
            if os.stat(path).st_ino == os.fstat(fd).st_ino:
                return fd
        except FileNotFoundError:
            pass
        os.close(fd)


@contextmanager
def _locked(path: Path):
    fd = _open_locked(path)
    try:
        yield fd
    finally:
        os.close(fd)                     # releases the lock


def append(path: Path, run_id: str, task_key: str, names, values) -> None:
    """Add one row (flushed and fsynced: the point of the file is that it survives)."""
    line = json.dumps({"run_id": run_id, "task_key": task_key, "values": dict(zip(names, values))},
                      separators=(",", ":"), allow_nan=False) + "\n"
    with _locked(path) as fd:
        os.write(fd, line.encode())
        os.fsync(fd)


def pending(path: Path) -> bool:
    """Whether the side file holds anything."""
    try:
        return path.stat().st_size > 0
    except OSError:
        return False


@contextmanager
def take(path: Path):
    """Yield ``(entries, keep)``: the parsed lines (a torn line is skipped) and a list for the caller
    to fill with entries it could not store.

    The caller stores the entries inside the ``with``; on success the file is
    removed, or rewritten with ``keep``; if the body raises, the file is left
    as it was.  The file stays locked throughout.
    """
    if not pending(path):
        yield [], []
        return
    with _locked(path):
        with open(path, "rb") as fh:
            lines = fh.read().splitlines()
        entries = []
        for line in lines:
            try:
                entry = json.loads(line)
            except ValueError:
                continue                 # a line torn by a killed writer holds no complete row
            if isinstance(entry, dict) and isinstance(entry.get("values"), dict):
                entries.append(entry)
        keep = []
        yield entries, keep
        if keep:
            _rewrite(path, keep)
        else:
            path.unlink()                # under the lock: see _open_locked


def _rewrite(path: Path, entries: list) -> None:
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text("".join(json.dumps(e, separators=(",", ":")) + "\n" for e in entries))
    os.replace(tmp, path)                # a new inode: waiters reopen it (see _open_locked)
