"""Energies computed elsewhere, judged exactly as the gate judges its own methods.

A *results file* (CSV, JSON or Parquet) holds one energy per row.  Columns
(:data:`REQUIRED`, :data:`OPTIONAL`; any other column is kept as free provenance
of the row):

==================  ========  ===============================================================
column              required  meaning
==================  ========  ===============================================================
case                yes       registry case name (a scan point as ``h2-scan@1.4``)
basis               yes       a basis label of that case
space               yes       the orbital space as benchsuite labels it (``frozen core 1 (4e,
                              5o)``) or just its ``(Ne, Mo)`` part
encoding            yes       ``jordan-wigner/interleaved``, ``parity+sp-dropped/blocked``,
                              ``bravyi-kitaev+tapered/interleaved`` ... (name, ``+sp-dropped`` (old: ``+2qr``),
                              ``+tapered``, ``/ordering``; no ordering means interleaved)
energy_ha           yes       total energy in hartree (nuclear repulsion and core included)
method              yes       the method's label (the task's method in every output)
stderr_ha           no        standard error in hartree: the row is judged as stochastic
shots               no        measurement shots (a positive integer)
method_version      no        the method's version
device, code, date  no        hardware or program, when it ran (free text)
fingerprint         no        the token of ``benchsuite problem`` (or its full SHA-256)
converged           no        true/false (default true)
variational         no        true/false (default false): turns on the below-exact and
                              wrong-state checks, as for a variational built-in method
seconds             no        wall time
==================  ========  ===============================================================

CSV: leading lines starting with ``#`` are kept as the file's header comment.
JSON: a list of row objects, or ``{"provenance": {...}, "rows": [...]}``.

Checks, per row (:class:`RowError` names the row -- 1-based, header not counted --
the column and the cause; the row is not scored): unknown case, a basis the case
lacks, a space or fingerprint that differs from the registry's problem (naming the
differing components: geometry, basis, charge, multiplicity, space, orbitals,
encoding), empty required cells, NaN or infinite numbers, an energy outside the
plausible window ``[E_ref - 1 Eh, E_HF + 1 Eh]`` (:data:`PLAUSIBLE_WINDOW_HA`; E_ref
the FCI/CASCI energy, else E_HF) with a hint when it fits as mHa, kcal/mol, eV or a
correlation energy, and rows repeating a task (case, basis, space, encoding,
method: every copy is rejected).  A row without a fingerprint is matched by case,
basis and space and marked ``unverified problem`` in its message and
``metadata["problem_check"]``.  A file that cannot be read as a table, lacks a
required column or repeats a column name is an :class:`InputError` and nothing is
stored.

Judging: each accepted row becomes the fields a worker would return
(:func:`benchsuite.runner.validate_result`), then :func:`benchsuite.gate.judge.task_row`
(the parent's status decision and per-task verdict with the case's threshold,
:func:`benchsuite.gate.plan.threshold_for`), then
:func:`benchsuite.gate.judge.final_rows` (run-level control of stochastic fail
claims) and :func:`benchsuite.gate.decision.decide`.  Rejected rows are a reason
of the decision, so the gate fails while any row is rejected.
"""

from __future__ import annotations

import hashlib
import io
import json
import math
import re
from dataclasses import dataclass, field, replace
from pathlib import Path

from benchsuite.constants import HARTREE_EV, HARTREE_KCAL_MOL
from benchsuite.errors import InputError
from benchsuite.methods.problem import Encoding
from benchsuite.qubit.encodings import DROP_LABEL, LEGACY_DROP_LABEL

REQUIRED = ("case", "basis", "space", "encoding", "energy_ha", "method")
OPTIONAL = ("stderr_ha", "shots", "method_version", "device", "code", "date", "fingerprint", "converged",
            "variational", "seconds")
