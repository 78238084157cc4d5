"""benchsuite's public Python API: one module, stable names, for notebooks and a solver's own tests.

Units: energies in hartree (``*_ha``), errors and thresholds in millihartree
(``*_mha``), times in seconds.  Sign: ``error = E_method - E_reference``.

>>> from benchsuite import api
>>> problem = api.build_problem("h2")                 # case, basis, encoding, ordering, reductions
>>> refs = api.references(problem)                    # ladder, primary reference (FCI/CASCI)
>>> exact = problem.problem.views.exact_energy_ha()   # what a perfect solver returns
>>> api.judge(problem, exact).verdict                 # the gate's own Judgement
'pass'

Selection: :func:`load_registry`, :func:`load_case`, :func:`load_suite`,
:func:`select`.  The problem a method sees: :func:`build_problem` (a
:class:`~benchsuite.methods.problem.PreparedProblem`; ``.problem`` is the
:class:`~benchsuite.methods.base.QubitProblem` handed to ``Method.run``, with
``.views`` for other formats).  References: :func:`references`.  Verdicts:
:func:`judge` (the :class:`~benchsuite.scoring.Judgement` the gate stores) and
:func:`assess` (the same with the result fields, reference and threshold
source).  Runs: :func:`run_methods` (a gate run, stored, as a pandas
DataFrame), :func:`open_store`, :func:`list_runs`, :func:`load_run`,
:func:`compare`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from benchsuite.errors import InputError
from benchsuite.gate.judge import judge_fields
from benchsuite.gate.plan import RunSettings, threshold_for
from benchsuite.methods.base import MethodResult
from benchsuite.methods.problem import Encoding, PreparedProblem
from benchsuite.registry import Registry
from benchsuite.registry.case import Case
from benchsuite.registry.registry import SuiteEntry
from benchsuite.scoring import DEFAULT_THRESHOLD_MHA, Judgement

__all__ = ["Assessment", "Encoding", "ExportedProblem", "Judgement", "PreparedProblem", "References", "StoredRun",
           "assess", "build_problem", "case_records", "compare", "export_problem", "export_run", "judge",
           "list_runs", "load_case", "load_registry", "load_run", "load_suite", "method_records", "open_store",
           "reference_ladders", "references", "run_methods", "score_external", "select", "solve",
           "DEFAULT_THRESHOLD_MHA"]

_REGISTRY: Registry | None = None


# -- cases and suites -----------------------------------------------------------------

def load_registry(case_dirs: list[str | Path] = (), case_files: list[str | Path] = ()) -> Registry:
    """The built-in registry plus extra case directories and files (validated; InputError on bad input).

    With no arguments the built-in registry is loaded once and reused.
    """
    global _REGISTRY
    if not case_dirs and not case_files:
        if _REGISTRY is None:
            _REGISTRY = Registry.load()
        return _REGISTRY
    return Registry.load(case_dirs=[Path(p) for p in case_dirs], case_files=[Path(p) for p in case_files])


def load_case(name: str, registry: Registry | None = None) -> Case:
    """One case by name (geometry in bohr inside, charge, multiplicity, bases, orbital space)."""
    return (registry or load_registry()).case(name)


def load_suite(name: str, basis: str | None = None, registry: Registry | None = None) -> list[SuiteEntry]:
    """A suite's (case, basis) entries in its file's order; ``basis`` overrides the suite's basis."""
    return (registry or load_registry()).suite_entries(name, basis)


def select(suite: str | None = None, cases: list[str] | None = None, basis: str | None = None,
           registry: Registry | None = None) -> list[SuiteEntry]:
    """(case, basis) entries of a suite, or of case names / scan names / shell patterns."""
    reg = registry or load_registry()
    if suite and cases:
        raise InputError("give a suite or case names, not both", field="cases")
    if suite:
        return reg.suite_entries(suite, basis)
    if not cases:
        raise InputError("give a suite or at least one case name", field="cases")
    return reg.named_entries(list(cases), basis)


