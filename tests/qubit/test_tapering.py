"""Z2 symmetries, tapering and the spin-parity qubit removal.

Independent routes: OpenFermion's sparse matrix of the untapered operator
(``get_sparse_operator``), restricted here to the states of one symmetry
sector by direct bit counting, and PySCF FCI energies.
"""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.errors import InputError
from benchsuite.qubit.hamiltonian import encode_integrals, drop_spin_parity_qubits
from benchsuite.qubit.pauli import parity
from benchsuite.qubit.sector import sector_eigen
from benchsuite.qubit.tapering import find_symmetries, reference_eigenvalues, taper, z2_sector_scan

from .reference import pyscf_sector_energies


@pytest.mark.parametrize("encoding", ["jordan-wigner", "bravyi-kitaev", "parity"])
def test_generators_commute_with_every_term(case_ints, encoding):
    mo = case_ints("h2o", "sto-3g")[0]
    ham = encode_integrals(mo, encoding)
    sym = find_symmetries(ham.pauli)
    assert sym.n_z_symmetries >= 2  # at least the N_alpha and N_beta parities
    for g, q in zip(sym.z_generators, sym.pivots):
        assert not np.any(parity(ham.pauli.x & np.uint64(g)))
        assert (g >> q) & 1
        assert all(not (other >> q) & 1 for other in sym.z_generators if other != g)


def test_h2_tapers_to_one_qubit(case_ints):
    """H2/STO-3G has three Z2 symmetries (N_alpha and N_beta parities and the
    g/u parity; Bravyi et al., arXiv:1701.08213 (2017)), leaving one qubit whose
    2x2 Hamiltonian has the FCI ground energy."""
    mo = case_ints("h2", "sto-3g")[0]
    tapered = taper(encode_integrals(mo))
    assert tapered.n_qubits == 1
    assert sector_eigen(tapered).ground_ha == pytest.approx(float(pyscf_sector_energies(mo).min()), abs=1e-10)


def test_tapered_spectrum_equals_the_untapered_sector(case_ints):
    """All roots of the tapered Hamiltonian in (N, S_z) equal the eigenvalues of
    OpenFermion's dense matrix of the untapered operator restricted to the basis
    states with N = 4, S_z = 0 and the tapered generators' eigenvalues."""
    import openfermion as of

    mo = case_ints("h2o-stretch-2p0-cas44", "sto-3g")[0]  # 8 qubits
    ham = encode_integrals(mo, "jordan-wigner", "interleaved")
    tapered = taper(ham)
    red = tapered.reductions[0]
    dense = of.get_sparse_operator(ham.pauli.to_openfermion(), n_qubits=8).toarray()
    keep = []
    for b in range(256):
        bits = [(b >> q) & 1 for q in range(8)]  # our bit q = qubit q
        if sum(bits[0::2]) != 2 or sum(bits[1::2]) != 2:
            continue
        if all((-1) ** bin(b & g).count("1") == s for g, s in zip(red.generators, red.eigenvalues)):
            keep.append(int("".join(map(str, bits)), 2))  # OpenFermion: qubit 0 most significant
    ref = np.linalg.eigvalsh(dense[np.ix_(keep, keep)].real)
    got = sector_eigen(tapered, n_roots=len(keep)).energies_ha
    assert len(keep) == sector_eigen(tapered).dimension
    assert np.allclose(got, ref, atol=1e-10)


def test_spin_square_survives_tapering(case_ints):
    mo = case_ints("oh", "sto-3g")[0]
    ham = encode_integrals(mo, "bravyi-kitaev")
    full = sector_eigen(ham, n_roots=3)
    tap = sector_eigen(taper(ham), n_roots=1)
    assert tap.ground_ha == pytest.approx(full.ground_ha, abs=1e-10)
    assert tap.spin_square[0] == pytest.approx(0.75, abs=1e-8)


def test_the_other_sector_is_a_different_state(case_ints):
    """The sector is a choice: H2 tapered with the g/u eigenvalue flipped holds
    the lowest ungerade state, not the ground state -- hence the check."""
    mo = case_ints("h2", "sto-3g")[0]
    ham = encode_integrals(mo)
    sym = find_symmetries(ham.pauli)
    hf = reference_eigenvalues(sym.z_generators, ham.hf_state())
    rows = z2_sector_scan(ham, sym)
    energies = {eig: e for eig, e, _ in rows}
    assert hf in energies
    assert min(energies.values()) == pytest.approx(energies[hf], abs=1e-12)
    others = [e for eig, e in energies.items() if eig != hf]
    assert others and min(others) > energies[hf] + 0.1
    lowest = taper(ham, "lowest")
    assert lowest.reductions[0].eigenvalues == hf
    wrong = taper(ham, next(eig for eig in energies if eig != hf))
    with pytest.raises(ValueError, match="outside"):
        wrong.hf_state()
    assert sector_eigen(wrong).ground_ha > energies[hf] + 0.1


@pytest.mark.parametrize("name", ["lih", "h2o", "oh", "n2-cas66"])
def test_reference_sector_holds_the_ground_state(case_ints, name):
    """For these registry cases the Hartree-Fock sector's lowest energy is the
    lowest of all Z2 sectors the (N, S_z) states reach, and equals PySCF FCI.
    (For the OH doublet, 2Pi, the other pi component lies in another sector at
    the same energy, so the minimum is shared, not unique.)"""
    mo = case_ints(name, "sto-3g")[0]
    ham = encode_integrals(mo, "parity", "blocked")
    rows = z2_sector_scan(ham)
    hf_eig = reference_eigenvalues(find_symmetries(ham.pauli).z_generators, ham.hf_state())
    energies = {eig: e for eig, e, _ in rows}
    e_fci = float(pyscf_sector_energies(mo, nroots=3).min())
    assert min(energies.values()) == pytest.approx(e_fci, abs=1e-8)
    assert energies[hf_eig] == pytest.approx(e_fci, abs=1e-8)
    assert sum(r[2] for r in rows) == sector_eigen(ham, spin=False).dimension


def test_drop_spin_parity_qubits_removes_the_parity_qubits(case_ints):
    mo = case_ints("lih", "sto-3g")[0]
    ham = encode_integrals(mo, "parity", "blocked")
    red = drop_spin_parity_qubits(ham)
    n = mo.n_orbitals
    assert red.n_qubits == ham.n_qubits - 2
    assert red.reductions[0].qubits == (n - 1, 2 * n - 1)
    assert red.reductions[0].eigenvalues == ((-1) ** mo.n_alpha, (-1) ** mo.n_electrons)
    # Both removed qubits are Z-only in the parity encoding with blocked order.
    for q in (n - 1, 2 * n - 1):
        assert not np.any(ham.pauli.x & np.uint64(1 << q))
    both = taper(red)
    assert sector_eigen(both).ground_ha == pytest.approx(sector_eigen(ham).ground_ha, abs=1e-10)


@pytest.mark.parametrize("encoding,ordering", [("parity", "interleaved"), ("jordan-wigner", "blocked"),
                                               ("bravyi-kitaev", "blocked")])
def test_drop_spin_parity_qubits_refuses_other_layouts(case_ints, encoding, ordering):
    mo = case_ints("h2", "sto-3g")[0]
    with pytest.raises(InputError, match="spin-parity qubits"):
        drop_spin_parity_qubits(encode_integrals(mo, encoding, ordering))


def test_bad_sector_choice(case_ints):
    mo = case_ints("h2", "sto-3g")[0]
    with pytest.raises(InputError):
        taper(encode_integrals(mo), "middle")
    with pytest.raises(ValueError):
        taper(encode_integrals(mo), (1, 1))