FILE_FORMATS = {".csv": "csv", ".json": "json", ".parquet": "parquet", ".pq": "parquet"}
#: An energy farther than this below the exact reference or above HF is taken for a unit error (hartree).
PLAUSIBLE_WINDOW_HA = 1.0
UNVERIFIED = "unverified problem"
UNVERIFIED_NOTE = f"{UNVERIFIED}: no fingerprint given; matched by case, basis and space only"
_SPACE_COUNTS = re.compile(r"\(\s*(\d+)\s*e\s*,\s*(\d+)\s*o\s*\)", re.I)
_TRUE, _FALSE = {"true", "1", "yes", "y", "t"}, {"false", "0", "no", "n", "f"}


@dataclass(frozen=True)
class ResultsFile:
    """A results file as read: ``records`` are the rows (column -> raw cell), in file order."""

    path: str
    sha256: str
    format: str
    columns: list[str]
    records: list[dict]
    header: list[str] = field(default_factory=list)
    provenance: dict = field(default_factory=dict)


@dataclass(frozen=True)
class RowError:
    """Why row ``row`` (1-based, header not counted) was not scored."""

    row: int
    column: str
    cause: str

    @property
    def text(self) -> str:
        return f"row {self.row}, column {self.column}: {self.cause}"


# -- reading ---------------------------------------------------------------------------

def read_results_file(path: str | Path, fmt: str | None = None) -> ResultsFile:
    """Read a results file (format from ``fmt`` or the suffix); a malformed file is an InputError."""
    path = Path(path)
    fmt = fmt or FILE_FORMATS.get(path.suffix.lower())
    if fmt not in FILE_FORMATS.values():
        raise InputError(f"cannot tell the format from {path.suffix!r}; give --format csv|json|parquet", path)
    try:
        blob = path.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror or exc}", path) from None
    reader = {"csv": _read_csv, "json": _read_json, "parquet": _read_parquet}[fmt]
    columns, records, header, provenance = reader(blob, path)
    _check_columns(columns, path)
    if not records:
        raise InputError("no data rows", path)
    return ResultsFile(str(path), hashlib.sha256(blob).hexdigest(), fmt, columns, records, header, provenance)


def _read_csv(blob: bytes, path: Path):
    import csv

    import pandas as pd

    try:
        text = blob.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"not UTF-8 text ({exc.reason} at byte {exc.start})", path) from None
    lines = text.splitlines(keepends=True)
    n_header = next((i for i, line in enumerate(lines) if not line.startswith("#")), len(lines))
    body = "".join(lines[n_header:])
    first = next(csv.reader(io.StringIO(body)), [])
    _check_unique([c.strip() for c in first], path)
    try:
        frame = pd.read_csv(io.StringIO(body), dtype=str, keep_default_na=False, skipinitialspace=True)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, ValueError) as exc:
        raise InputError(f"not a readable CSV table: {str(exc).strip()[:300]}", path) from None
    frame.columns = [str(c).strip() for c in frame.columns]
    return list(frame.columns), frame.to_dict("records"), [ln.rstrip("\n") for ln in lines[:n_header]], {}


def _read_json(blob: bytes, path: Path):
    try:
        doc = json.loads(blob)
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise InputError(f"not valid JSON: {exc}", path) from None
    provenance = {}
    if isinstance(doc, dict):
        unknown = set(doc) - {"rows", "provenance"}
        if "rows" not in doc or unknown:
            raise InputError("a JSON results file is a list of rows or an object with 'rows' (and 'provenance')",
                             path, sorted(unknown)[0] if unknown else "rows")
        provenance, doc = doc.get("provenance") or {}, doc["rows"]
        if not isinstance(provenance, dict):
            raise InputError("must be an object", path, "provenance")
    if not isinstance(doc, list) or not all(isinstance(r, dict) for r in doc):
        raise InputError("rows must be a list of objects (one per energy)", path, "rows")
    columns = list(dict.fromkeys(k.strip() for r in doc for k in r))
    return columns, [{k.strip(): v for k, v in r.items()} for r in doc], [], provenance


def _read_parquet(blob: bytes, path: Path):
    import pandas as pd

    try:
        frame = pd.read_parquet(io.BytesIO(blob))
    except Exception as exc:  # pyarrow raises several types for a damaged file
        raise InputError(f"not a readable Parquet file: {str(exc)[:300]}", path) from None
    _check_unique([str(c) for c in frame.columns], path)
    frame = frame.astype(object).where(frame.notna(), None)
    frame.columns = [str(c).strip() for c in frame.columns]
    return list(frame.columns), frame.to_dict("records"), [], {}