def case_record(case, basis_label: str) -> dict:
    """One case as plain data (``benchsuite cases --format json``): names, charge, multiplicity,
    basis, orbital space, tags, geometry source, scan parent and file."""
    space = ("CAS({}e, {}o)".format(case.active_space.electrons, case.active_space.orbitals)
             if case.active_space else "frozen core" if case.frozen_core else "all-electron")
    return {"name": case.name, "title": case.title, "formula": case.formula,
            "charge": case.charge, "multiplicity": case.multiplicity, "n_electrons": case.n_electrons,
            "basis": basis_label, "bases": [b.label for b in case.bases], "space": space,
            "tags": list(case.tags), "geometry_source": case.geometry_source,
            "scan": case.scan_parent, "file": str(case.path)}


def case_records(registry: Registry | None = None, suite: str | None = None) -> list[dict]:
    """:func:`case_record` of every case (by name) or of a suite's entries (in its order)."""
    reg = registry or load_registry()
    if suite:
        return [case_record(e.case, e.basis.label) for e in reg.suite_entries(suite)]
    return [case_record(c, c.default_basis.label) for _, c in sorted(reg.cases.items())]


def method_records() -> tuple[list[dict], list[dict]]:
    """Every usable method (name, description, variational, stochastic, options) and every plugin
    that failed to load (name, origin, reason)."""
    from benchsuite.methods.discovery import all_methods

    methods, failures = all_methods()
    records = [{"name": m.name, "description": getattr(m, "description", ""),
                "variational": bool(getattr(m, "variational", False)),
                "stochastic": bool(getattr(m, "stochastic", False)),
                "options": [o.describe() for o in m.options]} for m in methods]
    return records, [dict(f.__dict__) for f in failures]


# -- the problem and its references ---------------------------------------------------

def build_problem(case: str | Case, basis: str | None = None, encoding: str = "jordan-wigner",
                  ordering: str = "interleaved", taper: bool = False, drop_spin_parity_qubits: bool = False,
                  cache_dir: str | Path | None = None, seed: int = 0,
                  registry: Registry | None = None) -> PreparedProblem:
    """The problem a method under test sees, exactly as the gate builds it.

    ``case`` is a name or a :class:`Case`; ``basis`` a label of the case (default its first).
    ``encoding`` is jordan-wigner, bravyi-kitaev or parity; ``ordering`` interleaved
    (mode 2p = orbital p alpha) or blocked; ``taper`` Z2-tapers in the Hartree-Fock sector;
    ``drop_spin_parity_qubits`` (parity + blocked only).  The reference ladder is computed (or read
    from the cache at ``cache_dir``, default ``$BENCHSUITE_CACHE`` or ``.benchsuite/cache``).
    """
    from benchsuite.chem.cache import DiskCache, default_cache_dir
    from benchsuite.methods.problem import build_problem as _build

    if isinstance(case, str):
        case = load_case(case, registry)
    enc = Encoding(encoding, ordering, taper, drop_spin_parity_qubits).check()
    cache = DiskCache(str(cache_dir) if cache_dir is not None else default_cache_dir())
    return _build(case, case.basis(basis), enc, cache=cache, seed=seed)


