"""On-disk cache for SCF results, MO integrals and reference ladders.

Entries are keyed by a SHA-256 content hash of everything that determines the
result: geometry in bohr (rounded to 1e-10), elements, basis, charge,
multiplicity, frozen core, active space, SCF kind, PySCF version and this
module's schema version, plus whatever options the caller adds.  Each entry is
``<key>.json`` and optionally ``<key>.npz`` (arrays, loaded with
``allow_pickle=False``).  No pickle anywhere.  The JSON is an object
``{"schema", "fields", "meta", "npz_sha256", "sha256"}``: ``sha256`` is the
SHA-256 of the canonical JSON (sorted keys, no spaces) of the other four, so
the metadata itself (a ladder's energies) is checksummed, and ``npz_sha256``
is the SHA-256 of the NPZ file's bytes.

An entry is served only if it passes every check: readable, an object of
exactly that shape (``fields`` and ``meta`` objects), its checksum matches,
its stored key fields equal the requested ones, and its NPZ (if any) matches
its digest.  Anything else -- truncated or garbage bytes, a flipped bit, valid
JSON of the wrong shape (``null``, a list, a missing key), an edited energy,
an entry of an older schema -- is counted as corrupt, discarded and
recomputed, never served and never an exception.  Writes go to a temporary file and are renamed into place, so
an interrupted write never leaves a half entry that looks valid.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

SCHEMA_VERSION = 2          # 2: checksum over the JSON content
_RECORD_KEYS = frozenset({"schema", "fields", "meta", "npz_sha256", "sha256"})


def default_cache_dir() -> Path:
    """``$BENCHSUITE_CACHE`` or ``.benchsuite/cache`` under the working directory."""
    return Path(os.environ.get("BENCHSUITE_CACHE", Path(".benchsuite") / "cache"))


def content_key(fields: dict) -> str:
    """SHA-256 of the canonical JSON of ``fields`` (sorted keys, no spaces)."""
    blob = json.dumps({"schema": SCHEMA_VERSION, **fields}, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(blob.encode()).hexdigest()


def record_digest(record: dict) -> str:
    """SHA-256 of the canonical JSON of an entry without its own ``sha256``."""
    body = {k: v for k, v in record.items() if k != "sha256"}
    return hashlib.sha256(json.dumps(body, sort_keys=True, separators=(",", ":")).encode()).hexdigest()


def _checked_record(text: str, fields: dict) -> dict | None:
    """The parsed entry if it has the right shape, checksum, schema and key fields; else None."""
    record = json.loads(text)
    if not isinstance(record, dict) or set(record) != _RECORD_KEYS:
        return None
    if not isinstance(record["meta"], dict) or not isinstance(record["fields"], dict):
        return None
    if record["npz_sha256"] is not None and not isinstance(record["npz_sha256"], str):
        return None
    if record["sha256"] != record_digest(record) or record["schema"] != SCHEMA_VERSION:
        return None
    return record if record["fields"] == fields else None


def _normalise(fields: dict) -> dict:
    """The JSON round-trip of the fields, so stored and requested compare equal."""
    return json.loads(json.dumps(fields, sort_keys=True))


@dataclass
class CacheStats:
    hits: int = 0
    misses: int = 0
    corrupt: int = 0
    events: list[tuple[str, str, str]] = field(default_factory=list)  # (kind, key, what)


class DiskCache:
    """A directory of JSON/NPZ entries.  ``root=None`` disables caching."""

    def __init__(self, root: Path | None):
        self.root = None if root is None else Path(root)
        self.stats = CacheStats()

    def _paths(self, key: str) -> tuple[Path, Path]:
        sub = self.root / key[:2]
        return sub / f"{key}.json", sub / f"{key}.npz"

    def get_or_compute(self, kind: str, fields: dict,
                       compute: Callable[[], tuple[dict, dict[str, np.ndarray] | None]]
                       ) -> tuple[dict, dict[str, np.ndarray] | None, str]:
        """Return ``(meta, arrays, status)``; ``status`` is ``hit``, ``miss`` or ``recomputed``.

        ``compute()`` returns JSON-serialisable metadata and optional arrays.
        """
        fields = _normalise({"kind": kind, **fields})
        key = content_key(fields)
        if self.root is None:
            meta, arrays = compute()
            return meta, arrays, "off"
        found = self._load(key, fields)
        if found is not None:
            self.stats.hits += 1
            self.stats.events.append((kind, key, "hit"))
            return found[0], found[1], "hit"
        status = "recomputed" if self._exists(key) else "miss"
        if status == "recomputed":
            self.stats.corrupt += 1
        else:
            self.stats.misses += 1
        self.stats.events.append((kind, key, status))
        meta, arrays = compute()
        self._store(key, fields, meta, arrays)
        return meta, arrays, status

    def _exists(self, key: str) -> bool:
        return any(p.exists() for p in self._paths(key))

    def _load(self, key: str, fields: dict):
        """``(meta, arrays)`` of a valid entry, or None (absent or failing any check)."""
        jpath, npath = self._paths(key)
        try:
            record = _checked_record(jpath.read_text(encoding="utf-8"), fields)
            if record is None:
                return None
            arrays = None
            if record["npz_sha256"]:
                blob = npath.read_bytes()
                if hashlib.sha256(blob).hexdigest() != record["npz_sha256"]:
                    return None
                with np.load(io.BytesIO(blob), allow_pickle=False) as z:
                    arrays = {k: z[k] for k in z.files}
            return record["meta"], arrays
        except Exception:          # unreadable in any way (OSError, bad UTF-8, bad JSON, bad zip): recompute
            return None

    def _store(self, key: str, fields: dict, meta: dict, arrays) -> None:
        jpath, npath = self._paths(key)
        jpath.parent.mkdir(parents=True, exist_ok=True)
        digest = None
        if arrays is not None:
            tmp = _temp_path(npath)
            with open(tmp, "wb") as fh:
                np.savez(fh, **arrays)
            digest = hashlib.sha256(tmp.read_bytes()).hexdigest()
            os.replace(tmp, npath)
        record = {"schema": SCHEMA_VERSION, "fields": fields, "meta": meta, "npz_sha256": digest}
        record["sha256"] = record_digest(record)
        tmp = _temp_path(jpath)
        tmp.write_text(json.dumps(record, indent=1, sort_keys=True))
        os.replace(tmp, jpath)


def _temp_path(target: Path) -> Path:
    fd, name = tempfile.mkstemp(prefix=target.name + ".", suffix=".tmp", dir=target.parent)
    os.close(fd)
    return Path(name)