def _check_unique(columns: list[str], path: Path) -> None:
    seen = set()
    for c in columns:
        if c in seen:
            raise InputError(f"column {c!r} appears twice", path, c)
        seen.add(c)


def _check_columns(columns: list[str], path: Path) -> None:
    missing = [c for c in REQUIRED if c not in columns]
    if not missing:
        return
    hint = ""
    if "energy_ha" in missing:
        other = [c for c in columns if c.lower().startswith("energy")]
        hint = f" (found {other}: give the total energy in hartree as energy_ha)" if other else ""
    raise InputError(f"missing required column(s) {', '.join(missing)}{hint}; required: {', '.join(REQUIRED)}",
                     path, missing[0])


# -- cells -----------------------------------------------------------------------------

class CellError(ValueError):
    """A cell that cannot be used; the message is the cause."""


def _blank(value) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())


def cell_text(value, required: bool = False) -> str | None:
    if _blank(value):
        if required:
            raise CellError("empty")
        return None
    if isinstance(value, float) and not math.isfinite(value):
        raise CellError(f"{value!r} where text is expected")
    return str(value).strip()


def cell_number(value, required: bool = False) -> float | None:
    """A finite number; empty is None (or an error when required); NaN and inf are errors."""
    if _blank(value):
        if required:
            raise CellError("empty")
        return None
    if isinstance(value, bool):
        raise CellError(f"{value!r} is not a number")
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise CellError(f"{str(value)[:40]!r} is not a number") from None
    if not math.isfinite(number):
        raise CellError(f"{number!r}: not a finite number")
    return number


def cell_flag(value, default: bool) -> bool:
    if _blank(value):
        return default
    if isinstance(value, bool):
        return value
    text = str(value).strip().lower()
    if text in _TRUE or text in _FALSE:
        return text in _TRUE
    raise CellError(f"{str(value)[:40]!r} is not true or false")


def parse_encoding(text: str) -> Encoding:
    """``name[+sp-dropped][+tapered][/ordering]`` (as :attr:`Encoding.label` writes it; the label
    ``+2qr`` written before the spin-parity option's rename is read too) -> a checked Encoding."""
    head, _, ordering = text.strip().lower().partition("/")
    name, *extras = head.split("+")
    known = (DROP_LABEL, LEGACY_DROP_LABEL, "tapered")
    unknown = [e for e in extras if e not in known]
    if unknown:
        raise CellError(f"unknown reduction {unknown[0]!r} (known: {DROP_LABEL}, tapered)")
    try:
        return Encoding.from_label(f"{head}/{ordering or 'interleaved'}").check()
    except InputError as exc:
        raise CellError(exc.detail) from None


# -- rows against the registry -------------------------------------------------------

@dataclass(frozen=True)
class ExternalRow:
    """One row with its cells checked (energies in hartree)."""

    number: int
    case: object                  # registry Case
    basis: object                 # registry Basis
    encoding: Encoding
    method: str
    energy_ha: float
    stderr_ha: float | None
    converged: bool
    variational: bool
    seconds: float
    shots: int | None
    fingerprint: str | None
    provenance: dict


@dataclass
class Problem:
    """A registry problem as the gate builds it, with its fingerprint and figures."""

    prepared: object
    fingerprint: object
    figures: dict


class Problems:
    """The problems rows refer to, built once per (case, basis, encoding) through the cache."""

    def __init__(self, cache):
        self.cache = cache
        self._memo: dict = {}

    def ladders(self) -> list:
        """The reference ladder of every problem built so far."""
        return [p.prepared.ladder for p in self._memo.values()]

    def get(self, case, basis, enc: Encoding) -> Problem:
        key = (case.name, basis.label, enc.label)
        if key not in self._memo:
            from benchsuite.methods.export import problem_figures
            from benchsuite.methods.fingerprint import problem_fingerprint
            from benchsuite.methods.problem import build_problem

            prepared = build_problem(case, basis, enc, cache=self.cache)
            fp = problem_fingerprint(case, basis, enc, self.cache)
            self._memo[key] = Problem(prepared, fp, problem_figures(prepared))
        return self._memo[key]


