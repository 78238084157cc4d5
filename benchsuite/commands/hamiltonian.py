"""``benchsuite hamiltonian CASE``: the qubit Hamiltonian of a registry case.

Every option is checked before any SCF or encoding work (bad input:
:class:`~benchsuite.errors.InputError`, exit 2).  The case is built by the
same builder the methods get their problem from
(:func:`benchsuite.methods.problem.encode_case`), its record by
:func:`benchsuite.qubit.summary.hamiltonian_document`; this module adds the
case fields (``case``, ``basis``, ``space``, ``scf_method``, ``scf_energy_ha``)
and the timings (``build_seconds``: the encoding step alone, integrals
excluded; ``reduction_seconds``: reductions and tapering), and prints.
With ``--taper`` the Z2 sector is the Hartree-Fock state's, or with
``--taper-sector lowest`` the one holding the lowest (N, S_z) state.
"""

from __future__ import annotations

import argparse
import json
import sys

from benchsuite.commands.common import add_cache, add_case_sources, cache_dir, finite_float, load_registry
from benchsuite.errors import InputError
from benchsuite.qubit.encodings import ENCODINGS, ORDERINGS

#: Largest terms listed in text output unless ``--terms`` says otherwise.
TEXT_TERMS = 20


def add_hamiltonian(sub) -> None:
    p = sub.add_parser("hamiltonian", help="a case's qubit Hamiltonian: Pauli terms, HF bitstring, metrics")
    _add_register(p)
    p.add_argument("--exact", action="store_true",
                   help="also diagonalise in the reference's (N, S_z) sector (and, with --taper, "
                        "check the tapered sector against the untapered one)")
    p.add_argument("--roots", type=int, default=1, help="roots for --exact (default 1)")
    p.add_argument("--max-exact-qubits", type=int, default=None,
                   help="refuse --exact and --taper-sector lowest above this many qubits before "
                        "reductions (default 24)")
    p.add_argument("--epsilon-mha", type=finite_float, default=None,
                   help="target standard error for the shot estimate, mHa (default 1.594, 1 kcal/mol)")
    p.add_argument("--terms", type=int, default=TEXT_TERMS,
                   help=f"text output: list this many largest terms, 0 for all (default {TEXT_TERMS})")
    p.add_argument("--format", choices=("json", "text"), default="json", help="output format (default json)")
    add_case_sources(p)
    add_cache(p)


def _add_register(p: argparse.ArgumentParser) -> None:
    p.add_argument("case", metavar="CASE", help="case name (see `benchsuite cases`)")
    p.add_argument("--basis", help="basis label (default: the case's first basis)")
    p.add_argument("--encoding", default="jordan-wigner", metavar="|".join(ENCODINGS),
                   help="fermion-to-qubit encoding (default jordan-wigner)")
    p.add_argument("--ordering", default="interleaved", metavar="|".join(ORDERINGS),
                   help="spin-orbital order: interleaved = a0 b0 a1 b1 ..., blocked = all alpha "
                        "then all beta (default interleaved)")
    p.add_argument("--taper", action="store_true",
                   help="remove one qubit per Z2 symmetry, in the Hartree-Fock state's sector")
    p.add_argument("--taper-sector", default="hf", metavar="hf|lowest",
                   help="with --taper: the Hartree-Fock state's Z2 sector (default), or the sector "
                        "holding the lowest (N, S_z) state (found by exact diagonalisation)")
    p.add_argument("--drop-spin-parity-qubits", action="store_true",
                   help="parity encoding only, blocked ordering: drop the N_alpha and N parity qubits")


def check_options(args) -> None:
    """Everything about the options that can be wrong, before any work."""
    if args.taper_sector not in ("hf", "lowest"):
        raise InputError(f"unknown tapering sector {args.taper_sector!r}; choose hf or lowest",
                         field="--taper-sector")
    if args.taper_sector != "hf" and not args.taper:
        raise InputError("--taper-sector needs --taper", field="--taper-sector")
    if args.roots < 1:
        raise InputError("must be at least 1", field="--roots")
    if args.max_exact_qubits is not None and args.max_exact_qubits < 1:
        raise InputError("must be positive", field="--max-exact-qubits")
    if args.epsilon_mha is not None and not args.epsilon_mha > 0:
        raise InputError("must be positive", field="--epsilon-mha")
    if args.terms < 0:
        raise InputError("must be 0 (all) or positive", field="--terms")


