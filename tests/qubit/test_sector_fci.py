"""Sector energies from the Pauli sums against PySCF FCI, for every registry
case up to 20 qubits.

Independent route: PySCF's determinant FCI (``fci.direct_spin1``; Sun et al.,
WIREs Comput. Mol. Sci. 8, e1340 (2018)) on the same active-space integrals,
lowest of three roots with the reference's (n_alpha, n_beta) -- several roots
because a single-root Davidson run can settle on an excited state of another
symmetry (it does for H4 square / 6-31G).  Our side never calls PySCF: it
diagonalises the encoded Pauli sum in the occupation states mapped through
the encoding.
"""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.errors import InputError
from benchsuite.qubit.hamiltonian import encode_integrals, drop_spin_parity_qubits
from benchsuite.qubit.sector import ProductSector, sector_eigen, strings
from benchsuite.qubit.tapering import taper

from .reference import pyscf_sector_energies

TOL = 1e-8


#: The default run covers every case up to 14 qubits plus N2/STO-3G (20 qubits);
#: the 16-20 qubit rest (SCF with stability analysis and PySCF FCI dominate
#: their cost) run with the slow tests.
QUICK_LIMIT = 14
QUICK_EXTRA = {("n2", "sto-3g")}


def _registry_pairs(limit: int = 20):
    """Every registry (case, basis) with at most ``limit`` qubits, as pytest params."""
    from benchsuite.chem.space import prepare
    from benchsuite.registry import Registry

    reg = Registry.load()
    out = []
    for name, case in sorted(reg.cases.items()):
        for b in case.bases:
            n_qubits = 2 * prepare(case, b).space.n_orbitals
            if n_qubits <= limit:
                quick = n_qubits <= QUICK_LIMIT or (name, b.label) in QUICK_EXTRA
                out.append(pytest.param(name, b.label, id=f"{name}/{b.label}",
                                        marks=() if quick else (pytest.mark.slow,)))
    return out


PAIRS = _registry_pairs()


def _variants(mo):
    yield "jordan-wigner", encode_integrals(mo, "jordan-wigner")
    yield "bravyi-kitaev", encode_integrals(mo, "bravyi-kitaev", "blocked")
    yield "parity with the spin-parity qubits dropped", drop_spin_parity_qubits(encode_integrals(mo, "parity", "blocked"))
    yield "jordan-wigner + tapering", taper(encode_integrals(mo, "jordan-wigner"))


def test_registry_has_enough_small_cases():
    assert len(PAIRS) >= 30
    assert {p.values[0] for p in PAIRS} >= {"h2", "lih", "h2o", "n2", "o2-triplet", "oh", "hf-fc"}


@pytest.mark.parametrize("name,basis", PAIRS)
def test_sector_energy_equals_fci_and_hf_bitstring_equals_scf(case_ints, name, basis):
    mo, scf, _ = case_ints(name, basis)
    e_fci = float(pyscf_sector_energies(mo, nroots=3).min())
    for label, ham in _variants(mo):
        res = sector_eigen(ham, spin=False)
        assert abs(res.ground_ha - e_fci) <= TOL, f"{label}: {res.ground_ha - e_fci:+.3e}"
        e_hf = ham.basis_state_energy(ham.hf_state())
        assert abs(e_hf - scf.energy_ha) <= TOL, f"{label}: HF bitstring {e_hf - scf.energy_ha:+.3e}"


@pytest.mark.parametrize("name,basis", [("h2o-stretch-2p0-cas44", "sto-3g"), ("oh", "sto-3g"),
                                        ("ch2-triplet", "sto-3g")])
def test_several_roots_and_spin_match_pyscf(case_ints, name, basis):
    """Four roots and <S^2> of each, against PySCF FCI roots and ``spin_square``."""
    from pyscf import fci

    mo = case_ints(name, basis)[0]
    nelec = (mo.n_alpha, mo.n_beta)
    solver = fci.direct_spin1.FCI()
    solver.conv_tol = 1e-12
    e_ref, vecs = solver.kernel(mo.h1_ha, mo.eri_ha, mo.n_orbitals, nelec, ecore=mo.constant_ha, nroots=6)
    s2_ref = [fci.spin_op.spin_square0(v, mo.n_orbitals, nelec)[0] for v in vecs]
    res = sector_eigen(encode_integrals(mo, "bravyi-kitaev"), n_roots=4)
    assert np.allclose(res.energies_ha, e_ref[:4], atol=TOL)
    # Degenerate roots mix, so compare <S^2> where the energy is not degenerate.
    for k in range(4):
        if all(abs(e_ref[k] - e_ref[j]) > 1e-6 for j in range(6) if j != k):
            assert res.spin_square[k] == pytest.approx(s2_ref[k], abs=1e-6)