def reference_ladders(cases: list[str] = (), suite: str | None = None, basis: str | None = None,
                      scf: str | None = None, max_determinants: int | None = None,
                      cache_dir: str | Path | None = None, registry: Registry | None = None,
                      no_cache: bool = False):
    """The reference ladders of case names (or a suite), yielded one by one as each is computed.

    Every (case, basis) is checked (orbital space, SCF kind) before the first SCF; ``scf`` is rhf,
    rohf or uhf (None: RHF for closed shells, ROHF for open ones); FCI/CASCI is skipped above
    ``max_determinants`` (default 5,000,000); ``no_cache`` neither reads nor writes the cache.
    """
    from benchsuite.chem.cache import DiskCache, default_cache_dir
    from benchsuite.chem.ladder import DEFAULT_MAX_DETERMINANTS
    from benchsuite.chem.space import prepare

    reg = registry or load_registry()
    if suite and cases:
        raise InputError("give case names or --suite, not both", field="CASE")
    if not suite and not cases:
        raise InputError("name a case (see `benchsuite cases`) or give --suite", field="CASE")
    entries = reg.suite_entries(suite, basis) if suite else reg.named_entries(list(cases), basis)
    max_det = max_determinants or DEFAULT_MAX_DETERMINANTS
    if max_det < 1:
        raise InputError("must be positive", field="--max-determinants")
    for e in entries:                   # validate everything before computing anything
        prepare(e.case, e.basis, scf)
    return _ladders(entries, DiskCache(None if no_cache else str(cache_dir or default_cache_dir())), scf,
                    max_det)


def _ladders(entries, cache, scf, max_det):
    from benchsuite.chem.ladder import reference_ladder

    for e in entries:
        yield reference_ladder(e.case, e.basis, cache=cache, scf_kind=scf, max_determinants=max_det)


@dataclass(frozen=True)
class References:
    """A problem's references (hartree).

    ``primary_method`` is ``fci`` or ``casci`` in the method's orbital space and
    ``primary_energy_ha`` its energy (None if it was skipped: ``primary_status`` says why).
    ``uncertainty_ha`` is None for these deterministic rungs (exact within the model);
    ``ladder`` is the whole :class:`~benchsuite.chem.ladder.Ladder` (HF, MP2, CCSD, CCSD(T), ...),
    ``published`` the case file's published values with their sources.
    """

    case: str
    basis: str
    space: str
    primary_method: str | None
    primary_energy_ha: float | None
    primary_status: str
    uncertainty_ha: float | None
    rungs: dict[str, float | None]
    published: list
    ladder: Any = field(repr=False)


def references(problem: PreparedProblem) -> References:
    """The references of a built problem (see :func:`build_problem`)."""
    lad = problem.ladder
    primary = lad.primary
    ok = primary is not None and primary.status == "ok"
    return References(case=lad.case, basis=lad.basis, space=lad.space.label,
                      primary_method=None if primary is None else primary.method,
                      primary_energy_ha=primary.energy_ha if ok else None,
                      primary_status="missing" if primary is None else primary.status,
                      uncertainty_ha=getattr(primary, "uncertainty_ha", None) if ok else None,
                      rungs={r.method: r.energy_ha for r in lad.rungs}, published=list(lad.published), ladder=lad)


# -- one method on one case ------------------------------------------------------------

def solve(case: str | Case, method: str, basis: str | None = None, encoding: Encoding = Encoding(),
          options: dict[str, str] | None = None, seed: int = 0, timeout_s: float | None = None,
          cache_dir: str | Path | None = None, no_cache: bool = False, registry: Registry | None = None,
          shots: int | None = None, shot_allocation: str = "uniform"):
    """Run one method (a spec as on the command line) on one case in an isolated worker, beside its
    FCI/CASCI reference; returns ``(PreparedProblem, runner.Outcome)``.

    Options and ``timeout_s`` (seconds, > 0) are checked before any work; the outcome's status is
    the gate's (``ok``, ``below-exact``, ``wrong-state``, ``error``, ``timeout``, ``invalid``).
    ``shots`` passes the method's state through the measurement stage
    (:mod:`benchsuite.qubit.measurement`; ``shot_allocation`` uniform or proportional).
    """
    from benchsuite.chem.cache import DiskCache, default_cache_dir
    from benchsuite.methods.base import resolve_options
    from benchsuite.methods.discovery import resolve_method
    from benchsuite.methods.problem import build_problem as _build
    from benchsuite.runner import Outcome, execute

    case = load_case(case, registry) if isinstance(case, str) else case
    method_obj, failure = resolve_method(method)
    if method_obj is not None:
        resolve_options(method_obj, dict(options or {}))      # reject bad options before any work
    if timeout_s is not None and timeout_s <= 0:
        raise InputError("must be positive", field="--timeout-s")
    shot_plan = RunSettings(shots=shots, shot_allocation=shot_allocation).shot_plan()
    cache = DiskCache(None if no_cache else str(cache_dir or default_cache_dir()))
    prepared = _build(case, basis, encoding.check(), cache=cache, seed=seed, time_budget_s=timeout_s)
    if method_obj is None:
        return prepared, Outcome(method=method, status="error", message=f"plugin unusable: {failure.reason}")
    ref = prepared.reference
    return prepared, execute(method_obj, prepared.problem, options or {}, timeout_s=timeout_s,
                             exact_ha=None if ref is None else ref.energy_ha,
                             sector_ha=None if ref is None else ref.sector_lowest_ha, shots=shot_plan)


