"""What the store keeps: one :class:`RunRecord` per invocation, one :class:`ResultRow` per task.

Plain data in, plain data out: no PySCF, no OpenFermion, no numpy import.

Units: energies in hartree (``*_ha``), errors and thresholds in millihartree
(``*_mha``), times in seconds.  Times of day are ISO 8601 strings in UTC.

Each dataclass field is one database column (:data:`RUN_COLUMNS`,
:data:`RESULT_COLUMNS` say how it is stored): scalars as TEXT, REAL or
INTEGER, booleans as INTEGER 0/1, dicts and lists as JSON TEXT written with
``allow_nan=False`` after non-finite floats became ``null``.  A non-finite
float in a REAL column is stored as NULL too.
"""

from __future__ import annotations

import hashlib
import json
import math
import re
from dataclasses import asdict, dataclass, field
from datetime import datetime, timezone


def utc_now() -> str:
    """The current time, ISO 8601 in UTC to the second: ``2026-12-01T22:30:15+00:00``."""
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


@dataclass(kw_only=True)
class RunRecord:
    """One invocation of ``benchsuite run``.

    ``options`` is ``{method: {option: value}}``; ``packages`` maps a package
    name to its version; ``git`` is ``{"commit", "dirty"}`` of the working
    directory (None where unknown); ``plugin_git`` maps a plugin to
    ``{"package", "version", "commit", "dirty", "source"}``; ``machine`` is
    :func:`benchsuite.store.provenance.machine_info`.  ``status`` is
    ``running`` until :meth:`ResultStore.finish_run`; a run still ``running``
    with no process behind it was killed and can be resumed.
    """

    run_id: str
    started_at: str
    command: str
    suite: str | None = None
    cases: list[str] = field(default_factory=list)
    methods: list[str] = field(default_factory=list)
    options: dict = field(default_factory=dict)
    encoding: str
    threshold_mha: float
    threshold_source: str
    seed: int
    packages: dict = field(default_factory=dict)
    git: dict = field(default_factory=dict)
    plugin_git: dict = field(default_factory=dict)
    machine: dict = field(default_factory=dict)
    finished_at: str | None = None
    status: str = "running"
    summary: dict = field(default_factory=dict)

    def to_json_dict(self) -> dict:
        """Plain JSON-safe dict (non-finite floats become None)."""
        return json_safe(asdict(self))


@dataclass(kw_only=True)
class ResultRow:
    """One task, ``(case, basis, encoding, method, options)``, as judged.

    ``status`` is one of :data:`benchsuite.scoring.STATUSES`, ``verdict`` one
    of :data:`benchsuite.scoring.VERDICTS`.  ``error_mha`` is
    ``1000 * (energy_ha - reference_energy_ha)``.  ``secondary`` holds the
    other reference rungs and published values with the method's error
    against each; ``scf`` is ``{"method", "converged", "stable", "flags"}``.
    ``captured_output`` is what the method's worker printed (stdout and
    stderr), at most :data:`MAX_CAPTURED_CHARS` characters as stored.
    """

    run_id: str
    task_key: str
    case: str
    basis: str
    encoding: str
    method: str
    options: dict = field(default_factory=dict)
    status: str
    verdict: str
    energy_ha: float | None = None
    stderr_ha: float | None = None
    reference_method: str | None = None
    reference_energy_ha: float | None = None
    error_mha: float | None = None
    threshold_mha: float
    converged: bool | None = None
    iterations: int | None = None
    seconds: float
    message: str = ""
    n_qubits: int | None = None
    n_terms: int | None = None
    one_norm_ha: float | None = None
    qwc_groups: int | None = None
    resources: dict = field(default_factory=dict)
    metadata: dict = field(default_factory=dict)
    parameters: list | None = None
    secondary: dict = field(default_factory=dict)
    space: str = ""
    tags: list[str] = field(default_factory=list)
    scan_parent: str | None = None
    scan_length: float | None = None
    scf: dict = field(default_factory=dict)
    finished_at: str = field(default_factory=utc_now)
    captured_output: str = ""

    def to_json_dict(self) -> dict:
        """Plain JSON-safe dict (non-finite floats become None)."""
        return json_safe(asdict(self))


# -- canonical JSON and task keys -------------------------------------------------

def json_safe(obj):
    """``obj`` with tuples as lists, non-finite floats as None and numpy-like scalars as Python."""
    if isinstance(obj, dict):
        return {str(k): json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_safe(v) for v in obj]
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if obj is None or isinstance(obj, (bool, int, str)):
        return obj
    if hasattr(obj, "tolist"):          # numpy scalar or array, without importing numpy
        return json_safe(obj.tolist())
    raise TypeError(f"{type(obj).__name__} {obj!r:.60} is not plain data (dict, list, str, number, bool, None)")


def dumps(obj) -> str:
    """Canonical JSON text: sorted keys, no spaces, no NaN (see :func:`json_safe`)."""
    return json.dumps(json_safe(obj), sort_keys=True, separators=(",", ":"), allow_nan=False)