def test_other_spin_and_electron_sectors(case_ints):
    """S_z = 1 and the cation sector of H2O/STO-3G against PySCF with those electron counts."""
    mo = case_ints("h2o", "sto-3g")[0]
    ham = encode_integrals(mo, "parity")
    triplet = sector_eigen(ham, two_sz=2)
    assert triplet.ground_ha == pytest.approx(pyscf_sector_energies(mo, 6, 4, nroots=3).min(), abs=TOL)
    assert triplet.spin_square[0] == pytest.approx(2.0, abs=1e-6)
    cation = sector_eigen(ham, n_electrons=9, two_sz=1)
    assert cation.ground_ha == pytest.approx(pyscf_sector_energies(mo, 5, 4, nroots=3).min(), abs=TOL)
    assert cation.n_alpha == 5 and cation.n_beta == 4


def test_reference_spin_square(case_ints):
    """<S^2> of the exact ground state: 0 for closed-shell H2O, 3/4 for the OH
    doublet, 2 for the O2 triplet."""
    for name, expected in (("h2o", 0.0), ("oh", 0.75), ("o2-triplet", 2.0)):
        mo = case_ints(name, "sto-3g")[0]
        res = sector_eigen(encode_integrals(mo))
        assert res.spin_square[0] == pytest.approx(expected, abs=1e-6), name


def test_diagonal_energies_equal_slater_condon(case_ints):
    """basis_state_energy of arbitrary determinants against the Slater-Condon
    diagonal computed here from the integrals (independent formula)."""
    mo = case_ints("lih", "sto-3g")[0]
    n = mo.n_orbitals
    h, g = mo.h1_ha, mo.eri_ha
    j = np.einsum("iijj->ij", g)
    k = np.einsum("ijji->ij", g)
    sa, sb = strings(n, mo.n_alpha), strings(n, mo.n_beta)
    picks = [(int(a), int(b)) for a in sa[::7] for b in sb[::5]]
    for encoding in ("jordan-wigner", "bravyi-kitaev", "parity"):
        for ordering in ("interleaved", "blocked"):
            ham = encode_integrals(mo, encoding, ordering)
            _, states = ham.encode_states(np.array([a for a, _ in picks], dtype=np.uint64),
                                          np.array([b for _, b in picks], dtype=np.uint64))
            got = ham.basis_state_energy(states)
            for (a, b), e in zip(picks, got):
                oa = [p for p in range(n) if a >> p & 1]
                ob = [p for p in range(n) if b >> p & 1]
                ref = mo.constant_ha + sum(h[p, p] for p in oa + ob)
                ref += 0.5 * (j[np.ix_(oa, oa)].sum() - k[np.ix_(oa, oa)].sum())
                ref += 0.5 * (j[np.ix_(ob, ob)].sum() - k[np.ix_(ob, ob)].sum())
                ref += j[np.ix_(oa, ob)].sum()
                assert e == pytest.approx(ref, abs=1e-10)


def test_hf_bitstrings_follow_the_documented_layout(case_ints):
    """OH (5 alpha, 4 beta, 6 orbitals): the reference occupies orbitals 0-3
    doubly and orbital 4 with alpha.  Character q = qubit q."""
    mo = case_ints("oh", "sto-3g")[0]
    jw_i = encode_integrals(mo, "jordan-wigner", "interleaved").hf_bitstring()
    jw_b = encode_integrals(mo, "jordan-wigner", "blocked").hf_bitstring()
    assert jw_i == "111111111000"
    assert jw_b == "111110" + "111100"
    # Parity: qubit i holds n_0 + ... + n_i mod 2 of the JW occupations.
    par = encode_integrals(mo, "parity", "interleaved").hf_bitstring()
    assert par == "".join(str(sum(int(c) for c in jw_i[:i + 1]) % 2) for i in range(12))
    # Bravyi-Kitaev: qubit i holds n_k for (i AND (i+1)) <= k <= i.
    bk = encode_integrals(mo, "bravyi-kitaev", "interleaved").hf_bitstring()
    assert bk == "".join(str(sum(int(jw_i[k]) for k in range((i & (i + 1)), i + 1)) % 2) for i in range(12))


def test_qubit_limit_refuses_before_any_work(case_ints, monkeypatch):
    mo = case_ints("lih", "sto-3g")[0]
    ham = encode_integrals(mo)

    def boom(*a, **k):
        raise AssertionError("work started")

    monkeypatch.setattr(ProductSector, "__init__", boom)
    with pytest.raises(InputError, match="exceed the limit of 10"):
        sector_eigen(ham, max_qubits=10)
    with pytest.raises(InputError, match="no sector"):
        sector_eigen(ham, n_electrons=3, two_sz=0)