# -- verdicts ------------------------------------------------------------------------

@dataclass(frozen=True)
class Assessment:
    """One energy judged as the gate judges a task.

    ``fields`` are the result fields the gate would store (``status``: ok, below-exact, invalid,
    ...), ``judgement`` the gate's :class:`~benchsuite.scoring.Judgement` (verdict, error in mHa,
    threshold in mHa, message), ``threshold_source`` where the threshold came from.
    """

    case: str
    basis: str
    energy_ha: float | None
    reference_method: str | None
    reference_energy_ha: float | None
    threshold_mha: float
    threshold_source: str
    fields: dict
    judgement: Judgement

    @property
    def verdict(self) -> str:
        return self.judgement.verdict

    @property
    def error_mha(self) -> float | None:
        return self.judgement.error_mha

    @property
    def message(self) -> str:
        return self.judgement.message or self.fields.get("message", "")


def result_fields(problem: PreparedProblem, result: MethodResult, method_name: str = "api",
                  variational: bool = True) -> dict:
    """The gate's checked fields of a :class:`MethodResult`: the contract checks and the state check
    a worker makes, then the status the parent decides (``ok``, ``below-exact`` against the lowest
    (N, S_z) state, ``wrong-state`` against the declared-spin reference), exactly as in a run."""
    from benchsuite.runner import judged_fields, validate_result

    ref = problem.reference
    fields = validate_result(result, method_name, problem.problem)
    return judged_fields(fields, None if ref is None else ref.energy_ha,
                         None if ref is None else getattr(ref, "sector_lowest_ha", None), variational)


def assess(problem: PreparedProblem, energy: float | MethodResult, *, stderr_ha: float | None = None,
           state: Any = None, converged: bool | None = None, variational: bool = True,
           threshold_mha: float | None = None, confidence: float = 0.95, require_converged: bool = False,
           suite: str | None = None, method_name: str = "api", registry: Registry | None = None) -> Assessment:
    """Judge an energy (Eh; ``stderr_ha`` in Eh, ``threshold_mha`` in mHa) or a :class:`MethodResult`
    exactly as the gate does (see :func:`judge`);
    ``registry`` is where the case's own threshold is looked up (default the built-in one)."""
    result = energy if isinstance(energy, MethodResult) else MethodResult(
        energy_ha=energy, stderr_ha=stderr_ha, converged=True if converged is None else converged, state=state)
    fields = result_fields(problem, result, method_name, variational)
    reg = registry or load_registry()
    case = reg.cases.get(problem.problem.case)
    suite_obj = reg.suites.get(suite) if suite else None
    if case is not None:
        threshold, source = threshold_for(case, suite_obj, threshold_mha)
    else:
        threshold, source = threshold_for_unknown(threshold_mha)
    ref = problem.reference
    settings = RunSettings(threshold_mha=threshold_mha, confidence=confidence, require_converged=require_converged)
    judgement = judge_fields(fields, None if ref is None else ref.energy_ha, threshold, settings)
    return Assessment(problem.problem.case, problem.problem.basis, fields.get("energy_ha"),
                      None if ref is None else ref.method, None if ref is None else ref.energy_ha,
                      threshold, source, fields, judgement)


