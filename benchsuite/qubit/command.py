"""``benchsuite hamiltonian CASE``: the qubit Hamiltonian of a registry case.

Registered in :mod:`benchsuite.cli` (``add_arguments`` + ``run``).  Every
option is checked before any SCF or encoding work; bad input raises
:class:`~benchsuite.errors.InputError` (exit code 2).

JSON output::

    {"case", "basis", "space", "encoding", "ordering", "n_qubits", "n_electrons",
     "n_alpha", "n_beta", "constant_ha", "terms": [{"pauli": "X0 Y1 Z3", "coeff": ...}],
     "hf_bitstring", "hf_energy_ha", "scf_energy_ha", "metrics": {...},
     "conventions": {...}, "build_seconds", "reduction_seconds", ["exact": {...}]}

With ``--taper`` the Z2 sector is the Hartree-Fock state's, or with
``--taper-sector lowest`` the one holding the lowest (N, S_z) state; with
``--exact`` the ``exact`` record says whether the reduced sector holds the
unreduced lowest state of the declared spin (``reduced_sector_holds_ground_state``).

``terms`` excludes the identity, whose coefficient is ``constant_ha`` (it
includes nuclear repulsion, the frozen-core energy and the identity part of
the encoded electronic operator).  ``build_seconds`` times the encoding step
alone (integrals excluded); ``reduction_seconds`` the two-qubit reduction and
tapering.  ``hf_bitstring`` is qubit 0 first.
"""

from __future__ import annotations

import argparse
import json
import sys
import time

from benchsuite.errors import InputError
from benchsuite.qubit.encodings import ENCODINGS, ORDERINGS, check_register
from benchsuite.qubit.pauli import MAX_QUBITS

#: Largest terms listed in text output unless ``--terms`` says otherwise.
TEXT_TERMS = 20


def add_arguments(p: argparse.ArgumentParser) -> None:
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
    p.add_argument("--two-qubit-reduction", action="store_true",
                   help="parity encoding only, blocked ordering: drop the N_alpha and N parity qubits")
    p.add_argument("--exact", action="store_true",
                   help="also diagonalise in the reference's (N, S_z) sector (and, with --taper, "
                        "check the tapered sector against the untapered one)")
    p.add_argument("--roots", type=int, default=1, help="roots for --exact (default 1)")
    p.add_argument("--max-exact-qubits", type=int, default=None,
                   help="refuse --exact and --taper-sector lowest above this many qubits before "
                        "reductions (default 24)")
    p.add_argument("--epsilon-mha", type=float, default=None,
                   help="target standard error for the shot estimate, mHa (default 1.594, 1 kcal/mol)")
    p.add_argument("--terms", type=int, default=TEXT_TERMS,
                   help=f"text output: list this many largest terms, 0 for all (default {TEXT_TERMS})")
    p.add_argument("--format", choices=("json", "text"), default="json")


def check_options(args) -> None:
    """Everything about the options that can be wrong, before any work."""
    check_register(args.encoding, args.ordering, args.two_qubit_reduction)
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


