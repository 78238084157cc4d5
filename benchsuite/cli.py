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


def format_table(headers: list[str], rows: list[list], aligns: str | None = None) -> str:
    """Plain fixed-width table; ``aligns`` one of 'l'/'r' per column (default left)."""
    cells = [[("" if c is None else str(c)) for c in row] for row in rows]
    widths = [max([len(h)] + [len(r[i]) for r in cells]) for i, h in enumerate(headers)]
    aligns = aligns or "l" * len(headers)

    def line(vals):
        return "  ".join(v.rjust(w) if a == "r" else v.ljust(w)
                         for v, w, a in zip(vals, widths, aligns)).rstrip()

    rule = "  ".join("-" * w for w in widths)
    return "\n".join([line(headers), rule] + [line(r) for r in cells])


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
    return {"name": case.name, "title": case.title, "formula": _formula(case.symbols),
            "charge": case.charge, "multiplicity": case.multiplicity, "n_electrons": case.n_electrons,
            "basis": basis_label, "bases": [b.label for b in case.bases], "space": space,
            "tags": list(case.tags), "geometry_source": case.geometry_source,
            "scan": case.scan_parent, "file": str(case.path)}


def _formula(symbols) -> str:
    counts: dict[str, int] = {}
    for s in symbols:
        counts[s] = counts.get(s, 0) + 1
    return "".join(f"{s}{n if n > 1 else ''}" for s, n in counts.items())


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
    body = format_table(["rung", "energy / Eh", "E_corr / mEh", "<S^2>", "determinants", "seconds",
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
            ["rung", "basis", "energy / Eh", "computed - published / mEh", "source", "", "note"],
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
            "options": [{"name": o.name, "type": o.kind.__name__, "default": o.default, "help": o.help,
                         **({"choices": list(o.choices)} if o.choices else {})} for o in m.options]}


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


def parse_key_values(items: list[str], flag: str) -> dict[str, str]:
    out = {}
    for item in items:
        key, eq, value = item.partition("=")
        if not eq or not key.strip():
            raise InputError(f"expected key=value, got {item!r}", field=flag)
        out[key.strip()] = value.strip()
    return out


def _add_solve(sub) -> None:
    p = sub.add_parser("solve", help="run one method on one case beside its FCI/CASCI reference")
    p.add_argument("case", metavar="CASE")
    p.add_argument("--method", required=True, help="built-in name, entry-point name or package.module:attr")
    p.add_argument("--basis")
    _add_encoding(p)
    p.add_argument("--option", action="append", default=[], metavar="KEY=VALUE", help="method option")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--timeout-s", type=float, default=None, help="stop the method after this many seconds")
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
            "message": outcome.message, "scf_flags": prepared.ladder.scf.flags}


def _run_solve(args) -> int:
    from benchsuite.methods.base import resolve_options
    from benchsuite.methods.discovery import resolve_method
    from benchsuite.methods.problem import Encoding, build_problem
    from benchsuite.runner import Outcome, execute

    reg = load_registry(args)
    case = reg.case(args.case)
    method, failure = resolve_method(args.method)
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
                          exact_ha=None if ref is None else ref.energy_ha)
    record = solve_record(prepared, outcome)
    if args.format == "json":
        _print_json(record)
    else:
        print(render_solve(record))
    return 0 if outcome.status == "ok" else 1


def render_solve(r: dict) -> str:
    ref = r["reference"]
    lines = [f"{r['case']}  basis {r['basis']}  {r['space']}  {r['encoding']}  {r['n_qubits']} qubits",
             format_table(["", "energy / Eh", "error / mEh", "status", "seconds"], [
                 [r["method"], _fmt(r["energy_ha"], ".10f"), _fmt(r["error_mha"], "+.4f"), r["status"],
                  _fmt(r["seconds"], ".2f")],
                 [ref["method"] or "(no reference)", _fmt(ref["energy_ha"], ".10f"), "", "", ""]], "lrrll")]
    if r["stderr_ha"] is not None:
        lines.append(f"standard error {1000 * r['stderr_ha']:.4f} mEh")
    if r["resources"]:
        lines.append("resources: " + ", ".join(f"{k} {v}" for k, v in r["resources"].items()))
    if r["message"]:
        lines.append("message: " + r["message"].strip().splitlines()[0])
    if r["scf_flags"]:
        lines.append("SCF FLAGS: " + " | ".join(r["scf_flags"]))
    return "\n".join(lines)