def _cells(record: dict) -> dict:
    """The simple cells of a row, checked; raises CellError(column, cause) on the first bad one."""
    out = {}
    for column, parse in (("method", lambda v: cell_text(v, True)), ("energy_ha", lambda v: cell_number(v, True)),
                          ("stderr_ha", cell_number), ("seconds", cell_number), ("shots", cell_number),
                          ("converged", lambda v: cell_flag(v, True)), ("variational", lambda v: cell_flag(v, False)),
                          ("encoding", lambda v: parse_encoding(cell_text(v, True))),
                          ("fingerprint", cell_text)):
        try:
            out[column] = parse(record.get(column))
        except CellError as exc:
            raise CellError(column, str(exc)) from None
    if out["stderr_ha"] is not None and out["stderr_ha"] < 0:
        raise CellError("stderr_ha", f"{out['stderr_ha']!r}: negative")
    if out["shots"] is not None and (out["shots"] < 1 or out["shots"] != int(out["shots"])):
        raise CellError("shots", f"{out['shots']!r}: not a positive whole number")
    if out["seconds"] is not None and out["seconds"] < 0:
        raise CellError("seconds", f"{out['seconds']!r}: negative")
    return out


def _space_matches(given: str, space) -> bool:
    """The space cell names this space: its label (case and spaces ignored) or its ``(Ne, Mo)``."""
    squash = lambda s: re.sub(r"\s+", "", s.lower())  # noqa: E731
    if squash(given) == squash(space.label):
        return True
    m = _SPACE_COUNTS.fullmatch(given.strip())
    return bool(m) and (int(m.group(1)), int(m.group(2))) == (space.n_electrons, space.n_orbitals)


def plausibility(energy_ha: float, ladder) -> str | None:
    """None if the energy lies in ``[E_ref - 1 Eh, E_HF + 1 Eh]``; else the cause, with a unit hint."""
    hf = ladder.rung("hf")
    primary = ladder.primary
    e_hf = hf.energy_ha if hf is not None else None
    e_ref = primary.energy_ha if primary is not None and primary.status == "ok" else e_hf
    if e_hf is None or e_ref is None:
        return None
    low, high = e_ref - PLAUSIBLE_WINDOW_HA, e_hf + PLAUSIBLE_WINDOW_HA
    if low <= energy_ha <= high:
        return None
    fits = sorted((abs(value - e_ref), name, value) for name, value in (
        ("mHa", energy_ha / 1000.0), ("kcal/mol", energy_ha / HARTREE_KCAL_MOL), ("eV", energy_ha / HARTREE_EV),
        ("a correlation energy", energy_ha + e_hf)) if low <= value <= high)
    hint = (f"; it fits best as {fits[0][1]} ({fits[0][2]:.6f} Eh): give the total energy in hartree"
            if fits else "")
    return (f"{energy_ha!r} Eh is implausible: outside [{low:.6f}, {high:.6f}] Eh "
            f"(reference - {PLAUSIBLE_WINDOW_HA:g} Eh, HF + {PLAUSIBLE_WINDOW_HA:g} Eh){hint}")


def _provenance(record: dict) -> dict:
    """The row's provenance cells (every column not judged), as plain JSON values."""
    known = set(REQUIRED) | {"stderr_ha", "seconds", "converged", "variational", "fingerprint"}
    out = {}
    for key, value in record.items():
        if key in known or _blank(value):
            continue
        plain = isinstance(value, (str, int, bool)) or (isinstance(value, float) and math.isfinite(value))
        out[str(key)] = value if plain else str(value)
    return out


