"""``benchsuite run``, ``compare``, ``runs`` and ``export``: the gate and its stored runs."""

from __future__ import annotations

import sys
from pathlib import Path

from benchsuite.commands.common import (add_baseline_options, add_cache, add_case_sources, add_db, add_encoding,
                                        add_format, finite_float)
from benchsuite.errors import InputError


def add_run(sub) -> None:
    p = sub.add_parser("run", help="the gate: every method on every selected case, judged and stored")
    sel = p.add_mutually_exclusive_group(required=True)
    sel.add_argument("--suite", help="a named suite")
    sel.add_argument("--case", nargs="+", action="extend", metavar="NAME",
                     help="case names (a scan name means every point); repeatable")
    sel.add_argument("--resume", metavar="RUN_ID", help="finish an interrupted run: only its missing tasks")
    add_case_sources(p)
    p.add_argument("--method", action="append", default=[], metavar="M", help="method (repeatable)")
    p.add_argument("--basis", help="run every case in this basis")
    add_encoding(p)
    p.add_argument("--option", action="append", default=[], metavar="M.KEY=VALUE",
                   help="method option, prefixed with the method's name (repeatable)")
    _add_judging(p)
    _add_execution(p)
    add_db(p)
    p.add_argument("--json", type=Path, metavar="FILE", help="write the run record and every result")
    p.add_argument("--junit", type=Path, metavar="FILE", help="write JUnit XML")
    p.add_argument("--report", type=Path, metavar="FILE.html", help="write the one-file HTML report")
    add_baseline_options(p)
    p.add_argument("--baseline", metavar="RUN_ID", help="compare with this run (or 'latest') and fail on regressions")
    p.add_argument("--seed", type=int, default=0, help="seed handed to every method (default 0)")
    add_cache(p, no_cache=False)


def _add_judging(p) -> None:
    from benchsuite.scoring import MULTIPLE_TESTING

    p.add_argument("--threshold-mha", type=finite_float, default=None,
                   help="pass threshold in mHa for every case (default: case, then suite, then "
                        "$BENCHSUITE_THRESHOLD_MHA or [tool.benchsuite] threshold_mha, then 1 kcal/mol)")
    p.add_argument("--confidence", type=finite_float, default=0.95,
                   help="confidence for stochastic verdicts (default 0.95)")
    p.add_argument("--multiple-testing", choices=MULTIPLE_TESTING, default=MULTIPLE_TESTING[0],
                   help="control of the run's stochastic fail claims: holm (family-wise error rate, default) "
                        "or bh (false-discovery rate)")
    p.add_argument("--allow-inconclusive", action="store_true", help="inconclusive does not fail the gate")
    p.add_argument("--require-converged", action="store_true",
                   help="a result its method reports as not converged fails the gate (verdict unconverged)")