# -- run, compare, export ---------------------------------------------------------

def _add_run(sub) -> None:
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
    p.add_argument("--threshold-mha", type=float, default=None,
                   help="pass threshold in mHa for every case (default: case, then suite, then 1 kcal/mol)")
    p.add_argument("--confidence", type=float, default=0.95,
                   help="confidence for stochastic verdicts (default 0.95)")
    p.add_argument("--allow-inconclusive", action="store_true", help="inconclusive does not fail the gate")
    p.add_argument("--workers", type=int, default=None, help="worker processes (default: the core count)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="Dask scheduler, e.g. tcp://host:8786")
    p.add_argument("--timeout-s", type=float, default=None, help="per-task time budget, enforced")
    p.add_argument("--reference-timeout-s", type=float, default=1800.0,
                   help="per reference ladder (default 1800 s): a stuck SCF cannot hold up the run")
    p.add_argument("--max-determinants", type=int, default=5_000_000)
    p.add_argument("--db", type=Path, default=None, help="results database (default .benchsuite/results.sqlite)")
    p.add_argument("--json", type=Path, metavar="FILE", help="write the run record and every result")
    p.add_argument("--junit", type=Path, metavar="FILE", help="write JUnit XML")
    p.add_argument("--report", type=Path, metavar="FILE.html", help="write the one-file HTML report")
    p.add_argument("--baseline", metavar="RUN_ID", help="compare with this run (or 'latest') and fail on regressions")
    p.add_argument("--max-increase-mha", type=float, default=None,
                   help="with --baseline: |error| growth counted as a regression (default 0.1 mHa)")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--cache-dir", type=Path, default=None,
                   help="reference cache (default $BENCHSUITE_CACHE or .benchsuite/cache)")


def _split_method_options(items: list[str], methods: list[str]) -> dict[str, dict[str, str]]:
    out: dict[str, dict[str, str]] = {m: {} for m in methods}
    for key, value in parse_key_values(items, "--option").items():
        method, dot, opt = key.rpartition(".")
        if not dot or method not in out:
            raise InputError(f"{key!r} must be METHOD.KEY with METHOD one of {methods}", field="--option")
        out[method][opt] = value
    return out


def _db_path(args) -> Path:
    from benchsuite.store.db import default_db_path

    return args.db or default_db_path()


