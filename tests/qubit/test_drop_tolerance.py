"""The Pauli drop tolerance: its rule, what it drops, and that it is recorded.

Outside references: OpenFermion's ``jordan_wigner`` of the same integrals (McClean et al.,
Quantum Sci. Technol. 5, 034014 (2020)) with its own term deletion off, truncated at the
same tolerance; PySCF's RHF without symmetry (Sun et al., WIREs Comput. Mol. Sci. 8,
e1340 (2018)) for orbitals that are not symmetry-adapted, whose symmetry-forbidden
integrals are numerical noise instead of zeros.
"""

from __future__ import annotations

import numpy as np
import pytest

from tests.qubit.reference import exact_openfermion, interaction_operator


def test_tolerance_is_the_scf_convergence_threshold():
    from benchsuite.chem.scf import CONV_TOL_HA
    from benchsuite.qubit.hamiltonian import QubitHamiltonian
    from benchsuite.qubit.majorana import DROP_TOLERANCE

    assert DROP_TOLERANCE == CONV_TOL_HA == 1e-10
    assert QubitHamiltonian.__dataclass_fields__["tolerance"].default == DROP_TOLERANCE


def test_dropped_one_norm_is_the_sum_of_what_was_dropped(case_ints):
    from benchsuite.qubit.hamiltonian import encode_integrals

    mo, _, _ = case_ints("h2o")
    full = encode_integrals(mo, tol=0.0).pauli
    tol = 1e-3
    ham = encode_integrals(mo, tol=tol)
    non_id = (full.x != 0) | (full.z != 0)
    small = non_id & (np.abs(full.coeffs) <= tol)
    assert np.count_nonzero(small) > 0
    assert len(ham.pauli) == len(full) - np.count_nonzero(small)
    assert ham.dropped_one_norm_ha == pytest.approx(float(np.abs(full.coeffs[small]).sum()), rel=1e-12)
    # the dropped 1-norm bounds every energy shift, e.g. the reference determinant's
    hf = ham.hf_state()
    shift = abs(ham.basis_state_energy(hf) - encode_integrals(mo, tol=0.0).basis_state_energy(hf))
    assert shift <= ham.dropped_one_norm_ha
    conv = ham.conventions()
    assert conv["drop_tolerance"] == tol and conv["dropped_one_norm_ha"] == ham.dropped_one_norm_ha
    assert "convergence" in conv["drop_tolerance_rule"]


def test_default_build_on_registry_orbitals_drops_nothing_measurable(case_ints):
    from benchsuite.qubit.hamiltonian import encode_integrals

    mo, _, _ = case_ints("n2")
    ham = encode_integrals(mo)
    assert ham.tolerance == 1e-10
    assert ham.dropped_one_norm_ha < 1e-8


def _plain_orbital_integrals():
    """N2/STO-3G (r = 1.09768 A, the registry geometry) from PySCF RHF without symmetry."""
    from pyscf import gto, scf

    from benchsuite.chem.integrals import build_mo_integrals

    mol = gto.M(atom="N 0 0 0; N 0 0 1.09768", basis="sto-3g", verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-10
    mf.kernel()
    return build_mo_integrals(mol, mf.mo_coeff, mf.mo_energy, 0, mol.nao)


@pytest.mark.slow
def test_noise_strings_on_unadapted_orbitals_match_openfermion_at_the_tolerance():
    """On orbitals that are not symmetry-adapted, strings between 1e-12 and 1e-10 Eh are
    noise; at 1e-10 our build keeps exactly OpenFermion's strings above 1e-10, and the
    Z2 count is the same on both (counted on OpenFermion's strings by GF(2) rank)."""
    import openfermion as of

    from benchsuite.qubit.hamiltonian import encode_integrals
    from benchsuite.qubit.tapering import find_symmetries
    from tests.outside.test_symmetry_adapted_hamiltonians import gf2_rank

    mo = _plain_orbital_integrals()
    with exact_openfermion():
        ref = of.jordan_wigner(of.get_fermion_operator(interaction_operator(mo, "interleaved")))
    for tol in (1e-12, 1e-10):
        kept = {k for k, v in ref.terms.items() if k and abs(v) > tol}
        ham = encode_integrals(mo, tol=tol)
        assert len(ham.pauli) - 1 == len(kept)
        x_rows = list({sum(1 << q for q, p in k if p in "XY") for k in kept})
        assert find_symmetries(ham.pauli).n_z_symmetries == ham.n_qubits - gf2_rank(x_rows)
    noisy = encode_integrals(mo, tol=1e-12)
    clean = encode_integrals(mo)
    # how many noise strings appear depends on how the eigensolver mixed the degenerate orbitals
    # (none, some runs): every string the default drops is one below the tolerance
    noisy_terms, clean_terms = dict(noisy.pauli), dict(clean.pauli)
    extra = set(noisy_terms) - set(clean_terms)
    assert all(abs(noisy_terms[k]) <= 1e-10 for k in extra)
    assert len(noisy.pauli) == len(clean.pauli) + len(extra)
    assert 0 <= clean.dropped_one_norm_ha < 1e-7
