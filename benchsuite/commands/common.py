"""Arguments and helpers shared by the commands."""

from __future__ import annotations

import argparse
import json
import math
import sys
from pathlib import Path

#: ``args.verbosity``: -1 quiet (results only), 0 normal, 1 verbose (settings and their sources).
QUIET, NORMAL, VERBOSE = -1, 0, 1


def finite_float(text: str) -> float:
    """argparse type: a finite number (NaN, inf and overflow such as 1e400 are refused)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"must be finite, got {text!r}")
    return value


def add_case_sources(p: argparse.ArgumentParser) -> None:
    p.add_argument("--cases", action="append", type=Path, default=[], metavar="DIR",
                   help="directory of extra case files, merged with the built-in registry (repeatable)")
    p.add_argument("--case-file", action="append", type=Path, default=[], metavar="FILE",
                   help="one extra case file (repeatable)")


def add_cache(p: argparse.ArgumentParser, no_cache: bool = True) -> None:
    p.add_argument("--cache-dir", type=Path, default=None,
                   help="reference cache directory (default $BENCHSUITE_CACHE, [tool.benchsuite] cache_dir, "
                        "or .benchsuite/cache)")
    if no_cache:
        p.add_argument("--no-cache", action="store_true", help="neither read nor write the cache")


def add_db(p: argparse.ArgumentParser) -> None:
    p.add_argument("--db", type=Path, default=None,
                   help="results database (default $BENCHSUITE_DB, [tool.benchsuite] db, "
                        "or .benchsuite/results.sqlite)")


def add_format(p: argparse.ArgumentParser, choices=("table", "json"), default: str = "table") -> None:
    p.add_argument("--format", choices=choices, default=default,
                   help=f"output format: {', '.join(choices)} (default {default})")


def add_encoding(p: argparse.ArgumentParser) -> None:
    p.add_argument("--encoding", default="jordan-wigner",
                   help="jordan-wigner | bravyi-kitaev | parity (default jordan-wigner)")
    p.add_argument("--ordering", default="interleaved",
                   help="spin-orbital order: interleaved = a0 b0 a1 b1 ..., blocked = all alpha then all beta "
                        "(default interleaved)")
    p.add_argument("--taper", action="store_true", help="Z2-taper in the Hartree-Fock sector")
    p.add_argument("--drop-spin-parity-qubits", action="store_true",
                   help="parity encoding, blocked ordering only: drop the N_alpha and N parity qubits")


def add_baseline_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--max-increase-mha", type=finite_float, default=None,
                   help="|error| growth counted as a regression (default 0.1 mHa)")
    p.add_argument("--allow-new", action="store_true",
                   help="tasks absent from the baseline do not fail the comparison")


def load_registry(args):
    from benchsuite.api import load_registry as load

    return load(args.cases, args.case_file)


def cache_dir(args) -> Path | None:
    """The cache directory of the command (None with ``--no-cache``)."""
    from benchsuite.chem.cache import default_cache_dir

    if getattr(args, "no_cache", False):
        return None
    return args.cache_dir or default_cache_dir()


def print_json(obj) -> None:
    json.dump(obj, sys.stdout, indent=2, allow_nan=False, default=str)
    sys.stdout.write("\n")


def fmt(x, spec: str) -> str:
    """``x`` formatted with ``spec``, or an empty string for None."""
    return "" if x is None else format(x, spec)
