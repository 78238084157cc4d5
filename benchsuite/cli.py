"""Command line: ``benchsuite [-v|-q] <command> ...`` -- parses arguments, calls one function, prints.

Exit codes: 0 success; 1 the job ran and found a failure; 2 usage or input
error (the message names the file and field; nothing is computed or cached);
3 internal error (the traceback goes to a crash note named on stderr);
128 + signal when a run is stopped.

The commands live in :mod:`benchsuite.commands` (``add_<name>`` / ``run_<name>``
pairs registered in :data:`COMMANDS`).  Defaults of ``--db``, ``--cache-dir``,
``--workers``, ``--timeout-s``, ``--max-memory-mb`` and the project threshold
come from the command line, then ``BENCHSUITE_*`` variables, then
``[tool.benchsuite]`` in the nearest ``pyproject.toml``, then the built-in
defaults (:mod:`benchsuite.defaults`).  ``-v`` adds detail (the settings and
where each came from, on stderr); ``-q`` prints results only (no progress, a
one-line gate decision).
"""

from __future__ import annotations

import argparse
import sys

from benchsuite.commands import gate, hamiltonian, inspect, outputs, solve
from benchsuite.commands.external import COMMANDS as EXTERNAL_COMMANDS
from benchsuite.errors import InputError

COMMANDS = {
    "cases": (inspect.add_cases, inspect.run_cases),
    "references": (inspect.add_references, inspect.run_references),
    "hamiltonian": (hamiltonian.add_hamiltonian, hamiltonian.run_hamiltonian),
    "methods": (inspect.add_methods, inspect.run_methods),
    "solve": (solve.add_solve, solve.run_solve),
    "run": (gate.add_run, gate.run_run),
    "compare": (gate.add_compare, gate.run_compare),
    "runs": (gate.add_runs, gate.run_runs),
    "export": (gate.add_export, gate.run_export),
    "report": (outputs.add_report, outputs.run_report),
    "table": (outputs.add_table, outputs.run_table),
}
COMMANDS.update(EXTERNAL_COMMANDS)         # problem, score: energies computed elsewhere

#: argument attribute -> key of :data:`benchsuite.defaults.KEYS` filled in when not given.
DEFAULTED = {"db": "db", "cache_dir": "cache_dir", "workers": "workers", "timeout_s": "timeout_s",
             "max_memory_mb": "max_memory_mb"}


def _verbosity_options(p: argparse.ArgumentParser, suppress: bool) -> None:
    """``-v`` / ``-q``, accepted before or after the command name."""
    default = argparse.SUPPRESS if suppress else 0
    p.add_argument("-v", "--verbose", action="count", default=default,
                   help="more terminal output: the settings in force and where each came from")
    p.add_argument("-q", "--quiet", action="count", default=default,
                   help="less terminal output: results only, no progress")


class _Sub(argparse._SubParsersAction):
    """Sub-command parsers that accept -v/-q too."""

    def add_parser(self, name, **kwargs):
        parser = super().add_parser(name, **kwargs)
        _verbosity_options(parser, suppress=True)
        return parser


def build_parser() -> argparse.ArgumentParser:
    from benchsuite import __version__

    parser = argparse.ArgumentParser(
        prog="benchsuite",
        description="Accuracy gate for qubit-based quantum-chemistry solvers against classical references.")
    parser.add_argument("--version", action="version", version=f"benchsuite {__version__}")
    _verbosity_options(parser, suppress=False)
    parser.register("action", "parsers", _Sub)
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for add, _ in COMMANDS.values():
        add(sub)
    return parser


def apply_defaults(args) -> dict:
    """Fill the arguments left unset from the environment and ``[tool.benchsuite]``; returns the
    resolved settings (:class:`benchsuite.defaults.Setting` by key) of this command."""
    from benchsuite.defaults import Setting, resolve_defaults

    used = [attr for attr in DEFAULTED if hasattr(args, attr)]
    wants_threshold = hasattr(args, "threshold_mha")
    if not used and not wants_threshold:
        return {}
    resolved = resolve_defaults()
    shown = {}
    for attr in used:
        value = getattr(args, attr)
        shown[attr] = Setting(value, "command line") if value is not None else resolved[DEFAULTED[attr]]
        setattr(args, attr, shown[attr].value)
    if wants_threshold:
        args.project_threshold = resolved["threshold_mha"]
        shown["threshold_mha"] = (Setting(args.threshold_mha, "command line") if args.threshold_mha is not None
                                  else args.project_threshold)
    return shown


def _show_settings(settings: dict) -> None:
    for key, s in settings.items():
        value = "(built-in default)" if s.value is None else s.value
        print(f"benchsuite: {key} = {value}  [{s.source}]", file=sys.stderr)


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


def _dispatch(args) -> int:
    args.verbosity = max(-1, min(1, args.verbose - args.quiet))
    settings = apply_defaults(args)
    if args.verbosity > 0:
        _show_settings(settings)
    return COMMANDS[args.command][1](args)


def main(argv: list[str] | None = None) -> int:
    """Exit codes: 0 passed, 1 the gate (or comparison) failed, 2 input or usage error,
    3 internal error (the traceback is written to a file named on stderr), 128 + signal when stopped."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return _dispatch(args)
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