def run(args, registry, cache) -> int:
    from benchsuite.chem.space import case_integrals, prepare
    from benchsuite.qubit.sector import check_qubit_limit

    check_options(args)
    case = registry.case(args.case)
    prep = prepare(case, args.basis)
    n_qubits_full = 2 * prep.space.n_orbitals
    if n_qubits_full > MAX_QUBITS:
        raise InputError(f"{n_qubits_full} qubits needed; at most {MAX_QUBITS} are supported",
                         field="--basis")
    if args.exact or args.taper_sector == "lowest":
        check_qubit_limit(n_qubits_full, args.max_exact_qubits)
    ints, scf, space = case_integrals(case, prep.basis, cache=cache, prep=prep)
    doc = build_document(ints, args)
    doc = {"case": case.name, "basis": prep.basis.label, "space": space.label,
           "scf_method": scf.method, "scf_energy_ha": scf.energy_ha, **doc}
    if args.format == "json":
        json.dump(doc, sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
    else:
        print(render_text(doc, args.terms))
    return 0


def build_document(ints, args) -> dict:
    """The hamiltonian command's record for one set of integrals (no case fields)."""
    from benchsuite.constants import CHEMICAL_ACCURACY_MHA
    from benchsuite.qubit.hamiltonian import encode_integrals, two_qubit_reduction
    from benchsuite.qubit.metrics import resource_metrics
    from benchsuite.qubit.tapering import taper

    t0 = time.perf_counter()
    full = encode_integrals(ints, args.encoding, args.ordering)
    build_seconds = time.perf_counter() - t0
    t1 = time.perf_counter()
    ham = full
    if args.two_qubit_reduction:
        ham = two_qubit_reduction(ham)
    if args.taper:
        ham = taper(ham, args.taper_sector, max_qubits=args.max_exact_qubits)
    reduction_seconds = time.perf_counter() - t1
    eps_mha = args.epsilon_mha if args.epsilon_mha is not None else CHEMICAL_ACCURACY_MHA
    terms = [{"pauli": label, "coeff": float(coeff)} for label, coeff in ham.without_constant()]
    doc = {
        "encoding": ham.encoding, "ordering": ham.ordering, "n_qubits": ham.n_qubits,
        "n_electrons": ham.n_electrons, "n_alpha": ham.n_alpha, "n_beta": ham.n_beta,
        "constant_ha": ham.constant_ha, "terms": terms,
        "hf_bitstring": ham.hf_bitstring(), "hf_energy_ha": float(ham.basis_state_energy(ham.hf_state())),
        "metrics": resource_metrics(ham, epsilon_ha=eps_mha / 1000.0),
        "conventions": ham.conventions(), "notes": list(ham.notes),
        "build_seconds": build_seconds, "reduction_seconds": reduction_seconds,
    }
    if args.exact:
        doc["exact"] = exact_record(ham, full, args)
    return doc


def exact_record(ham, full, args) -> dict:
    from benchsuite.qubit.sector import sector_eigen

    t0 = time.perf_counter()
    res = sector_eigen(ham, n_roots=args.roots, max_qubits=args.max_exact_qubits)
    rec = {"n_alpha": res.n_alpha, "n_beta": res.n_beta, "dimension": res.dimension,
           "energies_ha": [float(e) for e in res.energies_ha],
           "spin_square": None if res.spin_square is None else [float(s) for s in res.spin_square],
           "solver": res.solver, "seconds": time.perf_counter() - t0}
    if ham.reductions:
        rec.update(reduced_sector_holds_ground_state(ham, full, res, args.max_exact_qubits))
    return rec


def reduced_sector_holds_ground_state(ham, full, reduced, max_qubits) -> dict:
    """Whether the reduced register holds the unreduced lowest state *of the declared spin*
    (multiplicity n_alpha - n_beta + 1, the reference determinant's S_z), within 1e-8 Eh.

    The reduced side is its lowest state of that spin too; where S^2 has no form on the
    reduced register it is the reduced lowest (N, S_z) state, which then must match.
    """
    from benchsuite.qubit.sector import sector_eigen

    multiplicity = ham.n_alpha - ham.n_beta + 1
    ref = sector_eigen(full, n_roots=1, max_qubits=max_qubits, multiplicity=multiplicity)
    try:
        mine = sector_eigen(ham, n_roots=1, max_qubits=max_qubits, multiplicity=multiplicity).ground_ha
        how = "declared spin on both registers"
    except ValueError:
        mine, how = reduced.ground_ha, "reduced side any spin (S^2 has no form on the reduced register)"
    delta = mine - ref.ground_ha
    return {"declared_multiplicity": multiplicity, "unreduced_ground_ha": ref.ground_ha,
            "reduced_minus_unreduced_ha": delta, "reduced_sector_holds_ground_state": bool(abs(delta) <= 1e-8),
            "ground_state_comparison": how}


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
        f"QWC groups {m['qwc_groups']} ({m['grouping_method']})",
        f"shots for eps = {1000 * shots['epsilon_ha']:.4f} mHa on the {shots['state']} state: "
        f"{shots['no_grouping']:.4g} ungrouped, {shots['with_grouping']:.4g} grouped, "
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