def threshold_for_unknown(threshold_mha: float | None) -> tuple[float, str]:
    """Threshold of a case outside the built-in registry: the given one, else 1 kcal/mol."""
    from benchsuite.scoring import THRESHOLD_SOURCE

    return (threshold_mha, "threshold_mha argument") if threshold_mha is not None \
        else (DEFAULT_THRESHOLD_MHA, THRESHOLD_SOURCE)


def judge(problem: PreparedProblem, energy: float | MethodResult, *, stderr_ha: float | None = None,
          state: Any = None, converged: bool | None = None, variational: bool = True,
          threshold_mha: float | None = None, confidence: float = 0.95, require_converged: bool = False,
          suite: str | None = None) -> Judgement:
    """The gate's verdict on an energy for this problem.

    ``energy`` is the total energy in Eh (constant included) or a whole :class:`MethodResult`.
    ``stderr_ha`` (Eh) makes it a stochastic judgement at ``confidence`` (a family of one:
    the run-level Holm / Benjamini-Hochberg control needs the whole run, see :func:`run_methods`).
    ``state`` (a :class:`~benchsuite.methods.base.SectorState`) and ``converged`` are passed as a
    method would return them; ``variational`` turns on the below-exact check.  Threshold (mHa):
    ``threshold_mha``, then the case's, then the ``suite``'s, then 1 kcal/mol = 1.5936 mHa.
    Returns the :class:`~benchsuite.scoring.Judgement` (``verdict``, ``error_mha``,
    ``threshold_mha``, ``message``).
    """
    return assess(problem, energy, stderr_ha=stderr_ha, state=state, converged=converged,
                  variational=variational, threshold_mha=threshold_mha, confidence=confidence,
                  require_converged=require_converged, suite=suite).judgement


# -- runs ----------------------------------------------------------------------------

def run_methods(methods: list[str], *, suite: str | None = None, cases: list[str] | None = None,
                basis: str | None = None, options: dict[str, dict[str, Any]] | None = None,
                encoding: Encoding = Encoding(), threshold_mha: float | None = None, workers: int = 1,
                timeout_s: float | None = None, db: str | Path | None = None,
                cache_dir: str | Path | None = None, baseline: str | None = None, seed: int = 0,
                shots: int | None = None, shot_allocation: str = "uniform"):
    """Run the gate (every method on every selected case) and return its results as a DataFrame.

    ``methods`` are specs as on the command line (built-in name, entry-point name or
    ``module:attr``); ``options`` maps a method spec to its option values; ``threshold_mha`` (mHa)
    overrides every case's threshold; ``timeout_s`` is each task's time budget in seconds; ``workers``
    worker processes run the grid.  The run is stored in
    the results database ``db`` (default ``$BENCHSUITE_DB`` or ``.benchsuite/results.sqlite``);
    ``baseline`` (a run id, prefix or ``latest``) adds a regression check; ``shots`` measures every
    method's state with that many shots (``shot_allocation`` uniform or proportional).  The frame has one row
    per task (columns as ``benchsuite export``: ``energy_ha``, ``error_mha``, ``verdict``, ...);
    ``frame.attrs`` holds ``run_id``, ``passed`` and the decision's ``reasons``.
    """
    from dataclasses import asdict

    from benchsuite.gate.request import RunRequest, start_run
    from benchsuite.store.export import results_dataframe

    items = [f"{m}.{k}={v}" for m, opts in (options or {}).items() for k, v in opts.items()]
    settings = RunSettings(basis=basis, threshold_mha=threshold_mha, timeout_s=timeout_s,
                           encoding=asdict(encoding), shots=shots, shot_allocation=shot_allocation)
    req = RunRequest(suite=suite, cases=None if suite else list(cases or []), methods=list(methods),
                     option_items=items, settings=settings, seed=seed, workers=workers,
                     db=None if db is None else Path(db), cache_dir=None if cache_dir is None else Path(cache_dir),
                     baseline=baseline, command="benchsuite.api.run_methods", registry=load_registry())
    decision, run, _ = start_run(req)
    with open_store(db) as store:
        frame = results_dataframe(store, run.run_id)
    frame.attrs.update(run_id=run.run_id, passed=decision.passed, reasons=list(decision.reasons))
    return frame