def _run_run(args) -> int:
    import os

    from benchsuite.chem.cache import default_cache_dir
    from benchsuite.methods.base import resolve_options
    from benchsuite.methods.discovery import resolve_method
    from benchsuite.methods.problem import Encoding
    from benchsuite.report.progress import Progress
    from benchsuite.runner import GridConfig, Task, run_grid
    from benchsuite.scoring import DEFAULT_THRESHOLD_MHA, THRESHOLD_SOURCE
    from benchsuite.store.db import ResultStore
    from benchsuite.store.provenance import new_run_id
    from benchsuite.store.records import task_key

    store = ResultStore.open(_db_path(args))
    resumed = None
    if args.resume:
        resumed = store.resume_run(store.resolve_run_id(args.resume, any_status=True))
        _restore_run_arguments(args, resumed)
    if not args.method:
        raise InputError("give at least one --method", field="--method")
    reg = load_registry(args)
    suite = reg.suites.get(args.suite) if args.suite else None
    if args.suite:
        entries = [(e.case, e.basis) for e in reg.suite_entries(args.suite, args.basis)]
    else:
        entries = [(e.case, e.basis) for e in reg.named_entries(args.case, args.basis)]
    enc = Encoding(args.encoding, args.ordering, args.taper, args.two_qubit_reduction).check()
    for flag, value in (("--workers", args.workers), ("--timeout-s", args.timeout_s),
                        ("--reference-timeout-s", args.reference_timeout_s),
                        ("--threshold-mha", args.threshold_mha), ("--max-determinants", args.max_determinants)):
        if value is not None and value <= 0:
            raise InputError("must be positive", field=flag)
    if not 0 < args.confidence < 1:
        raise InputError("must lie strictly between 0 and 1", field="--confidence")
    options = _split_method_options(args.option, args.method)
    methods = {}
    for spec in args.method:
        obj, failure = resolve_method(spec)
        if obj is not None:
            options[spec] = resolve_options(obj, options[spec])
        methods[spec] = (obj, failure)
    from benchsuite.chem.space import prepare
    for case, basis in entries:
        prepare(case, basis)                       # every input checked before any work
    baseline_id = store.resolve_run_id(args.baseline) if args.baseline else None

    def threshold_for(case):
        if args.threshold_mha is not None:
            return args.threshold_mha
        if case.threshold_mha is not None:
            return case.threshold_mha
        return suite.threshold_mha if suite and suite.threshold_mha else DEFAULT_THRESHOLD_MHA

    tasks = [Task(case, basis, enc, spec, options[spec], task_key(case.name, basis.label, enc.label, spec,
                                                                  options[spec]))
             for case, basis in entries for spec in args.method]
    if resumed is not None:
        missing = set(store.missing_tasks(resumed.run_id, [t.key for t in tasks]))
        tasks = [t for t in tasks if t.key in missing]
        run = resumed
    else:
        run = _new_run_record(args, new_run_id(), enc, options, DEFAULT_THRESHOLD_MHA, THRESHOLD_SOURCE, methods)
        store.begin_run(run)
    cfg = GridConfig(workers=args.workers or os.cpu_count() or 1, scheduler=args.scheduler,
                     timeout_s=args.timeout_s, reference_timeout_s=args.reference_timeout_s,
                     cache_dir=str(args.cache_dir or default_cache_dir()), seed=args.seed,
                     max_determinants=args.max_determinants, confidence=args.confidence,
                     threshold_for=threshold_for)
    progress = Progress(len(tasks))

    def on_row(row):
        store.add_result(row)
        progress.row_done(row)

    run_grid(run.run_id, tasks, methods, cfg, on_row, progress)
    progress.close()
    rows = store.results(run.run_id)
    summary = {**run.summary, **_summary(rows, args.allow_inconclusive)}
    store.finish_run(run.run_id, "complete", summary)
    run = store.get_run(run.run_id)
    return _gate_outputs(args, store, run, rows, baseline_id)


#: Run settings kept in ``RunRecord.summary["settings"]`` so that ``--resume`` restores them.
RESUMED_SETTINGS = ("basis", "threshold_mha", "confidence", "allow_inconclusive", "timeout_s",
                    "reference_timeout_s", "max_determinants", "cases", "case_file")


def _settings(args) -> dict:
    return {k: ([str(p) for p in getattr(args, k)] if k in ("cases", "case_file") else getattr(args, k))
            for k in RESUMED_SETTINGS}


def _restore_run_arguments(args, run) -> None:
    """--resume: the selection, methods, options and settings come from the stored run."""
    for key, value in run.summary.get("settings", {}).items():
        setattr(args, key, [Path(v) for v in value] if key in ("cases", "case_file") else value)
    args.suite = run.suite
    args.case = None if run.suite else run.cases
    args.method = list(run.methods)
    args.option = [f"{m}.{k}={v}" for m, opts in run.options.items() for k, v in opts.items()]
    args.seed = run.seed
    enc = run.encoding.split("/")
    args.encoding = enc[0].split("+")[0]
    args.ordering = enc[1] if len(enc) > 1 else "interleaved"
    args.taper = "tapered" in enc[0]
    args.two_qubit_reduction = "2qr" in enc[0]


def _new_run_record(args, run_id, enc, options, default_threshold, source, methods):
    import sys

    from benchsuite.methods.discovery import builtin_names
    from benchsuite.store.provenance import git_state, machine_info, package_versions, plugin_provenance
    from benchsuite.store.records import RunRecord, utc_now

    plugin_git = plugin_provenance(list(methods), builtin_names=builtin_names())
    return RunRecord(
        run_id=run_id, started_at=utc_now(), command=" ".join(["benchsuite"] + sys.argv[1:]),
        suite=args.suite, cases=list(args.case or []), methods=list(args.method),
        options={m: dict(o) for m, o in options.items()}, encoding=enc.label,
        threshold_mha=args.threshold_mha or default_threshold, threshold_source=source, seed=args.seed,
        packages=package_versions(), git=git_state(Path.cwd()), plugin_git=plugin_git, machine=machine_info(),
        summary={"settings": _settings(args)})