def check_row(number: int, record: dict, registry, problems: Problems) -> tuple[ExternalRow | None, RowError | None]:
    """One row against the registry: the checked row, or the first reason it cannot be scored."""
    try:
        cells = _cells(record)
        case_name = cell_text(record.get("case"), True)
    except CellError as exc:
        column, cause = exc.args if len(exc.args) == 2 else ("case", str(exc))
        return None, RowError(number, column, cause)
    case = registry.cases.get(case_name)
    if case is None:
        return None, RowError(number, "case", f"unknown case {case_name!r}")
    basis_label = cell_text(record.get("basis")) or ""
    basis = next((b for b in case.bases if b.label == basis_label.lower()), None)
    if basis is None:
        known = ", ".join(b.label for b in case.bases)
        return None, RowError(number, "basis", f"{basis_label!r} is not a basis of {case.name} (registry: {known})")
    try:
        problem = problems.get(case, basis, cells["encoding"])
    except InputError as exc:            # e.g. more qubits than supported, a reduction that does not apply
        return None, RowError(number, exc.field if exc.field in ("basis", "encoding") else "encoding", exc.detail)
    return _against_problem(number, record, case, basis, cells, problem)


def _against_problem(number, record, case, basis, cells, problem: Problem):
    from benchsuite.methods.fingerprint import differing_components

    space = problem.prepared.ladder.space
    given_space = cell_text(record.get("space")) or ""
    if not _space_matches(given_space, space):
        return None, RowError(number, "space", f"{given_space!r} differs from the registry's problem, "
                                               f"{space.label!r}")
    if cells["fingerprint"] is not None:
        try:
            differ = differing_components(cells["fingerprint"], problem.fingerprint)
        except ValueError as exc:
            return None, RowError(number, "fingerprint", str(exc))
        if differ:
            what = ", ".join(differ)
            return None, RowError(number, "fingerprint", f"differs from the registry's problem in: {what} "
                                                         f"(registry {problem.fingerprint.token})")
    cause = plausibility(cells["energy_ha"], problem.prepared.ladder)
    if cause:
        return None, RowError(number, "energy_ha", cause)
    shots = None if cells["shots"] is None else int(cells["shots"])
    return ExternalRow(number, case, basis, cells["encoding"], cells["method"], cells["energy_ha"],
                       cells["stderr_ha"], cells["converged"], cells["variational"], cells["seconds"] or 0.0,
                       shots, cells["fingerprint"], _provenance(record)), None


def identity(row: ExternalRow) -> tuple:
    """What makes two rows the same task (the baseline identity: case, basis, space, encoding, method)."""
    return (row.case.name, row.basis.label, row.encoding.label, row.method)


def check_rows(table: ResultsFile, registry, problems: Problems) -> tuple[list[ExternalRow], list[RowError]]:
    """Every row checked; duplicated tasks and methods whose rows disagree on ``variational`` rejected."""
    accepted, errors = [], []
    for number, record in enumerate(table.records, start=1):
        row, error = check_row(number, record, registry, problems)
        (accepted.append(row) if row is not None else errors.append(error))
    groups: dict[tuple, list[int]] = {}
    for row in accepted:
        groups.setdefault(identity(row), []).append(row.number)
    variational: dict[str, bool] = {}
    kept = []
    for row in accepted:
        others = [n for n in groups[identity(row)] if n != row.number]
        if others:
            errors.append(RowError(row.number, "case/basis/space/encoding/method",
                                   f"the same task as row(s) {', '.join(map(str, others))}: every copy rejected"))
        elif variational.setdefault(row.method, row.variational) != row.variational:
            errors.append(RowError(row.number, "variational", f"differs from earlier rows of method {row.method!r}"))
        else:
            kept.append(row)
    return kept, sorted(errors, key=lambda e: e.row)


# -- judging and storing ---------------------------------------------------------------

@dataclass(frozen=True)
class ExternalMethod:
    """What the gate needs to know about an external method (for its status decision)."""

    name: str
    variational: bool
    stochastic: bool


def row_fields(row: ExternalRow, problem: Problem) -> dict:
    """The fields a worker would return for this energy (checked by the runner's contract)."""
    from benchsuite.methods.base import MethodResult, Resources
    from benchsuite.runner import validate_result

    check = {"status": "verified", "fingerprint": row.fingerprint} if row.fingerprint else \
        {"status": "unverified", "note": UNVERIFIED_NOTE}
    metadata = {"problem_check": check, "external_row": row.number, "provenance": row.provenance}
    result = MethodResult(energy_ha=row.energy_ha, stderr_ha=row.stderr_ha, converged=row.converged,
                          resources=Resources(shots=row.shots), metadata=metadata)
    fields = validate_result(result, row.method)
    return {**fields, "seconds": row.seconds, "problem": problem.figures}