def open_store(db: str | Path | None = None, create: bool = False):
    """The results database (:class:`~benchsuite.store.db.ResultStore`, a context manager);
    ``db`` default ``$BENCHSUITE_DB`` or ``.benchsuite/results.sqlite``.  Without ``create`` a
    missing file is an InputError."""
    from benchsuite.store.db import ResultStore

    return ResultStore.open(db, create=create)


def list_runs(db: str | Path | None = None, limit: int | None = None) -> list:
    """Stored runs newest first, as :class:`~benchsuite.store.runs.RunSummary` (id, dates, suite,
    methods, verdict counts, commit, source)."""
    from benchsuite.store.runs import run_summaries

    with open_store(db) as store:
        return run_summaries(store, limit)


def export_run(run_id: str, fmt: str = "csv", out: str | Path | None = None, db: str | Path | None = None):
    """Write a stored run's rows as ``csv``, ``parquet`` or ``json`` to ``out`` (default standard
    output; parquet needs a file); returns the path written or None."""
    from benchsuite.store.export import export_run as write

    with open_store(db) as store:
        return write(store, store.resolve_run_id(run_id), fmt, out)


@dataclass(frozen=True)
class StoredRun:
    """A stored run: its record, its final rows and its stored gate decision (None if unfinished)."""

    record: Any
    rows: list
    decision: Any

    def dataframe(self):
        """The rows as a DataFrame (columns as ``benchsuite export``)."""
        from benchsuite.store.export import rows_dataframe

        return rows_dataframe(self.rows)


def load_run(run_id: str = "latest", db: str | Path | None = None) -> StoredRun:
    """A stored run by id, unique id prefix or ``latest`` (the latest complete run)."""
    from benchsuite.gate.decision import GateDecision

    with open_store(db) as store:
        rid = store.resolve_run_id(run_id)
        record, rows = store.get_run(rid), store.results(rid)
    gate = (record.summary or {}).get("gate")
    return StoredRun(record, rows, None if gate is None else GateDecision.from_dict(gate))


def compare(base: str, new: str = "latest", db: str | Path | None = None, max_increase_mha: float | None = None,
            allow_new: bool = False):
    """Regressions from run ``base`` to run ``new`` (ids, prefixes or ``latest``), as
    :class:`~benchsuite.store.baseline.Comparison`; ``max_increase_mha`` is the |error| growth that
    counts as a regression (default 0.1 mHa)."""
    from benchsuite.store.baseline import DEFAULT_MAX_INCREASE_MHA, compare_runs

    limit = DEFAULT_MAX_INCREASE_MHA if max_increase_mha is None else max_increase_mha
    if limit < 0:
        raise InputError("must not be negative", field="max_increase_mha")
    with open_store(db) as store:
        b, n = store.resolve_run_id(base), store.resolve_run_id(new)
        return compare_runs(store.get_run(b), store.results(b), store.get_run(n), store.results(n), limit,
                            allow_new)


# -- energies computed elsewhere -------------------------------------------------------

@dataclass(frozen=True)
class ExportedProblem:
    """A written problem export: the :class:`~benchsuite.methods.export.ProblemExport` (text, format,
    fingerprint, sidecar) and the paths written (the file, then its fingerprint sidecar if any)."""

    export: Any
    paths: list