def _add_execution(p) -> None:
    p.add_argument("--workers", type=int, default=None,
                   help="worker processes (default $BENCHSUITE_WORKERS, [tool.benchsuite] workers, or the core count)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="Dask scheduler, e.g. tcp://host:8786")
    p.add_argument("--timeout-s", type=finite_float, default=None,
                   help="per-task time budget in s, enforced by killing the worker's process group "
                        "(default $BENCHSUITE_TIMEOUT_S, [tool.benchsuite] timeout_s, or 3600)")
    p.add_argument("--max-memory-mb", type=finite_float, default=None,
                   help="address-space limit of each method's worker in MiB "
                        "(default $BENCHSUITE_MAX_MEMORY_MB, [tool.benchsuite] max_memory_mb, or 4096)")
    p.add_argument("--reference-timeout-s", type=finite_float, default=1800.0,
                   help="per reference ladder (default 1800 s): a stuck SCF cannot hold up the run")
    p.add_argument("--max-determinants", type=int, default=5_000_000,
                   help="skip FCI/CASCI above this many determinants (default 5,000,000)")
    add_shot_options(p)


def add_shot_options(p) -> None:
    """``--shots`` / ``--shot-allocation``: the measurement stage after each method (run and solve)."""
    from benchsuite.qubit.measurement import ALLOCATIONS

    p.add_argument("--shots", type=int, default=None, metavar="N",
                   help="estimate each method's energy from N shots of its returned state (qubit-wise-commuting "
                        "groups; judged as stochastic with its standard error); default: no sampling")
    p.add_argument("--shot-allocation", choices=ALLOCATIONS, default=ALLOCATIONS[0],
                   help="how the shots are split between groups: uniform (default) or proportional to each "
                        "group's standard deviation on the state")


def run_settings(args):
    """The :class:`~benchsuite.gate.plan.RunSettings` of the parsed ``run`` arguments."""
    from dataclasses import asdict

    from benchsuite.gate.plan import RunSettings
    from benchsuite.methods.problem import Encoding

    enc = Encoding(args.encoding, args.ordering, args.taper, args.drop_spin_parity_qubits)
    default = args.project_threshold
    return RunSettings(basis=args.basis, threshold_mha=args.threshold_mha, confidence=args.confidence,
                       multiple_testing=args.multiple_testing, allow_inconclusive=args.allow_inconclusive,
                       require_converged=args.require_converged, timeout_s=args.timeout_s,
                       reference_timeout_s=args.reference_timeout_s, max_determinants=args.max_determinants,
                       max_memory_mb=args.max_memory_mb, shots=args.shots, shot_allocation=args.shot_allocation,
                       cases=tuple(str(p) for p in args.cases), case_file=tuple(str(p) for p in args.case_file),
                       encoding=asdict(enc), default_threshold_mha=default.value, default_threshold_source=(
                           None if default.value is None else default.source))


def run_run(args) -> int:
    from benchsuite.gate.execute import RunInterrupted
    from benchsuite.gate.request import RunRequest, checked_outputs, start_run
    from benchsuite.report.progress import Progress
    from benchsuite.report.terminal import render_summary

    req = RunRequest(suite=args.suite, cases=args.case, methods=args.method, option_items=args.option,
                     settings=run_settings(args), seed=args.seed, resume=args.resume, workers=args.workers,
                     scheduler=args.scheduler, db=args.db, cache_dir=args.cache_dir, baseline=args.baseline,
                     max_increase_mha=args.max_increase_mha, allow_new=args.allow_new,
                     outputs=checked_outputs(args.json, args.junit, args.report),
                     command=" ".join(["benchsuite"] + sys.argv[1:]))
    try:
        decision, run, rows = start_run(req, Progress if args.verbosity >= 0 else None)
    except RunInterrupted as exc:
        print(f"benchsuite: {exc}", file=sys.stderr)
        return exc.exit_code
    gate = decision.to_dict()
    if args.verbosity < 0:
        print(f"run {run.run_id}: gate " + ("passed" if gate["passed"] else "failed: " + "; ".join(gate["reasons"])))
    else:
        print(render_summary(run, rows, gate))
    return decision.exit_code


def add_compare(sub) -> None:
    p = sub.add_parser("compare", help="regressions from a baseline run to a new run")
    p.add_argument("base", metavar="BASE", help="baseline run: id, unique prefix or 'latest'")
    p.add_argument("new", metavar="NEW", help="new run: id, unique prefix or 'latest'")
    add_baseline_options(p)
    add_db(p)


def run_compare(args) -> int:
    from benchsuite.api import compare
    from benchsuite.report.terminal import baseline_lines

    if args.max_increase_mha is not None and args.max_increase_mha < 0:
        raise InputError("must not be negative", field="--max-increase-mha")
    comparison = compare(args.base, args.new, args.db, args.max_increase_mha, args.allow_new)
    if args.verbosity >= 0:
        print("\n".join(baseline_lines(comparison.to_dict())))
    print("comparison " + ("passed" if comparison.passed else "failed: " + "; ".join(comparison.problems())))
    return 0 if comparison.passed else 1


def add_runs(sub) -> None:
    p = sub.add_parser("runs", help="stored runs, newest first: id, date, suite, methods, verdicts, commit")
    p.add_argument("--limit", type=int, default=None, help="at most this many runs (default all)")
    add_format(p)
    add_db(p)


def run_runs(args) -> int:
    from benchsuite.api import list_runs
    from benchsuite.report.runs import runs_json, runs_table

    if args.limit is not None and args.limit < 1:
        raise InputError("must be positive", field="--limit")
    summaries = list_runs(args.db, args.limit)
    print(runs_json(summaries) if args.format == "json" else runs_table(summaries))
    return 0


def add_export(sub) -> None:
    p = sub.add_parser("export", help="a stored run's results as CSV, Parquet or JSON")
    p.add_argument("run_id", metavar="RUN_ID", help="run id, unique prefix or 'latest'")
    add_format(p, ("csv", "parquet", "json"), "csv")
    p.add_argument("--out", type=Path, default=None, help="file to write (default stdout; parquet needs --out)")
    add_db(p)


def run_export(args) -> int:
    from benchsuite.api import export_run

    export_run(args.run_id, args.format, args.out, args.db)
    return 0