def unverified(result_row) -> bool:
    return (result_row.metadata.get("problem_check") or {}).get("status") == "unverified"


def _flagged(result_row):
    """An unverified row's message starts with the flag (shown by every output)."""
    if not unverified(result_row) or result_row.message.startswith(UNVERIFIED):
        return result_row
    rest = result_row.message.strip()
    return replace(result_row, message=UNVERIFIED_NOTE + (f"; {rest}" if rest else ""))


def judged_rows(run_id: str, rows: list[ExternalRow], problems: Problems, plan) -> list:
    """The rows as the gate stores them: per-task rows (:func:`task_row`), then final verdicts."""
    from benchsuite.gate.judge import final_rows, task_row
    from benchsuite.runner import Task
    from benchsuite.store.records import task_key

    out = []
    for row in rows:
        problem = problems.get(row.case, row.basis, row.encoding)
        task = Task(row.case, row.basis, row.encoding, row.method, {},
                    task_key(row.case.name, row.basis.label, row.encoding.label, row.method, {}))
        out.append(_flagged(task_row(run_id, task, row_fields(row, problem), problem.prepared.ladder, plan)))
    return [_flagged(r) for r in final_rows(out, plan.settings)]


def external_plan(rows: list[ExternalRow], settings, suite=None):
    """A :class:`~benchsuite.gate.plan.RunPlan` holding the file's methods (for thresholds and statuses)."""
    from benchsuite.gate.plan import RunPlan

    methods = {}
    for row in rows:
        m = methods.get(row.method)
        stochastic = row.stderr_ha is not None or (m is not None and m[0].stochastic)
        methods[row.method] = (ExternalMethod(row.method, row.variational, stochastic), None)
    encodings = list(dict.fromkeys(r.encoding for r in rows))
    return RunPlan(suite, None if suite is None else suite.name, sorted({r.case.name for r in rows}), [],
                   methods, {m: {} for m in methods}, encodings[0] if encodings else Encoding(), settings, [])


def method_provenance(rows: list[ExternalRow], table: ResultsFile) -> dict:
    """``{method: {"package", "version", "commit", "dirty", "source"}}`` from the file's cells
    (``code`` or ``device`` as the package; versions joined when rows disagree)."""
    by_method: dict[str, list] = {}
    for r in rows:
        by_method.setdefault(r.method, []).append(r.provenance)
    source = f"external results file {Path(table.path).name} (sha256 {table.sha256})"
    out = {}
    for method, mine in by_method.items():
        def joined(key):
            values = sorted({str(p[key]) for p in mine if key in p})
            return ", ".join(values) if values else None
        out[method] = {"package": joined("code") or joined("device"), "version": joined("method_version"),
                       "commit": None, "dirty": None, "source": source}
    return out


def external_record(run_id: str, plan, rows: list[ExternalRow], table: ResultsFile, errors: list[RowError]):
    """The run record of a scored file: provenance of the file, its methods and its rejected rows."""
    from benchsuite.store.provenance import git_state, machine_info, package_versions
    from benchsuite.store.records import RunRecord, utc_now

    s = plan.settings
    threshold_mha, threshold_source = s.run_threshold()
    external = {"file": table.path, "sha256": table.sha256, "format": table.format, "rows": len(table.records),
                "scored": len(rows), "rejected": [{"row": e.row, "column": e.column, "cause": e.cause} for e in errors],
                "unverified": sum(1 for r in rows if not r.fingerprint), "header": table.header,
                "provenance": table.provenance, "columns": table.columns}
    return RunRecord(
        run_id=run_id, started_at=utc_now(), command=f"benchsuite score {table.path} (sha256 {table.sha256})",
        suite=plan.suite_name, cases=plan.case_names, methods=list(plan.methods), options={m: {} for m in plan.methods},
        encoding=", ".join(dict.fromkeys(r.encoding.label for r in rows)),
        threshold_mha=threshold_mha, threshold_source=threshold_source,
        seed=0, packages=package_versions(), git=git_state(Path.cwd()), plugin_git=method_provenance(rows, table),
        machine=machine_info(), summary={"settings": s.to_dict(), "source": "external", "external": external})