def export_problem(case: str | Case, basis: str | None = None, *, encoding: str = "jordan-wigner",
                   ordering: str = "interleaved", taper: bool = False, drop_spin_parity_qubits: bool = False,
                   fmt: str = "pauli-json", path: str | Path | None = None, cache_dir: str | Path | None = None,
                   registry: Registry | None = None) -> ExportedProblem:
    """The exact problem a method sees as ``fcidump``, ``pauli-json`` or ``openfermion`` text, with its
    fingerprint (:mod:`benchsuite.methods.fingerprint`); written to ``path`` when given (atomically;
    ``FILE.fingerprint.json`` beside the non-JSON formats; an ``openfermion`` file must end in ``.data``)."""
    from benchsuite.chem.cache import DiskCache, default_cache_dir
    from benchsuite.gate.external import write_problem_export
    from benchsuite.gate.plan import check_output_path
    from benchsuite.methods.export import FORMATS
    from benchsuite.methods.export import export_problem as _export
    from benchsuite.methods.fingerprint import problem_fingerprint

    if fmt not in FORMATS:
        raise InputError(f"unknown format {fmt!r}; one of {list(FORMATS)}", field="--format")
    if path is not None:
        check_output_path(path, "--out")
        if fmt == "openfermion" and not str(path).endswith(".data"):
            raise InputError("an openfermion file must end in .data (OpenFermion's load_operator appends it)",
                             path, "--out")
    case_obj = load_case(case, registry) if isinstance(case, str) else case
    prepared = build_problem(case_obj, basis, encoding, ordering, taper, drop_spin_parity_qubits, cache_dir,
                             registry=registry)
    cache = DiskCache(str(cache_dir) if cache_dir is not None else default_cache_dir())
    fp = problem_fingerprint(case_obj, case_obj.basis(basis), prepared.encoding, cache)
    export = _export(prepared, fp, fmt)
    return ExportedProblem(export, [] if path is None else write_problem_export(export, Path(path)))


def score_external(path: str | Path, *, fmt: str | None = None, db: str | Path | None = None,
                   settings: RunSettings | None = None, suite: str | None = None, baseline: str | None = None,
                   max_increase_mha: float | None = None, allow_new: bool = False, report: str | Path | None = None,
                   json_path: str | Path | None = None, junit: str | Path | None = None,
                   case_dirs: list = (), case_files: list = (), cache_dir: str | Path | None = None):
    """Judge a results file (CSV, JSON, Parquet; schema in :mod:`benchsuite.gate.external`) as the gate
    judges its own methods and store it as one run in ``db``; returns the
    :class:`~benchsuite.gate.external.ExternalScore` (``run``, ``rows``, ``decision``, ``errors``).

    ``settings`` (:class:`RunSettings`): threshold override (mHa), confidence, multiple testing;
    ``baseline`` a run to compare with, ``max_increase_mha`` the |error| growth (mHa) that counts as a
    regression; ``report``/``json_path``/``junit`` outputs written from the stored decision.
    A malformed file or option is an InputError and nothing is stored."""
    from benchsuite.chem.cache import DiskCache, default_cache_dir
    from benchsuite.gate.execute import Outputs, write_outputs
    from benchsuite.gate.external import Problems, checked_table, read_results_file, score_table
    from benchsuite.gate.plan import check_output_path, check_settings

    settings = settings or RunSettings()
    check_settings(settings, 0, None)
    outputs = Outputs(json=check_output_path(json_path, "--json"), junit=check_output_path(junit, "--junit"),
                      report=check_output_path(report, "--report"))
    registry = load_registry(case_dirs, case_files)
    suite_obj = registry.suites.get(suite) if suite else None
    if suite and suite_obj is None:
        raise InputError(f"unknown suite {suite!r}; known: {sorted(registry.suites)}", field="--suite")
    table = read_results_file(path, fmt)
    problems = Problems(DiskCache(str(cache_dir) if cache_dir is not None else default_cache_dir()))
    checked = checked_table(table, registry, problems)          # before the database is touched
    with open_store(db, create=baseline is None) as store:
        base = store.resolve_run_id(baseline) if baseline else None
        score = score_table(store, table, checked, settings, problems, suite_obj, base, max_increase_mha, allow_new)
        write_outputs(store, score.run, score.rows, score.decision, outputs, registry)
    return score
