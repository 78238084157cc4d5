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
        pairs = []
        for name in args.case:
            matched = reg.select(name) if "@" not in name else [reg.case(name)]
            if not matched:
                reg.case(name)  # raises with suggestions
            pairs += [(c, c.basis(args.basis)) for c in matched]
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


COMMANDS = {
    "cases": (_add_cases, _run_cases),
    "references": (_add_references, _run_references),
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