def run_hamiltonian(args) -> int:
    from benchsuite.chem.cache import DiskCache
    from benchsuite.constants import CHEMICAL_ACCURACY_MHA
    from benchsuite.methods.problem import Encoding, check_case_register, encode_case
    from benchsuite.qubit.sector import check_qubit_limit
    from benchsuite.qubit.summary import hamiltonian_document

    enc = Encoding(args.encoding, args.ordering, args.taper, args.drop_spin_parity_qubits).check()
    check_options(args)
    case = load_registry(args).case(args.case)
    prep = check_case_register(case, args.basis, enc)
    if args.exact or args.taper_sector == "lowest":
        check_qubit_limit(2 * prep.space.n_orbitals, args.max_exact_qubits)
    built = encode_case(case, prep, enc, DiskCache(cache_dir(args)), args.taper_sector, args.max_exact_qubits)
    eps_mha = args.epsilon_mha if args.epsilon_mha is not None else CHEMICAL_ACCURACY_MHA
    doc = {"case": case.name, "basis": prep.basis.label, "space": built.space.label,
           "scf_method": built.scf.method, "scf_energy_ha": built.scf.energy_ha,
           **hamiltonian_document(built.hamiltonian, built.full, eps_mha / 1000.0, args.exact, args.roots,
                                  args.max_exact_qubits),
           "build_seconds": built.build_seconds, "reduction_seconds": built.reduction_seconds}
    if args.format == "json":
        json.dump(doc, sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
    else:
        print(render_text(doc, args.terms))
    return 0


def _or_dash(value, spec: str = "") -> str:
    """``value`` formatted with ``spec``, or "-" where it was not computed (None)."""
    return "-" if value is None else format(value, spec)


def render_text(doc: dict, n_terms: int) -> str:
    m = doc["metrics"]
    shots = m["shots"]
    lines = [
        f"{doc['case']}  basis {doc['basis']}  {doc['space']}",
        f"encoding {doc['encoding']}, ordering {doc['ordering']} ({doc['conventions']['ordering_meaning']})",
        f"qubits {doc['n_qubits']} (before reductions {m['n_qubits_before_reductions']}), "
        f"electrons {doc['n_electrons']} ({doc['n_alpha']} alpha, {doc['n_beta']} beta)",
        f"constant (identity) {doc['constant_ha']:.10f} Eh",
        f"HF bitstring (qubit 0 first) {doc['hf_bitstring']}  energy {doc['hf_energy_ha']:.10f} Eh; "
        f"SCF ({doc['scf_method']}) {doc['scf_energy_ha']:.10f} Eh",
        f"Pauli terms {m['n_terms']}, 1-norm {m['one_norm_ha']:.6f} Eh ({m['one_norm_definition']})",
        f"QWC groups {_or_dash(m['qwc_groups'])} ({m['grouping_method']})",
        f"shots for eps = {1000 * shots['epsilon_ha']:.4f} mHa on the {shots['state']} state: "
        f"{shots['no_grouping']:.4g} ungrouped, {_or_dash(shots['with_grouping'], '.4g')} grouped, "
        f"bound {shots['upper_bound']:.4g}",
        f"build {doc['build_seconds']:.3f} s (encoding only), reductions {doc['reduction_seconds']:.3f} s",
    ]
    for red in doc["conventions"]["reductions"]:
        lines.append(f"reduction {red['kind']}: removed qubits {red['removed_qubits']}, generators "
                     f"{red['generators']}, eigenvalues {red['eigenvalues']}")
    if "exact" in doc:
        ex = doc["exact"]
        energies = ", ".join(f"{e:.10f}" for e in ex["energies_ha"])
        s2 = "" if ex["spin_square"] is None else "  <S^2> " + ", ".join(f"{s:.6f}" for s in ex["spin_square"])
        lines.append(f"exact ({ex['n_alpha']} alpha, {ex['n_beta']} beta), dimension {ex['dimension']}, "
                     f"{ex['solver']}: {energies} Eh{s2}")
        if "reduced_minus_unreduced_ha" in ex:
            verdict = "holds" if ex["reduced_sector_holds_ground_state"] else "DOES NOT hold"
            lines.append(f"reduced sector {verdict} the declared-spin ground state: reduced - unreduced = "
                         f"{ex['reduced_minus_unreduced_ha']:+.3e} Eh")
    terms = sorted(doc["terms"], key=lambda t: -abs(t["coeff"]))
    shown = terms if n_terms == 0 else terms[:n_terms]
    lines.append(f"largest terms ({len(shown)} of {len(terms)}):")
    lines += [f"  {t['coeff']:+.10f}  {t['pauli']}" for t in shown]
    return "\n".join(lines)
