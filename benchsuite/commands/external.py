"""Commands for work done outside benchsuite: ``benchsuite problem`` and ``benchsuite score``.

``benchsuite problem CASE [--basis B] [--encoding E --ordering O --taper --drop-spin-parity-qubits]
--format fcidump|pauli-json|openfermion -o FILE`` writes the exact problem a method sees, with its
fingerprint (inside the JSON, else in ``FILE.fingerprint.json``); ``openfermion`` files must end in
``.data`` (OpenFermion's ``load_operator`` appends it).  Exit 0, or 2 on bad input.

``benchsuite score FILE [--format csv|json|parquet] [--db F] [--threshold-mha X] [--confidence C]
[--multiple-testing holm|bh] [--suite S] [--baseline RUN] [--report F.html] [--json F] [--junit F]``
judges every row of a results file as the gate judges its own methods and stores the run
(:mod:`benchsuite.gate.external`).  Exit 0 the gate passed, 1 it failed (a rejected row fails it),
2 the file or an option is bad (nothing stored).

:data:`COMMANDS` maps each name to ``(add_arguments(subparsers), handler(args) -> exit code)``;
:func:`add_commands` registers them all.
"""

from __future__ import annotations

import argparse
from pathlib import Path


def _add_sources(p: argparse.ArgumentParser) -> None:
    p.add_argument("--cases", action="append", type=Path, default=[], metavar="DIR",
                   help="directory of extra case files (repeatable)")
    p.add_argument("--case-file", action="append", type=Path, default=[], metavar="FILE",
                   help="one extra case file (repeatable)")
    p.add_argument("--cache-dir", type=Path, default=None,
                   help="cache directory (default $BENCHSUITE_CACHE or .benchsuite/cache)")


def add_problem(sub) -> None:
    from benchsuite.methods.export import FORMATS

    p = sub.add_parser("problem", help="write a case's exact problem (FCIDUMP, Pauli JSON, OpenFermion) "
                                       "with its fingerprint")
    p.add_argument("case", metavar="CASE", help="case name (see `benchsuite cases`)")
    p.add_argument("--basis", default=None, help="basis label (default the case's first)")
    p.add_argument("--encoding", default="jordan-wigner", help="jordan-wigner, bravyi-kitaev or parity")
    p.add_argument("--ordering", default="interleaved", help="interleaved or blocked")
    p.add_argument("--taper", action="store_true", help="Z2-taper in the Hartree-Fock sector")
    p.add_argument("--drop-spin-parity-qubits", action="store_true", help="parity + blocked only")
    p.add_argument("--format", choices=FORMATS, default="pauli-json",
                   help=f"file format: {', '.join(FORMATS)} (default pauli-json)")
    p.add_argument("-o", "--out", type=Path, required=True, metavar="FILE", help="the file to write")
    _add_sources(p)


def run_problem(args) -> int:
    from benchsuite import api

    registry = api.load_registry(args.cases, args.case_file)
    result = api.export_problem(args.case, args.basis, encoding=args.encoding, ordering=args.ordering,
                                taper=args.taper, drop_spin_parity_qubits=args.drop_spin_parity_qubits, fmt=args.format,
                                path=args.out, cache_dir=args.cache_dir, registry=registry)
    print(f"wrote {', '.join(str(p) for p in result.paths)}: {args.case} ({result.export.format}), "
          f"fingerprint {result.export.fingerprint.token}")
    return 0


def add_score(sub) -> None:
    from benchsuite.scoring import MULTIPLE_TESTING

    p = sub.add_parser("score", help="judge a file of energies computed elsewhere and store it as a run")
    p.add_argument("file", type=Path, metavar="FILE", help="results file: .csv, .json or .parquet")
    p.add_argument("--format", choices=("csv", "json", "parquet"), default=None, help="default: from the suffix")
    p.add_argument("--db", type=Path, default=None, help="results database (default .benchsuite/results.sqlite)")
    p.add_argument("--threshold-mha", type=float, default=None, help="override every case's threshold (mHa)")
    p.add_argument("--confidence", type=float, default=0.95,
                   help="confidence for stochastic verdicts (default 0.95)")
    p.add_argument("--multiple-testing", choices=MULTIPLE_TESTING, default="holm",
                   help="control of the run's stochastic fail claims: holm (default) or bh")
    p.add_argument("--allow-inconclusive", action="store_true", help="inconclusive does not fail the gate")
    p.add_argument("--require-converged", action="store_true",
                   help="a row marked not converged fails the gate (verdict unconverged)")
    p.add_argument("--suite", default=None, help="take the suite's threshold where a case has none")
    p.add_argument("--baseline", default=None, metavar="RUN_ID", help="compare with this run (id, prefix, latest)")
    p.add_argument("--max-increase-mha", type=float, default=None,
                   help="|error| growth counted as a regression (default 0.1 mHa)")
    p.add_argument("--allow-new", action="store_true",
                   help="tasks absent from the baseline do not fail the comparison")
    p.add_argument("--report", type=Path, default=None, metavar="FILE.html", help="write the one-file HTML report")
    p.add_argument("--json", type=Path, default=None, metavar="FILE.json",
                   help="write the run record and every result")
    p.add_argument("--junit", type=Path, default=None, metavar="FILE.xml", help="write JUnit XML")
    _add_sources(p)


def run_score(args) -> int:
    from benchsuite import api
    from benchsuite.gate.plan import RunSettings

    settings = RunSettings(threshold_mha=args.threshold_mha, confidence=args.confidence,
                           multiple_testing=args.multiple_testing, allow_inconclusive=args.allow_inconclusive,
                           require_converged=args.require_converged)
    score = api.score_external(args.file, fmt=args.format, db=args.db, settings=settings, suite=args.suite,
                               baseline=args.baseline, max_increase_mha=args.max_increase_mha,
                               allow_new=args.allow_new, report=args.report, json_path=args.json,
                               junit=args.junit, case_dirs=args.cases, case_files=args.case_file,
                               cache_dir=args.cache_dir)
    print(render_score(score))
    return score.decision.exit_code


def render_score(score) -> str:
    """The terminal text of a scored file: the file, rejected rows, curve statistics, the gate summary."""
    from benchsuite.gate.external import UNVERIFIED, curve_table, unverified
    from benchsuite.report.terminal import render_summary

    t = score.table
    lines = [f"{t.path} ({t.format}, sha256 {t.sha256}): {len(t.records)} row(s), {len(score.rows)} scored, "
             f"{len(score.errors)} rejected, {score.n_unverified} unverified problem(s) (no fingerprint)"]
    lines += [f"  rejected {e.text}" for e in score.errors]
    lines += [f"  {UNVERIFIED} (no fingerprint): row {r.metadata.get('external_row')}, {r.method} on {r.case} "
              f"({r.basis})" for r in score.rows if unverified(r)]
    lines += curve_table(score.rows)
    lines.append(render_summary(score.run, score.rows, score.decision.to_dict()))
    return "\n".join(lines)


COMMANDS = {"problem": (add_problem, run_problem), "score": (add_score, run_score)}


def add_commands(subparsers) -> dict:
    """Register ``problem`` and ``score``; returns ``{name: handler}``."""
    for add, _ in COMMANDS.values():
        add(subparsers)
    return {name: handler for name, (_, handler) in COMMANDS.items()}

