"""Command line: ``benchsuite <command> ...``.

Exit codes: 0 success; 1 the job ran and found a failure; 2 usage or input
error (the message names the file and field; nothing is computed or cached).

Each command is a pair ``_add_<name>(subparsers)`` / ``_run_<name>(args) -> int``
registered in :data:`COMMANDS`.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from benchsuite.errors import InputError
from benchsuite.report.terminal import fixed_table as format_table


# -- shared options ----------------------------------------------------------------

def _add_case_sources(p: argparse.ArgumentParser) -> None:
    p.add_argument("--cases", action="append", type=Path, default=[], metavar="DIR",
                   help="directory of extra case files, merged with the built-in registry (repeatable)")
    p.add_argument("--case-file", action="append", type=Path, default=[], metavar="FILE",
                   help="one extra case file (repeatable)")


def _add_cache(p: argparse.ArgumentParser) -> None:
    p.add_argument("--cache-dir", type=Path, default=None,
                   help="cache directory (default $BENCHSUITE_CACHE or .benchsuite/cache)")
    p.add_argument("--no-cache", action="store_true", help="neither read nor write the cache")


def load_registry(args):
    from benchsuite.registry import Registry

    return Registry.load(case_dirs=args.cases, case_files=args.case_file)


def open_cache(args):
    from benchsuite.chem.cache import DiskCache, default_cache_dir

    return DiskCache(None if args.no_cache else (args.cache_dir or default_cache_dir()))


def _print_json(obj) -> None:
    json.dump(obj, sys.stdout, indent=2, allow_nan=False, default=str)
    sys.stdout.write("\n")


# -- cases -----------------------------------------------------------------------

def _add_cases(sub) -> None:
    p = sub.add_parser("cases", help="list the registry's cases (or one suite's)")
    p.add_argument("--suite", help="only this suite's cases")
    _add_case_sources(p)
    p.add_argument("--format", choices=("table", "json"), default="table")


def _case_record(case, basis_label: str) -> dict:
    space = ("CAS({}e, {}o)".format(case.active_space.electrons, case.active_space.orbitals)
             if case.active_space else "frozen core" if case.frozen_core else "all-electron")
    return {"name": case.name, "title": case.title, "formula": case.formula,
            "charge": case.charge, "multiplicity": case.multiplicity, "n_electrons": case.n_electrons,
            "basis": basis_label, "bases": [b.label for b in case.bases], "space": space,
            "tags": list(case.tags), "geometry_source": case.geometry_source,
            "scan": case.scan_parent, "file": str(case.path)}


def _run_cases(args) -> int:
    reg = load_registry(args)
    if args.suite:
        entries = [(e.case, e.basis.label) for e in reg.suite_entries(args.suite)]
    else:
        entries = [(c, c.default_basis.label) for _, c in sorted(reg.cases.items())]
    records = [_case_record(c, b) for c, b in entries]
    if args.format == "json":
        _print_json(records)
        return 0
    rows = [[r["name"], r["formula"], r["charge"], r["multiplicity"], r["basis"], r["space"],
             ",".join(r["tags"]), r["geometry_source"]] for r in records]
    print(format_table(["case", "formula", "charge", "mult", "basis", "space", "tags", "geometry"], rows,
                       "llrrllll"))
    print(f"\n{len(records)} case(s)" + (f" in suite {args.suite!r}" if args.suite else "")
          + f"; suites: {', '.join(sorted(reg.suites))}")
    return 0


# -- references ------------------------------------------------------------------

def _add_references(sub) -> None:
    p = sub.add_parser("references", help="the classical reference ladder of one or more cases")
    p.add_argument("case", nargs="*", metavar="CASE", help="case name(s); a scan name means every point")
    p.add_argument("--suite", help="every case of this suite")
    p.add_argument("--basis", help="basis label (default: the case's first basis, or the suite's)")
    p.add_argument("--scf", choices=("rhf", "rohf", "uhf"), default=None,
                   help="SCF kind (default RHF for closed shells, ROHF for open shells); "
                        "uhf adds UHF-based rungs beside the restricted ones")
    p.add_argument("--max-determinants", type=int, default=None,
                   help="skip FCI/CASCI above this many determinants (default 5,000,000)")
    _add_case_sources(p)
    _add_cache(p)
    p.add_argument("--format", choices=("table", "json"), default="table")


def _run_references(args) -> int:
    from benchsuite.chem.ladder import DEFAULT_MAX_DETERMINANTS, reference_ladder
    from benchsuite.chem.space import prepare

    reg = load_registry(args)
    if args.suite and args.case:
        raise InputError("give case names or --suite, not both", field="CASE")
    if args.suite:
        pairs = [(e.case, e.basis) for e in reg.suite_entries(args.suite, args.basis)]
    elif args.case:
        pairs = [(e.case, e.basis) for e in reg.named_entries(args.case, args.basis)]
    else:
        raise InputError("name a case (see `benchsuite cases`) or give --suite", field="CASE")
    max_det = args.max_determinants or DEFAULT_MAX_DETERMINANTS
    if max_det < 1:
        raise InputError("must be positive", field="--max-determinants")
    for case, basis in pairs:           # validate everything before computing anything
        prepare(case, basis, args.scf)
    cache = open_cache(args)
    ladders = []
    for case, basis in pairs:
        ladder = reference_ladder(case, basis, cache=cache, scf_kind=args.scf, max_determinants=max_det)
        ladders.append(ladder)
        if args.format == "table":
            print(render_ladder(ladder, reg.bib))
            print()
            sys.stdout.flush()
    if args.format == "json":
        docs = [lad.to_json() for lad in ladders]
        _print_json(docs[0] if len(docs) == 1 and not args.suite else docs)
    return 0


def _fmt(x, spec: str) -> str:
    return "" if x is None else format(x, spec)


def render_ladder(ladder, bib: dict) -> str:
    """Human-readable ladder with the published values beside the computed ones."""
    s, scf = ladder.space, ladder.scf
    state = ("converged" if scf.converged else "NOT CONVERGED") + ", " + (
        "stable" if scf.stable else "UNSTABLE")
    ext = "" if scf.stable_external is None else (
        "; RHF->UHF stable" if scf.stable_external else "; RHF->UHF unstable (expected at stretched bonds)")
    head = [f"{ladder.case}  basis {ladder.basis}  {s.label}  multiplicity {ladder.multiplicity}",
            f"SCF {scf.method.upper()} {state} after {scf.attempts} attempt(s), {scf.iterations} cycles"
            f"{ext}; cache {ladder.cache_status}"]
    rows = [[r.method, _fmt(r.energy_ha, ".10f"), _fmt(None if r.correlation_ha is None else
                                                      1000 * r.correlation_ha, ".4f"),
             _fmt(r.s2, ".6f"), _fmt(r.n_determinants, ","), _fmt(r.seconds, ".2f"), r.status, r.note]
            for r in ladder.rungs]
    body = format_table(["rung", "energy / Eh", "E_corr / mHa", "<S^2>", "determinants", "seconds",
                         "status", "note"], rows, "lrrrrrll")
    out = head + [body]
    if ladder.published:
        pub_rows = []
        for p in ladder.published:
            mine = ladder.rung(p.method)
            diff = None if mine is None or mine.energy_ha is None else 1000 * (mine.energy_ha - p.energy_ha)
            entry = bib.get(p.source)
            pub_rows.append([p.method, p.basis, _fmt(p.energy_ha, ".10f"), _fmt(diff, "+.4f"),
                             p.source + (f" ({entry.short()})" if entry else ""),
                             "from memory" if p.from_memory else "checked", p.note])
        out += ["published values:", format_table(
            ["rung", "basis", "energy / Eh", "computed - published / mHa", "source", "", "note"],
            pub_rows, "llrrlll")]
    if ladder.flags:
        out += ["FLAGS: " + " | ".join(ladder.flags)]
    return "\n".join(out)


# -- hamiltonian -----------------------------------------------------------------

def _add_hamiltonian(sub) -> None:
    from benchsuite.qubit.command import add_arguments

    p = sub.add_parser("hamiltonian", help="a case's qubit Hamiltonian: Pauli terms, HF bitstring, metrics")
    add_arguments(p)
    _add_case_sources(p)
    _add_cache(p)


def _run_hamiltonian(args) -> int:
    from benchsuite.qubit.command import run

    return run(args, load_registry(args), open_cache(args))


# -- methods and solve -----------------------------------------------------------

def _add_methods(sub) -> None:
    p = sub.add_parser("methods", help="list methods under test (built-in and plugins) with their options")
    p.add_argument("--format", choices=("table", "json"), default="table")


def _method_record(m) -> dict:
    return {"name": m.name, "description": getattr(m, "description", ""),
            "variational": bool(getattr(m, "variational", False)),
            "stochastic": bool(getattr(m, "stochastic", False)),
            "options": [o.describe() for o in m.options]}


def _run_methods(args) -> int:
    from benchsuite.methods.discovery import all_methods

    methods, failures = all_methods()
    records = [_method_record(m) for m in methods]
    if args.format == "json":
        _print_json({"methods": records, "broken_plugins": [f.__dict__ for f in failures]})
        return 0
    for r in records:
        kind = ", ".join(k for k in ("variational", "stochastic") if r[k]) or "deterministic"
        print(f"{r['name']}  ({kind})\n    {r['description']}")
        for o in r["options"]:
            choices = f" one of {o['choices']}" if "choices" in o else ""
            print(f"    --option {o['name']}=<{o['type']}>  default {o['default']!r}{choices}  {o['help']}")
    for f in failures:
        print(f"BROKEN PLUGIN {f.name} ({f.origin}): {f.reason}")
    return 0


def _add_encoding(p: argparse.ArgumentParser) -> None:
    p.add_argument("--encoding", default="jordan-wigner",
                   help="jordan-wigner | bravyi-kitaev | parity (default jordan-wigner)")
    p.add_argument("--ordering", default="interleaved", help="interleaved | blocked (default interleaved)")
    p.add_argument("--taper", action="store_true", help="Z2-taper in the Hartree-Fock sector")
    p.add_argument("--two-qubit-reduction", action="store_true", help="parity + blocked only")


def _add_solve(sub) -> None:
    p = sub.add_parser("solve", help="run one method on one case beside its FCI/CASCI reference")
    p.add_argument("case", metavar="CASE")
    p.add_argument("--method", required=True, help="built-in name, entry-point name or package.module:attr")
    p.add_argument("--basis")
    _add_encoding(p)
    p.add_argument("--option", action="append", default=[], metavar="KEY=VALUE", help="method option")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--timeout-s", type=finite_float, default=None, help="stop the method after this many seconds")
    _add_case_sources(p)
    _add_cache(p)
    p.add_argument("--format", choices=("table", "json"), default="table")


def solve_record(prepared, outcome) -> dict:
    """The ``solve --format json`` document."""
    from benchsuite.scoring import error_mha

    ref = prepared.reference
    problem = prepared.problem
    err = None if ref is None or outcome.energy_ha is None else error_mha(outcome.energy_ha, ref.energy_ha)
    return {"case": problem.case, "basis": problem.basis, "space": problem.space,
            "encoding": prepared.encoding.label, "n_qubits": problem.n_qubits,
            "method": outcome.method, "energy_ha": outcome.energy_ha, "stderr_ha": outcome.stderr_ha,
            "reference": {"method": None if ref is None else ref.method,
                          "energy_ha": None if ref is None else ref.energy_ha},
            "error_mha": err, "status": outcome.status, "converged": outcome.converged,
            "iterations": outcome.iterations, "seconds": outcome.seconds, "resources": outcome.resources,
            "message": outcome.message, "scf_flags": prepared.ladder.scf.flags,
            "state_check": outcome.metadata.get("state_check")}


def _run_solve(args) -> int:
    from benchsuite.methods.base import resolve_options
    from benchsuite.methods.discovery import resolve_method
    from benchsuite.methods.problem import Encoding, build_problem
    from benchsuite.runner import Outcome, execute

    reg = load_registry(args)
    case = reg.case(args.case)
    method, failure = resolve_method(args.method)
    from benchsuite.gate.plan import parse_key_values

    options = parse_key_values(args.option, "--option")
    if method is not None:
        resolve_options(method, options)            # reject bad options before any work
    if args.timeout_s is not None and args.timeout_s <= 0:
        raise InputError("must be positive", field="--timeout-s")
    enc = Encoding(args.encoding, args.ordering, args.taper, args.two_qubit_reduction).check()
    prepared = build_problem(case, args.basis, enc, cache=open_cache(args), seed=args.seed,
                             time_budget_s=args.timeout_s)
    ref = prepared.reference
    if method is None:
        outcome = Outcome(method=args.method, status="error", message=f"plugin unusable: {failure.reason}")
    else:
        outcome = execute(method, prepared.problem, options, timeout_s=args.timeout_s,
                          exact_ha=None if ref is None else ref.energy_ha,
                          sector_ha=None if ref is None else ref.sector_lowest_ha)
    record = solve_record(prepared, outcome)
    if args.format == "json":
        _print_json(record)
    else:
        print(render_solve(record))
    return 0 if outcome.status == "ok" else 1


def render_solve(r: dict) -> str:
    ref = r["reference"]
    lines = [f"{r['case']}  basis {r['basis']}  {r['space']}  {r['encoding']}  {r['n_qubits']} qubits",
             format_table(["", "energy / Eh", "error / mHa", "status", "seconds"], [
                 [r["method"], _fmt(r["energy_ha"], ".10f"), _fmt(r["error_mha"], "+.4f"), r["status"],
                  _fmt(r["seconds"], ".2f")],
                 [ref["method"] or "(no reference)", _fmt(ref["energy_ha"], ".10f"), "", "", ""]], "lrrll")]
    if r["stderr_ha"] is not None:
        lines.append(f"standard error {1000 * r['stderr_ha']:.4f} mHa")
    if r["resources"]:
        lines.append("resources: " + ", ".join(f"{k} {v}" for k, v in r["resources"].items()))
    if r["message"]:
        lines.append("message: " + r["message"].strip().splitlines()[0])
    if r["scf_flags"]:
        lines.append("SCF FLAGS: " + " | ".join(r["scf_flags"]))
    return "\n".join(lines)


# -- run, compare, export ---------------------------------------------------------

def finite_float(text: str) -> float:
    """argparse type: a finite number (NaN, inf and overflow such as 1e400 are refused)."""
    import math

    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be finite, got {text!r}")
    return value


def _add_run(sub) -> None:
    from benchsuite.scoring import MULTIPLE_TESTING

    p = sub.add_parser("run", help="the gate: every method on every selected case, judged and stored")
    sel = p.add_mutually_exclusive_group(required=True)
    sel.add_argument("--suite", help="a named suite")
    sel.add_argument("--case", nargs="+", metavar="NAME", help="case names (a scan name means every point)")
    sel.add_argument("--resume", metavar="RUN_ID", help="finish an interrupted run: only its missing tasks")
    _add_case_sources(p)
    p.add_argument("--method", action="append", default=[], metavar="M", help="method (repeatable)")
    p.add_argument("--basis", help="run every case in this basis")
    _add_encoding(p)
    p.add_argument("--option", action="append", default=[], metavar="M.KEY=VALUE",
                   help="method option, prefixed with the method's name")
    p.add_argument("--threshold-mha", type=finite_float, default=None,
                   help="pass threshold in mHa for every case (default: case, then suite, then 1 kcal/mol)")
    p.add_argument("--confidence", type=finite_float, default=0.95,
                   help="confidence for stochastic verdicts (default 0.95)")
    p.add_argument("--multiple-testing", choices=MULTIPLE_TESTING, default=MULTIPLE_TESTING[0],
                   help="control of the run's stochastic fail claims: holm (family-wise error rate, default) "
                        "or bh (false-discovery rate)")
    p.add_argument("--allow-inconclusive", action="store_true", help="inconclusive does not fail the gate")
    p.add_argument("--require-converged", action="store_true",
                   help="a result its method reports as not converged fails the gate (verdict unconverged)")
    p.add_argument("--workers", type=int, default=None, help="worker processes (default: the core count)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="Dask scheduler, e.g. tcp://host:8786")
    p.add_argument("--timeout-s", type=finite_float, default=None,
                   help="per-task time budget in s, enforced by killing the worker's process group (default 3600)")
    p.add_argument("--max-memory-mb", type=finite_float, default=None,
                   help="address-space limit of each method's worker in MiB (default 4096)")
    p.add_argument("--reference-timeout-s", type=finite_float, default=1800.0,
                   help="per reference ladder (default 1800 s): a stuck SCF cannot hold up the run")
    p.add_argument("--max-determinants", type=int, default=5_000_000)
    p.add_argument("--db", type=Path, default=None, help="results database (default .benchsuite/results.sqlite)")
    p.add_argument("--json", type=Path, metavar="FILE", help="write the run record and every result")
    p.add_argument("--junit", type=Path, metavar="FILE", help="write JUnit XML")
    p.add_argument("--report", type=Path, metavar="FILE.html", help="write the one-file HTML report")
    _add_baseline_options(p)
    p.add_argument("--baseline", metavar="RUN_ID", help="compare with this run (or 'latest') and fail on regressions")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--cache-dir", type=Path, default=None,
                   help="reference cache (default $BENCHSUITE_CACHE or .benchsuite/cache)")


def _add_baseline_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--max-increase-mha", type=finite_float, default=None,
                   help="|error| growth counted as a regression (default 0.1 mHa)")
    p.add_argument("--allow-new", action="store_true",
                   help="tasks absent from the baseline do not fail the comparison")


def _db_path(args) -> Path:
    from benchsuite.store.db import default_db_path

    return args.db or default_db_path()


def _run_settings(args):
    from dataclasses import asdict

    from benchsuite.gate.plan import RunSettings
    from benchsuite.methods.problem import Encoding

    enc = Encoding(args.encoding, args.ordering, args.taper, args.two_qubit_reduction)
    return RunSettings(basis=args.basis, threshold_mha=args.threshold_mha, confidence=args.confidence,
                       multiple_testing=args.multiple_testing, allow_inconclusive=args.allow_inconclusive,
                       require_converged=args.require_converged, timeout_s=args.timeout_s,
                       reference_timeout_s=args.reference_timeout_s, max_determinants=args.max_determinants,
                       max_memory_mb=args.max_memory_mb,
                       cases=tuple(str(p) for p in args.cases), case_file=tuple(str(p) for p in args.case_file),
                       encoding=asdict(enc))


def _run_run(args) -> int:
    import os

    from benchsuite.chem.cache import default_cache_dir
    from benchsuite.gate.execute import Execution, Outputs, RunInterrupted, execute_plan
    from benchsuite.gate.plan import check_output_path, plan_run, stored_plan_arguments
    from benchsuite.registry import Registry
    from benchsuite.report.progress import Progress
    from benchsuite.report.terminal import render_summary
    from benchsuite.store.db import ResultStore

    outputs = Outputs(*(check_output_path(getattr(args, f), f"--{f}") for f in ("json", "junit", "report")))
    if args.max_increase_mha is not None and args.max_increase_mha < 0:
        raise InputError("must not be negative", field="--max-increase-mha")
    resumed, store = None, None
    if args.resume:
        store = ResultStore.open(_db_path(args))
        resumed = store.resume_run(store.resolve_run_id(args.resume, any_status=True))
        plan_args = stored_plan_arguments(resumed)
    else:
        plan_args = {"suite_name": args.suite, "case_names": args.case, "method_specs": args.method,
                     "option_items": args.option, "settings": _run_settings(args), "seed": args.seed}
    s = plan_args["settings"]
    registry = Registry.load(case_dirs=[Path(p) for p in s.cases], case_files=[Path(p) for p in s.case_file])
    plan = plan_run(registry, workers=args.workers, **plan_args)
    store = store or ResultStore.open(_db_path(args))
    baseline_id = store.resolve_run_id(args.baseline, exclude=resumed and resumed.run_id) if args.baseline else None
    if baseline_id is not None:
        store.results(baseline_id)          # an edited baseline is refused before anything is computed
    ex = Execution(workers=args.workers or os.cpu_count() or 1, scheduler=args.scheduler,
                   cache_dir=str(args.cache_dir or default_cache_dir()), baseline_id=baseline_id,
                   max_increase_mha=args.max_increase_mha, allow_new=args.allow_new)
    try:
        decision, run, rows = execute_plan(store, plan, ex, outputs, resumed, " ".join(["benchsuite"] + sys.argv[1:]),
                                           Progress, registry)
    except RunInterrupted as exc:
        print(f"benchsuite: {exc}", file=sys.stderr)
        return exc.exit_code
    print(render_summary(run, rows, decision.to_dict()))
    return decision.exit_code


def _add_compare(sub) -> None:
    p = sub.add_parser("compare", help="regressions from a baseline run to a new run")
    p.add_argument("base", metavar="BASE")
    p.add_argument("new", metavar="NEW")
    _add_baseline_options(p)
    p.add_argument("--db", type=Path, default=None)


def _run_compare(args) -> int:
    from benchsuite.api import compare
    from benchsuite.report.terminal import baseline_lines

    if args.max_increase_mha is not None and args.max_increase_mha < 0:
        raise InputError("must not be negative", field="--max-increase-mha")
    comparison = compare(args.base, args.new, _db_path(args), args.max_increase_mha, args.allow_new)
    print("\n".join(baseline_lines(comparison.to_dict())))
    print("comparison " + ("passed" if comparison.passed else "failed: " + "; ".join(comparison.problems())))
    return 0 if comparison.passed else 1


def _add_runs(sub) -> None:
    p = sub.add_parser("runs", help="stored runs, newest first: id, date, suite, methods, verdicts, commit")
    p.add_argument("--limit", type=int, default=None, help="at most this many runs")
    p.add_argument("--format", choices=("table", "json"), default="table")
    p.add_argument("--db", type=Path, default=None)


def _run_runs(args) -> int:
    from benchsuite.api import list_runs
    from benchsuite.report.runs import runs_json, runs_table

    if args.limit is not None and args.limit < 1:
        raise InputError("must be positive", field="--limit")
    summaries = list_runs(_db_path(args), args.limit)
    print(runs_json(summaries) if args.format == "json" else runs_table(summaries))
    return 0


def _add_export(sub) -> None:
    p = sub.add_parser("export", help="a stored run's results as CSV, Parquet or JSON")
    p.add_argument("run_id", metavar="RUN_ID")
    p.add_argument("--format", choices=("csv", "parquet", "json"), default="csv")
    p.add_argument("--out", type=Path, default=None, help="file to write (default stdout; parquet needs --out)")
    p.add_argument("--db", type=Path, default=None)


def _run_export(args) -> int:
    from benchsuite.store.db import ResultStore
    from benchsuite.store.export import export_run

    store = ResultStore.open(_db_path(args), create=False)
    export_run(store, store.resolve_run_id(args.run_id), args.format, args.out)
    return 0


# -- report and table ------------------------------------------------------------

def _add_report(sub) -> None:
    from benchsuite.report.command import add_report_arguments

    add_report_arguments(sub.add_parser("report", help="one self-contained HTML pass/fail report of a run"))


def _run_report(args) -> int:
    from benchsuite.report.command import run_report

    return run_report(args)


def _add_table(sub) -> None:
    from benchsuite.report.command import add_table_arguments

    add_table_arguments(sub.add_parser("table", help="a citable table of a run: LaTeX, Markdown or CSV"))


def _run_table(args) -> int:
    from benchsuite.report.command import run_table

    return run_table(args)


COMMANDS = {
    "cases": (_add_cases, _run_cases),
    "references": (_add_references, _run_references),
    "hamiltonian": (_add_hamiltonian, _run_hamiltonian),
    "methods": (_add_methods, _run_methods),
    "solve": (_add_solve, _run_solve),
    "run": (_add_run, _run_run),
    "compare": (_add_compare, _run_compare),
    "runs": (_add_runs, _run_runs),
    "export": (_add_export, _run_export),
    "report": (_add_report, _run_report),
    "table": (_add_table, _run_table),
}
from benchsuite.commands_external import COMMANDS as _EXTERNAL_COMMANDS  # noqa: E402  (problem, score)
COMMANDS.update(_EXTERNAL_COMMANDS)


def build_parser() -> argparse.ArgumentParser:
    from benchsuite import __version__

    parser = argparse.ArgumentParser(
        prog="benchsuite",
        description="Accuracy gate for qubit-based quantum-chemistry solvers against classical references.")
    parser.add_argument("--version", action="version", version=f"benchsuite {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for add, _ in COMMANDS.values():
        add(sub)
    return parser


def crash_note(exc: BaseException) -> str:
    """Write the traceback of an internal error to a file; return where it went."""
    import os
    import tempfile
    import traceback

    text = "".join(traceback.format_exception(exc))
    fd, path = tempfile.mkstemp(prefix="benchsuite-crash-", suffix=".txt")
    with os.fdopen(fd, "w", encoding="utf-8") as fh:
        fh.write(f"benchsuite {' '.join(sys.argv[1:])}\n\n{text}")
    return path


def main(argv: list[str] | None = None) -> int:
    """Exit codes: 0 passed, 1 the gate (or comparison) failed, 2 input or usage error,
    3 internal error (the traceback is written to a file named on stderr), 128 + signal when stopped."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return COMMANDS[args.command][1](args)
    except InputError as exc:
        print(f"benchsuite: error: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        return 0
    except KeyboardInterrupt:
        print("benchsuite: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # an internal error: never a bare traceback, never exit 1
        print(f"benchsuite: internal error ({type(exc).__name__}: {str(exc)[:300]}); "
              f"traceback written to {crash_note(exc)}", file=sys.stderr)
        return 3


if __name__ == "__main__":
    sys.exit(main())
