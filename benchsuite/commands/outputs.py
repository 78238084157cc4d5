"""``benchsuite report`` and ``table``: a stored run as one HTML file or a citable table.

The arguments and the work are :mod:`benchsuite.report.command`'s; here they
are registered, with help filled in for any argument that has none.
"""

from __future__ import annotations

#: Help for arguments :mod:`benchsuite.report.command` defines without one.
MISSING_HELP = {"--format": "table format: latex, markdown or csv (default markdown)"}


def _fill_help(p) -> None:
    for action in p._actions:
        for flag in action.option_strings:
            if action.help is None and flag in MISSING_HELP:
                action.help = MISSING_HELP[flag]


def add_report(sub) -> None:
    from benchsuite.report.command import add_report_arguments

    p = sub.add_parser("report", help="one self-contained HTML pass/fail report of a run")
    add_report_arguments(p)
    _fill_help(p)


def run_report(args) -> int:
    from benchsuite.report.command import run_report as write

    return write(args)


def add_table(sub) -> None:
    from benchsuite.report.command import add_table_arguments

    p = sub.add_parser("table", help="a citable table of a run: LaTeX, Markdown or CSV")
    add_table_arguments(p)
    _fill_help(p)


def run_table(args) -> int:
    from benchsuite.report.command import run_table as write

    return write(args)