def task_key(case: str, basis: str, encoding: str, method: str, options: dict, shots: dict | None = None) -> str:
    """Stable identity of a task: ``case/basis/encoding/method#<12 hex>``.

    The hex digits are the start of the SHA-256 of the canonical JSON of all
    five parts, so two tasks differing only in an option value get different
    keys while the readable part stays the same.  Dict order does not matter;
    ``1`` and ``1.0`` are different option values.  A task measured with shots
    (``shots``: the measurement plan as a dict) reads ``method+shots`` and hashes the plan too;
    unmeasured keys are those of every earlier version.
    """
    parts = [case, basis, encoding, method, options] + ([shots] if shots else [])
    digest = hashlib.sha256(dumps(parts).encode()).hexdigest()
    return f"{case}/{basis}/{encoding}/{method}{'+shots' if shots else ''}#{digest[:12]}"


# -- how each field is stored -------------------------------------------------------

@dataclass(frozen=True)
class Column:
    """A dataclass field as a column: ``kind`` is text, real, int, bool or json."""

    name: str
    kind: str
    required: bool = False

    @property
    def sql(self) -> str:
        """The column name quoted for SQL (``case`` is a keyword)."""
        return f'"{self.name}"'

    def to_db(self, value):
        """The Python value as bound to SQLite."""
        if value is None:
            return None
        if self.kind == "json":
            return dumps(value)
        if self.kind == "real":
            value = float(value)
            if value == 0.0:
                return 0.0                # SQLite reads -0.0 back as 0.0; store what it will give back
            return value if math.isfinite(value) else None
        if self.kind == "bool":
            return int(bool(value))
        if self.kind == "int":
            return int(value)
        text = str(value)
        if not text.isascii():            # lone surrogates cannot be stored as UTF-8: make them U+FFFD
            text = _SURROGATE.sub("\ufffd", text)
        return text

    def from_db(self, value):
        """The stored value as the dataclass holds it."""
        if value is None:
            return None
        if self.kind == "json":
            return json.loads(value)
        if self.kind == "bool":
            return bool(value)
        return value


_SURROGATE = re.compile("[\ud800-\udfff]")


def _columns(spec: str) -> tuple[Column, ...]:
    """Parse ``"name:kind[!]"`` words; ``!`` marks NOT NULL."""
    cols = []
    for word in spec.split():
        name, kind = word.split(":")
        cols.append(Column(name, kind.rstrip("!"), kind.endswith("!")))
    return tuple(cols)


RUN_COLUMNS = _columns("""
    run_id:text! started_at:text! command:text! suite:text cases:json! methods:json! options:json!
    encoding:text! threshold_mha:real! threshold_source:text! seed:int! packages:json! git:json!
    plugin_git:json! machine:json! finished_at:text status:text! summary:json!
""")

RESULT_COLUMNS = _columns("""
    run_id:text! task_key:text! case:text! basis:text! encoding:text! method:text! options:json!
    status:text! verdict:text! energy_ha:real stderr_ha:real reference_method:text
    reference_energy_ha:real error_mha:real threshold_mha:real! converged:bool iterations:int
    seconds:real! message:text! n_qubits:int n_terms:int one_norm_ha:real qwc_groups:int
    resources:json! metadata:json! parameters:json secondary:json! space:text! tags:json!
    scan_parent:text scan_length:real scf:json! finished_at:text! captured_output:text!
""")


#: Bounds of what a row may hold as stored (SQLite INTEGER is 64-bit signed).
MAX_CAPTURED_CHARS = 20 * 1024
INT64_MAX = 2 ** 63 - 1


def to_db_values(record, columns: tuple[Column, ...]) -> tuple:
    """The record's fields in column order, converted for SQLite."""
    return tuple(col.to_db(getattr(record, col.name)) for col in columns)


def from_db_values(cls, columns: tuple[Column, ...], values) -> object:
    """Rebuild a record of ``cls`` from a row whose values are in column order."""
    return cls(**{col.name: col.from_db(v) for col, v in zip(columns, values)})


# -- rows that cannot be stored as they are ------------------------------------------

#: JSON columns of ResultRow that must hold an object / a list (readers index into them).
_OBJECT_FIELDS = frozenset({"options", "resources", "metadata", "secondary", "scf"})
_LIST_FIELDS = frozenset({"tags", "parameters"})


#: NOT NULL columns a method's result feeds: None there is empty text or JSON, or an unstorable number.
_FED_BY_METHOD = frozenset({"seconds", "message", "captured_output", "resources", "metadata"})


