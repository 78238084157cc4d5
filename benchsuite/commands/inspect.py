"""``benchsuite cases``, ``references`` and ``methods``: what the registry and the plugins hold."""

from __future__ import annotations

import sys

from benchsuite.commands.common import (add_cache, add_case_sources, add_format, cache_dir, fmt,
                                        load_registry, print_json)
from benchsuite.report.terminal import fixed_table


def add_cases(sub) -> None:
    p = sub.add_parser("cases", help="list the registry's cases (or one suite's)")
    p.add_argument("--suite", help="only this suite's cases")
    add_case_sources(p)
    add_format(p)


def run_cases(args) -> int:
    from benchsuite.api import case_records

    reg = load_registry(args)
    records = case_records(reg, args.suite)
    if args.format == "json":
        print_json(records)
        return 0
    rows = [[r["name"], r["formula"], r["charge"], r["multiplicity"], r["basis"], r["space"],
             ",".join(r["tags"]), r["geometry_source"]] for r in records]
    print(fixed_table(["case", "formula", "charge", "mult", "basis", "space", "tags", "geometry"], rows,
                      "llrrllll"))
    if args.verbosity >= 0:
        print(f"\n{len(records)} case(s)" + (f" in suite {args.suite!r}" if args.suite else "")
              + f"; suites: {', '.join(sorted(reg.suites))}")
    return 0


def add_references(sub) -> None:
    p = sub.add_parser("references", help="the classical reference ladder of one or more cases")
    p.add_argument("case", nargs="*", metavar="CASE", help="case name(s); a scan name means every point")
    p.add_argument("--suite", help="every case of this suite")
    p.add_argument("--basis", help="basis label (default: the case's first basis, or the suite's)")
    p.add_argument("--scf", choices=("rhf", "rohf", "uhf"), default=None,
                   help="SCF kind (default RHF for closed shells, ROHF for open shells); "
                        "uhf adds UHF-based rungs beside the restricted ones")
    p.add_argument("--max-determinants", type=int, default=None,
                   help="skip FCI/CASCI above this many determinants (default 5,000,000)")
    add_case_sources(p)
    add_cache(p)
    add_format(p)


def run_references(args) -> int:
    from benchsuite.api import reference_ladders

    reg = load_registry(args)
    ladders = []
    for ladder in reference_ladders(args.case, args.suite, args.basis, args.scf, args.max_determinants,
                                    cache_dir(args), reg, no_cache=args.no_cache):
        ladders.append(ladder)
        if args.format == "table":
            print(render_ladder(ladder, reg.bib, args.verbosity))
            print()
            sys.stdout.flush()
    if args.format == "json":
        docs = [lad.to_json() for lad in ladders]
        print_json(docs[0] if len(docs) == 1 and not args.suite else docs)
    return 0


def _published_table(ladder, bib: dict) -> str:
    rows = []
    for p in ladder.published:
        mine = ladder.rung(p.method)
        diff = None if mine is None or mine.energy_ha is None else 1000 * (mine.energy_ha - p.energy_ha)
        entry = bib.get(p.source)
        rows.append([p.method, p.basis, fmt(p.energy_ha, ".10f"), fmt(diff, "+.4f"),
                     p.source + (f" ({entry.short()})" if entry else ""),
                     "from memory" if p.from_memory else "checked", p.note])
    return fixed_table(["rung", "basis", "energy / Eh", "computed - published / mHa", "source", "", "note"],
                       rows, "llrrlll")


def render_ladder(ladder, bib: dict, verbosity: int = 0) -> str:
    """Human-readable ladder with the published values beside the computed ones (quiet: rungs only)."""
    s, scf = ladder.space, ladder.scf
    state = ("converged" if scf.converged else "NOT CONVERGED") + ", " + (
        "stable" if scf.stable else "UNSTABLE")
    ext = "" if scf.stable_external is None else (
        "; RHF->UHF stable" if scf.stable_external else "; RHF->UHF unstable (expected at stretched bonds)")
    head = [f"{ladder.case}  basis {ladder.basis}  {s.label}  multiplicity {ladder.multiplicity}",
            f"SCF {scf.method.upper()} {state} after {scf.attempts} attempt(s), {scf.iterations} cycles"
            f"{ext}; cache {ladder.cache_status}"]
    rows = [[r.method, fmt(r.energy_ha, ".10f"),
             fmt(None if r.correlation_ha is None else 1000 * r.correlation_ha, ".4f"),
             fmt(r.s2, ".6f"), fmt(r.n_determinants, ","), fmt(r.seconds, ".2f"), r.status, r.note]
            for r in ladder.rungs]
    body = fixed_table(["rung", "energy / Eh", "E_corr / mHa", "<S^2>", "determinants", "seconds",
                        "status", "note"], rows, "lrrrrrll")
    out = head[:1] + [body] if verbosity < 0 else head + [body]
    if ladder.published and verbosity >= 0:
        out += ["published values:", _published_table(ladder, bib)]
    if ladder.flags:
        out += ["FLAGS: " + " | ".join(ladder.flags)]
    return "\n".join(out)


def add_methods(sub) -> None:
    p = sub.add_parser("methods", help="list methods under test (built-in and plugins) with their options")
    add_format(p)


def run_methods(args) -> int:
    from benchsuite.api import method_records

    records, failures = method_records()
    if args.format == "json":
        print_json({"methods": records, "broken_plugins": failures})
        return 0
    for r in records:
        kind = ", ".join(k for k in ("variational", "stochastic") if r[k]) or "deterministic"
        print(f"{r['name']}  ({kind})\n    {r['description']}")
        for o in r["options"] if args.verbosity >= 0 else ():
            choices = f" one of {o['choices']}" if "choices" in o else ""
            print(f"    --option {o['name']}=<{o['type']}>  default {o['default']!r}{choices}  {o['help']}")
    for f in failures:
        print(f"BROKEN PLUGIN {f['name']} ({f['origin']}): {f['reason']}")
    return 0