@dataclass
class ExternalScore:
    """A scored file: the stored run, its final rows, the decision and the rejected rows."""

    run: object
    rows: list
    decision: object
    errors: list[RowError]
    table: ResultsFile

    @property
    def n_unverified(self) -> int:
        return sum(1 for r in self.rows if unverified(r))


def rejected_reason(errors: list[RowError], table: ResultsFile) -> str:
    shown = "; ".join(e.text for e in errors[:3]) + ("; ..." if len(errors) > 3 else "")
    return f"{len(errors)} of {len(table.records)} row(s) of {Path(table.path).name} rejected ({shown})"


def checked_table(table: ResultsFile, registry, problems: Problems) -> tuple[list[ExternalRow], list[RowError]]:
    """:func:`check_rows`, refusing a file of which no row can be scored (:class:`InputError`)."""
    rows, errors = check_rows(table, registry, problems)
    if not rows:
        raise InputError("no row could be scored: " + "; ".join(e.text for e in errors[:10]), table.path)
    return rows, errors


def score_table(store, table: ResultsFile, checked: tuple, settings, problems: Problems, suite=None,
                baseline_id: str | None = None, max_increase_mha: float | None = None,
                allow_new: bool = False) -> ExternalScore:
    """Judge and store a read results file's :func:`checked_table` rows as one run; decide once."""
    from benchsuite.gate.execute import Execution, conclude
    from benchsuite.store.provenance import new_run_id

    rows, errors = checked
    plan = external_plan(rows, settings, suite)
    run_id = new_run_id()
    final = judged_rows(run_id, rows, problems, plan)
    run = external_record(run_id, plan, rows, table, errors)
    store.begin_run(run)
    for ladder in {(lad.case, lad.basis): lad for lad in problems.ladders()}.values():
        store.add_reference(run_id, ladder.to_json())
    store.add_results(final)
    ex = Execution(baseline_id=baseline_id, max_increase_mha=max_increase_mha, allow_new=allow_new)
    decision = conclude(store, run, final, settings, ex, (rejected_reason(errors, table),) if errors else ())
    return ExternalScore(store.get_run(run_id), final, decision, errors, table)


def write_problem_export(export, path: Path) -> list[Path]:
    """Write a problem export (and its fingerprint sidecar) atomically; returns the paths written."""
    from benchsuite.gate.execute import write_atomic
    from benchsuite.methods.export import sidecar_path

    write_atomic(Path(path), export.text.encode())
    written = [Path(path)]
    if export.sidecar is not None:
        side = sidecar_path(path)
        write_atomic(side, (json.dumps(export.sidecar, indent=1, allow_nan=False) + "\n").encode())
        written.append(side)
    return written


def curve_statistics_of(rows) -> list[tuple]:
    """``(scan, basis, encoding, method, CurveStatistics)`` of every scan the rows cover (errors in mHa)."""
    from benchsuite.scoring import curve_statistics

    groups: dict[tuple, list] = {}
    for r in sorted((r for r in rows if r.scan_parent), key=lambda r: r.scan_length or 0.0):
        groups.setdefault((r.scan_parent, r.basis, r.encoding, r.method), []).append(r.error_mha)
    out = []
    for key, errors in groups.items():
        stats = curve_statistics(key[0], errors)
        if stats is not None:
            out.append((*key, stats))
    return out


def curve_table(rows) -> list[str]:
    """One line per scan and method: points, max |error| and non-parallelity (mHa)."""
    return [f"  scan {scan} ({basis}, {enc}) {method}: {s.n_points} point(s), max |error| "
            f"{s.max_abs_error_mha:.4f} mHa, non-parallelity {s.non_parallelity_mha:.4f} mHa"
            for scan, basis, enc, method, s in curve_statistics_of(rows)]
