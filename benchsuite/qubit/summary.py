"""A qubit Hamiltonian as a plain record: terms, HF bitstring, metrics, conventions, exact energies.

The record ``benchsuite hamiltonian`` prints (:mod:`benchsuite.commands.hamiltonian`
adds the case fields and renders it)::

    {"encoding", "ordering", "n_qubits", "n_electrons", "n_alpha", "n_beta", "constant_ha",
     "terms": [{"pauli": "X0 Y1 Z3", "coeff": ...}], "hf_bitstring", "hf_energy_ha",
     "metrics": {...}, "conventions": {...}, "notes", ["exact": {...}]}

``terms`` excludes the identity, whose coefficient is ``constant_ha`` (it
includes nuclear repulsion, the frozen-core energy and the identity part of
the encoded electronic operator).  ``hf_bitstring`` is qubit 0 first.  With
``exact`` the record holds the lowest energies of the reference's (N, S_z)
sector and, after reductions, whether the reduced sector holds the unreduced
lowest state of the declared spin (``reduced_sector_holds_ground_state``).
Energies in hartree.
"""

from __future__ import annotations

import time


def hamiltonian_document(ham, full, epsilon_ha: float, exact: bool = False, n_roots: int = 1,
                         max_exact_qubits: int | None = None) -> dict:
    """The record of ``ham`` (reduced) built from ``full`` (unreduced); shot counts for a target
    standard error ``epsilon_ha`` (Eh)."""
    from benchsuite.qubit.metrics import resource_metrics

    terms = [{"pauli": label, "coeff": float(coeff)} for label, coeff in ham.without_constant()]
    doc = {
        "encoding": ham.encoding, "ordering": ham.ordering, "n_qubits": ham.n_qubits,
        "n_electrons": ham.n_electrons, "n_alpha": ham.n_alpha, "n_beta": ham.n_beta,
        "constant_ha": ham.constant_ha, "terms": terms,
        "hf_bitstring": ham.hf_bitstring(), "hf_energy_ha": float(ham.basis_state_energy(ham.hf_state())),
        "metrics": resource_metrics(ham, epsilon_ha=epsilon_ha),
        "conventions": ham.conventions(), "notes": list(ham.notes),
    }
    if exact:
        doc["exact"] = exact_record(ham, full, n_roots, max_exact_qubits)
    return doc


def exact_record(ham, full, n_roots: int = 1, max_qubits: int | None = None) -> dict:
    """Lowest ``n_roots`` energies (Eh) and <S^2> of ``ham``'s reference (N, S_z) sector."""
    from benchsuite.qubit.sector import sector_eigen

    t0 = time.perf_counter()
    res = sector_eigen(ham, n_roots=n_roots, max_qubits=max_qubits)
    rec = {"n_alpha": res.n_alpha, "n_beta": res.n_beta, "dimension": res.dimension,
           "energies_ha": [float(e) for e in res.energies_ha],
           "spin_square": None if res.spin_square is None else [float(s) for s in res.spin_square],
           "solver": res.solver, "seconds": time.perf_counter() - t0}
    if ham.reductions:
        rec.update(reduced_sector_holds_ground_state(ham, full, res, max_qubits))
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
