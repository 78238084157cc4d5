"""``benchsuite solve CASE --method M``: one method on one case beside its FCI/CASCI reference."""

from __future__ import annotations

from benchsuite.commands.common import (add_cache, add_case_sources, add_encoding, add_format, cache_dir,
                                        finite_float, fmt, load_registry, print_json)
from benchsuite.report.terminal import fixed_table


def add_solve(sub) -> None:
    from benchsuite.commands.gate import add_shot_options

    p = sub.add_parser("solve", help="run one method on one case beside its FCI/CASCI reference")
    p.add_argument("case", metavar="CASE", help="case name (see `benchsuite cases`)")
    p.add_argument("--method", required=True, help="built-in name, entry-point name or package.module:attr")
    p.add_argument("--basis", help="basis label (default: the case's first basis)")
    add_encoding(p)
    p.add_argument("--option", action="append", default=[], metavar="KEY=VALUE",
                   help="method option (repeatable; see `benchsuite methods`)")
    p.add_argument("--seed", type=int, default=0, help="seed handed to the method (default 0)")
    p.add_argument("--timeout-s", type=finite_float, default=None,
                   help="stop the method after this many seconds (default $BENCHSUITE_TIMEOUT_S, "
                        "[tool.benchsuite] timeout_s, or 3600)")
    add_shot_options(p)
    add_case_sources(p)
    add_cache(p)
    add_format(p)


def solve_record(prepared, outcome) -> dict:
    """The ``solve --format json`` document (energies in Eh, error in mHa)."""
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


def run_solve(args) -> int:
    from benchsuite.api import solve
    from benchsuite.gate.plan import parse_key_values
    from benchsuite.methods.problem import Encoding

    reg = load_registry(args)
    options = parse_key_values(args.option, "--option")
    enc = Encoding(args.encoding, args.ordering, args.taper, args.drop_spin_parity_qubits)
    prepared, outcome = solve(reg.case(args.case), args.method, args.basis, enc, options, args.seed,
                              args.timeout_s, cache_dir(args), args.no_cache, reg,
                              shots=args.shots, shot_allocation=args.shot_allocation)
    record = solve_record(prepared, outcome)
    if args.format == "json":
        print_json(record)
    else:
        print(render_solve(record, args.verbosity))
    return 0 if outcome.status == "ok" else 1


def render_solve(r: dict, verbosity: int = 0) -> str:
    """The solve record as text; quiet: the energy table only."""
    ref = r["reference"]
    lines = [f"{r['case']}  basis {r['basis']}  {r['space']}  {r['encoding']}  {r['n_qubits']} qubits",
             fixed_table(["", "energy / Eh", "error / mHa", "status", "seconds"], [
                 [r["method"], fmt(r["energy_ha"], ".10f"), fmt(r["error_mha"], "+.4f"), r["status"],
                  fmt(r["seconds"], ".2f")],
                 [ref["method"] or "(no reference)", fmt(ref["energy_ha"], ".10f"), "", "", ""]], "lrrll")]
    if verbosity < 0:
        return lines[1]
    if r["stderr_ha"] is not None:
        lines.append(f"standard error {1000 * r['stderr_ha']:.4f} mHa")
    if r["resources"]:
        lines.append("resources: " + ", ".join(f"{k} {v}" for k, v in r["resources"].items()))
    if r["message"]:
        lines.append("message: " + r["message"].strip().splitlines()[0])
    if r["scf_flags"]:
        lines.append("SCF FLAGS: " + " | ".join(r["scf_flags"]))
    if verbosity > 0 and r["state_check"]:
        lines.append("state check: " + ", ".join(f"{k} {v}" for k, v in r["state_check"].items()))
    return "\n".join(lines)