def _summary(rows, allow_inconclusive: bool) -> dict:
    from benchsuite.report.gate import is_failing

    counts: dict[str, int] = {}
    for r in rows:
        counts[r.verdict] = counts.get(r.verdict, 0) + 1
    return {"counts": counts, "tasks": len(rows),
            "failing": sum(is_failing(r.verdict, allow_inconclusive) for r in rows)}


def _gate_outputs(args, store, run, rows, baseline_id) -> int:
    from benchsuite.report.gate import junit_xml, run_document

    if args.json:
        _write_atomic(args.json, json.dumps(run_document(run, rows), indent=1, allow_nan=False).encode())
    if args.junit:
        _write_atomic(args.junit, junit_xml(run, rows, args.allow_inconclusive))
    if args.report:
        from benchsuite.report.command import write_report

        write_report(store, run.run_id, args.report, load_registry(args))
    print(render_run_summary(run, rows))
    code = 1 if run.summary.get("failing") else 0
    if baseline_id:
        code = max(code, _print_comparison(store, baseline_id, run.run_id, args.max_increase_mha))
    return code


def _write_atomic(path: Path, blob: bytes) -> None:
    import os
    import tempfile

    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=path.name + ".", suffix=".tmp")
    with os.fdopen(fd, "wb") as fh:
        fh.write(blob)
    os.replace(tmp, path)


def render_run_summary(run, rows) -> str:
    from benchsuite.scoring import method_statistics

    by_method: dict[str, list] = {}
    for r in rows:
        by_method.setdefault(r.method, []).append(r)
    lines = [f"run {run.run_id}: {len(rows)} task(s), threshold {run.threshold_mha:.4f} mHa"]
    table = []
    for method, items in by_method.items():
        st = method_statistics(method, [r.error_mha if r.status == "ok" else None for r in items],
                               [r.verdict for r in items])
        table.append([method, st.n_tasks, f"{100 * st.pass_rate:.0f} %", _fmt(st.max_abs_error_mha, ".4f"),
                      _fmt(st.mae_mha, ".4f"), _fmt(st.rmse_mha, ".4f")])
    lines.append(format_table(["method", "tasks", "pass", "max |error| / mEh", "MAE / mEh", "RMSE / mEh"],
                              table, "lrrrrr"))
    bad = [r for r in rows if r.verdict != "pass"]
    for r in bad[:40]:
        lines.append(f"  {r.verdict.upper():12s} {r.method} on {r.case}[{r.basis}]: "
                     + (f"error {r.error_mha:+.4f} mHa" if r.error_mha is not None else "")
                     + (f" {r.message.strip().splitlines()[0]}" if r.message.strip() else ""))
    return "\n".join(lines)


def _print_comparison(store, base_id: str, new_id: str, max_increase_mha) -> int:
    from benchsuite.store.baseline import DEFAULT_MAX_INCREASE_MHA, compare_rows

    limit = DEFAULT_MAX_INCREASE_MHA if max_increase_mha is None else max_increase_mha
    changes = compare_rows(store.results(base_id), store.results(new_id), limit)
    regressions = [c for c in changes if c.is_regression]
    print(f"compared with {base_id}: {len(regressions)} regression(s)")
    for c in changes:
        tag = "REGRESSION" if c.is_regression else "note"
        print(f"  {tag:10s} {c.kind:11s} {c.method} on {c.case}[{c.basis}]: {c.before} -> {c.after} {c.detail}")
    return 1 if regressions else 0


def _add_compare(sub) -> None:
    p = sub.add_parser("compare", help="regressions from a baseline run to a new run")
    p.add_argument("base", metavar="BASE")
    p.add_argument("new", metavar="NEW")
    p.add_argument("--max-increase-mha", type=float, default=None,
                   help="|error| growth that counts as a regression (default 0.1 mHa)")
    p.add_argument("--db", type=Path, default=None)


def _run_compare(args) -> int:
    from benchsuite.store.db import ResultStore

    store = ResultStore.open(_db_path(args), create=False)
    return _print_comparison(store, store.resolve_run_id(args.base), store.resolve_run_id(args.new),
                             args.max_increase_mha)


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
    "export": (_add_export, _run_export),
    "report": (_add_report, _run_report),
    "table": (_add_table, _run_table),
}


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


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return COMMANDS[args.command][1](args)
    except InputError as exc:
        print(f"benchsuite: error: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        return 0


if __name__ == "__main__":
    sys.exit(main())
