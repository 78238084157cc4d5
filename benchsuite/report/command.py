"""Command-line glue for ``benchsuite report`` and ``benchsuite table``.

``benchsuite report RUN_ID --out FILE.html`` writes the one-file HTML report
(:mod:`benchsuite.report.html`); ``run --report FILE.html`` does the same at
the end of a run through :func:`write_report`.  ``benchsuite table RUN_ID
--format latex|markdown|csv [--columns a,b,...] [--bib FILE] [--out FILE]``
prints or writes a publication table (:mod:`benchsuite.report.tables`).

RUN_ID is a full run id, a unique prefix of one, or ``latest`` (the latest
complete run).  Both commands exit 0 once the file is written -- whatever the
gate found, which the report itself states -- and 2 on usage or input errors.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from benchsuite.report.html import write_report

__all__ = ["add_report_arguments", "add_table_arguments", "run_report", "run_table", "write_report"]


def _add_common(p: argparse.ArgumentParser) -> None:
    p.add_argument("run_id", metavar="RUN_ID", help="run id, a unique prefix of one, or 'latest'")
    p.add_argument("--db", type=Path, default=None, help="results database (default .benchsuite/results.sqlite)")
    p.add_argument("--cases", action="append", type=Path, default=[], metavar="DIR",
                   help="extra case directory the run used (for its bibliography; repeatable)")
    p.add_argument("--case-file", action="append", type=Path, default=[], metavar="FILE",
                   help="extra case file the run used (repeatable)")


def add_report_arguments(p: argparse.ArgumentParser) -> None:
    _add_common(p)
    p.add_argument("--out", type=Path, required=True, metavar="FILE.html", help="the HTML file to write")
    p.add_argument("--title", default=None, help="page title (default: the methods and the suite or cases, e.g. 'exact-sector and "
                        "tallowick on the smoke suite')")


def add_table_arguments(p: argparse.ArgumentParser) -> None:
    from benchsuite.report.tables import COLUMNS, DEFAULT_COLUMNS, FORMATS

    _add_common(p)
    p.add_argument("--format", choices=FORMATS, default="markdown")
    p.add_argument("--columns", default=None, metavar="A,B,...",
                   help=f"comma-separated, from: {', '.join(COLUMNS)} (default {','.join(DEFAULT_COLUMNS)}; "
                        "csv adds threshold,run,results_hash)")
    p.add_argument("--bib", type=Path, default=None, metavar="FILE", help="also write the cited BibTeX entries")
    p.add_argument("--out", type=Path, default=None, metavar="FILE", help="write the table here (default stdout)")


def _open(args):
    from benchsuite.registry import Registry
    from benchsuite.store.db import ResultStore, default_db_path

    store = ResultStore.open(args.db or default_db_path(), create=False)
    try:
        run_id = store.resolve_run_id(args.run_id)
        registry = Registry.load(case_dirs=args.cases, case_files=args.case_file)
    except BaseException:
        store.close()
        raise
    return store, run_id, registry


def _write_text(path: Path, text: str) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")


def run_report(args) -> int:
    store, run_id, registry = _open(args)
    with store:
        out = write_report(store, run_id, args.out, registry, args.title)
        run = store.get_run(run_id)
    gate = (run.summary or {}).get("gate")
    verdict = "" if gate is None else (": gate passed" if gate["passed"] else
                                       ": gate failed, " + "; ".join(gate["reasons"]))
    print(f"wrote {out} ({out.stat().st_size:,} bytes) for run {run_id}{verdict}")
    return 0


def run_table(args) -> int:
    from benchsuite.report.tables import bibtex_for, render_table

    store, run_id, registry = _open(args)
    with store:
        run, rows = store.get_run(run_id), store.results(run_id)
    text, table = render_table(run, rows, args.format, args.columns, registry)
    if args.out is None:
        sys.stdout.write(text)
    else:
        _write_text(args.out, text)
        print(f"wrote {args.out}: {len(table.values)} row(s), run {run_id}, results hash {table.results_hash}")
    if args.bib is not None:
        _write_text(args.bib, bibtex_for(table.keys, registry))
        msg = f"wrote {args.bib}: {len(table.keys)} BibTeX entr{'y' if len(table.keys) == 1 else 'ies'}"
        print(msg, file=sys.stderr if args.out is None else sys.stdout)
    return 0