def _storable(col: Column, value):
    """``value`` as bound to SQLite, or a ValueError saying why it cannot be stored in ``col``."""
    if value is None:
        if not (col.required and col.name in _FED_BY_METHOD):
            return None                    # NULL; in another NOT NULL column SQLite refuses it (a bug upstream)
        if col.kind in ("text", "json"):
            return _placeholder(col)
        raise ValueError("missing (None)")
    if col.name in _OBJECT_FIELDS and not isinstance(value, dict):
        raise ValueError(f"{type(value).__name__} {value!r:.60} is not an object (dict)")
    if col.name in _LIST_FIELDS and not isinstance(value, (list, tuple)):
        raise ValueError(f"{type(value).__name__} {value!r:.60} is not a list")
    if col.kind == "int" and not (isinstance(value, int) or hasattr(value, "__index__")):
        raise ValueError(f"{type(value).__name__} {value!r:.60} is not an integer")
    if col.kind == "real" and (isinstance(value, (str, bytes)) or not hasattr(value, "__float__")):
        raise ValueError(f"{type(value).__name__} {value!r:.60} is not a number")
    if col.kind == "bool" and not isinstance(value, (bool, int)) and type(value).__name__ not in ("bool_", "bool"):
        raise ValueError(f"{type(value).__name__} {value!r:.60} is not a boolean")
    try:
        stored = col.to_db(value)
    except Exception as exc:            # TypeError, OverflowError, RecursionError, a __str__ that raises ...
        raise ValueError(f"{type(exc).__name__}: {str(exc)[:200]}") from None
    if col.kind == "int" and abs(stored) > INT64_MAX:
        raise ValueError(f"{stored:.3e} is outside the 64-bit integer range")
    if stored is None and col.required:
        raise ValueError(f"{value!r:.60} is not a finite number")
    return stored


def _placeholder(col: Column):
    """What an unstorable value becomes: NULL, or for a NOT NULL column an empty value of its type."""
    if not col.required:
        return None
    if col.kind == "json":
        return "[]" if col.name in _LIST_FIELDS else "{}"
    return {"real": 0.0, "int": 0, "bool": 0}.get(col.kind, "")


def storable_values(row: ResultRow) -> tuple[tuple, list[str]]:
    """The row's values as bound to SQLite, and a note for every value that could not be stored.

    A value of the wrong type or out of range (``iterations=10**20``, a set
    or an object in ``resources``, text in a number column) becomes NULL (an
    empty value of the column's type where NULL is not allowed: 0.0, "",
    ``{}``, ``[]``) and is named in the notes; the caller stores such a row as
    ``invalid``.  ``captured_output`` is cut to its last
    :data:`MAX_CAPTURED_CHARS` characters.
    """
    values, notes = [], []
    for col in RESULT_COLUMNS:
        value = getattr(row, col.name)
        if col.name == "captured_output":
            value = bound_text(value, MAX_CAPTURED_CHARS, keep_end=True)
        try:
            values.append(_storable(col, value))
        except ValueError as exc:
            notes.append(f"{col.name}: {exc}")
            values.append(_placeholder(col))
    return tuple(values), notes


def bound_text(text, limit: int, keep_end: bool = False) -> str:
    """``text`` as a string of at most ``limit`` characters, the cut marked; None is "".

    Keeps the start, or with ``keep_end`` the end (for output, whose last lines matter most).
    """
    text = "" if text is None else text if isinstance(text, str) else repr(text)
    if len(text) <= limit:
        return text
    cut = len(text) - limit + 60
    if keep_end:
        return f"[... {cut:,} earlier characters not kept]\n" + text[cut:]
    return text[:limit - 60] + f"\n[... {cut:,} more characters not kept]"


# -- reference ladders --------------------------------------------------------------------

#: Columns of the ``reference_ladders`` table, in order.
REFERENCE_COLUMNS = ("run_id", "case", "basis", "primary_method", "primary_energy_ha", "uncertainty_ha", "space",
                     "ladder", "sha256", "stored_at")


@dataclass
class StoredReference:
    """A run's reference ladder for one (case, basis): the rows of that pair point to it.

    ``ladder`` is the ladder document (``references --format json``: rungs with energies in Eh,
    statuses, seconds and notes; SCF summary; orbital space; published values); ``primary_method``,
    ``primary_energy_ha`` and ``uncertainty_ha`` (u, Eh; 0 for FCI/CASCI, None without a usable
    primary) repeat its primary rung; ``sha256`` is :func:`reference_sha256` of the document.
    """

    run_id: str
    case: str
    basis: str
    primary_method: str | None
    primary_energy_ha: float | None
    uncertainty_ha: float | None
    space: str
    ladder: dict
    sha256: str
    stored_at: str


def reference_sha256(run_id: str, ladder: dict) -> str:
    """SHA-256 of ``run_id`` and the ladder document's canonical JSON (sorted keys, no spaces)."""
    return hashlib.sha256(dumps([run_id, ladder]).encode()).hexdigest()


def reference_record(run_id: str, ladder: dict) -> StoredReference:
    """The stored form of a ladder document (its primary rung read from the document)."""
    rungs = {r.get("method"): r for r in ladder.get("ladder") or []}
    primary = rungs.get(ladder.get("primary")) or {}
    usable = primary.get("status") == "ok" and primary.get("energy_ha") is not None
    return StoredReference(
        run_id=run_id, case=str(ladder["case"]), basis=str(ladder["basis"]),
        primary_method=primary.get("method") if usable else None,
        primary_energy_ha=primary.get("energy_ha") if usable else None,
        uncertainty_ha=(primary.get("uncertainty_ha") or 0.0) if usable else None,
        space=str((ladder.get("space") or {}).get("label", "")), ladder=json_safe(ladder),
        sha256=reference_sha256(run_id, ladder), stored_at=utc_now())
