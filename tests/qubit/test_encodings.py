"""Encodings against OpenFermion, term by term.

Independent route in every test here: the same MO integrals as an OpenFermion
``InteractionOperator`` (McClean et al., Quantum Sci. Technol. 5, 034014
(2020)) -> ``get_fermion_operator`` -> OpenFermion's own transform, built in
the same spin-orbital ordering (see ``reference.py``).
"""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.qubit.encodings import ENCODINGS, encoding_matrix, majorana_table
from benchsuite.qubit.hamiltonian import encode_integrals
from benchsuite.qubit.majorana import integral_words, ladder_words_pauli, spin_free_pauli
from benchsuite.qubit.pauli import PauliSum, anticommutes, i_power, popcount, product_phase

from .reference import assert_same_terms, exact_openfermion, openfermion_fermion_operator, openfermion_pauli

# Six registry molecules (closed and open shells, 4 to 20 qubits) in every
# run; NH3 (16 qubits) is added in the slow run.
MOLECULES = ["h2", "heh-cation", "lih", "oh", "h2o", "ch2-triplet", "n2"]


@pytest.fixture(scope="module")
def fermion_ops(case_ints):
    """OpenFermion FermionOperators per (case, ordering), built once."""
    memo = {}

    def get(name, ordering):
        if (name, ordering) not in memo:
            mo = case_ints(name)[0]
            with exact_openfermion():
                memo[(name, ordering)] = (mo, openfermion_fermion_operator(mo, ordering))
        return memo[(name, ordering)]

    return get


def _compare(fermion_ops, name, encoding, ordering):
    mo, fop = fermion_ops(name, ordering)
    with exact_openfermion():
        ref = openfermion_pauli(fop, encoding, mo.n_spin_orbitals)
    ours = encode_integrals(mo, encoding, ordering)
    assert ours.encoding == encoding and ours.ordering == ordering
    return assert_same_terms(ours.pauli, ref, atol=1e-10)


@pytest.mark.parametrize("name", MOLECULES)
@pytest.mark.parametrize("encoding", ["jordan-wigner", "bravyi-kitaev"])
def test_matches_openfermion_interleaved(fermion_ops, name, encoding):
    """OpenFermion ``jordan_wigner`` / ``bravyi_kitaev`` (Seeley-Richard-Love sets,
    J. Chem. Phys. 137, 224109 (2012)) of the same InteractionOperator."""
    _compare(fermion_ops, name, encoding, "interleaved")


@pytest.mark.parametrize("name", ["lih", "oh", "h2o"])
@pytest.mark.parametrize("encoding", ["jordan-wigner", "bravyi-kitaev"])
def test_matches_openfermion_blocked(fermion_ops, name, encoding):
    """Same, with the InteractionOperator laid out alpha block then beta block."""
    _compare(fermion_ops, name, encoding, "blocked")


@pytest.mark.parametrize("name,ordering", [("h2", "interleaved"), ("heh-cation", "blocked"),
                                           ("lih", "interleaved"), ("oh", "blocked"),
                                           ("h2o", "blocked")])
def test_parity_matches_openfermion_parity_code(fermion_ops, name, ordering):
    """OpenFermion ``binary_code_transform(op, parity_code(n))``: qubit i holds
    n_0 + ... + n_i mod 2, the same convention as ours, so the terms agree exactly."""
    _compare(fermion_ops, name, "parity", ordering)


@pytest.mark.slow
@pytest.mark.parametrize("encoding", ["jordan-wigner", "bravyi-kitaev"])
@pytest.mark.parametrize("ordering", ["interleaved", "blocked"])
def test_matches_openfermion_nh3(fermion_ops, encoding, ordering):
    """NH3/STO-3G, 16 qubits: the case whose 8e-8 coefficients OpenFermion's
    default term deletion loses (hence ``exact_openfermion``)."""
    _compare(fermion_ops, "nh3", encoding, ordering)


def test_bravyi_kitaev_variant(case_ints):
    """Which Bravyi-Kitaev: ours is OpenFermion's ``bravyi_kitaev`` (the
    Seeley-Richard-Love matrix truncated to n modes).  OpenFermion's
    ``bravyi_kitaev_tree`` builds a differently balanced Fenwick tree when n is
    not a power of two: other Pauli strings, the same spectrum (dense check)."""
    import openfermion as of

    mo = case_ints("hf-fc", "sto-3g")[0]  # 10 qubits, not a power of two
    with exact_openfermion():
        fop = openfermion_fermion_operator(mo, "interleaved")
        tree = PauliSum.from_openfermion(of.bravyi_kitaev_tree(fop, n_qubits=10), 10)
    ours = encode_integrals(mo, "bravyi-kitaev").pauli
    assert ours.max_difference(tree) > 1e-3
    spectra = [np.linalg.eigvalsh(of.get_sparse_operator(p.to_openfermion(), n_qubits=10).toarray())
               for p in (ours, tree)]
    assert np.allclose(spectra[0], spectra[1], atol=1e-9)


@pytest.mark.parametrize("encoding", ENCODINGS)
def test_majoranas_satisfy_clifford_algebra(encoding):
    """{gamma_i, gamma_j} = 2 delta_ij for all 2n Majorana strings (n = 11 modes,
    not a power of two), each Hermitian -- the algebra any valid encoding obeys."""
    n = 11
    t = majorana_table(encoding, n)
    k = (t.phase - popcount(t.x & t.z)) % 4  # sigma-form phase: must be real
    assert np.all(k % 2 == 0)
    for i in range(2 * n):
        for j in range(2 * n):
            anti = bool(anticommutes(t.x[i], t.z[i], t.x[j], t.z[j]))
            assert anti == (i != j)


def test_encoding_matrices_are_the_documented_ones():
    a = encoding_matrix("bravyi-kitaev", 8)
    # Seeley, Richard & Love (2012): qubits 1, 3, 7 store the parity of modes 0-1, 0-3, 0-7.
    assert a[1].tolist() == [1, 1, 0, 0, 0, 0, 0, 0]
    assert a[3].tolist() == [1, 1, 1, 1, 0, 0, 0, 0]
    assert a[7].tolist() == [1] * 8
    assert a[5].tolist() == [0, 0, 0, 0, 1, 1, 0, 0]
    assert np.array_equal(encoding_matrix("parity", 4), np.tril(np.ones((4, 4), dtype=np.uint8)))
    assert np.array_equal(encoding_matrix("jordan-wigner", 4), np.eye(4, dtype=np.uint8))


@pytest.mark.parametrize("encoding", ENCODINGS)
@pytest.mark.parametrize("ordering", ["interleaved", "blocked"])
def test_fast_route_equals_explicit_ladder_route(case_ints, encoding, ordering):
    """Internal cross-check: the closed Majorana formula equals the explicit
    expansion of every a+a and a+a+aa word (16 Majorana monomials each)."""
    mo = case_ints("lih")[0]
    table = majorana_table(encoding, mo.n_spin_orbitals)
    two, four, const = integral_words(mo.h1_ha, mo.eri_ha, mo.constant_ha, ordering)
    slow = (ladder_words_pauli(table, *two, tol=0.0) + ladder_words_pauli(table, *four, tol=0.0)
            + const).simplify(1e-12)
    fast = spin_free_pauli(mo.h1_ha, mo.eri_ha, mo.constant_ha, table, ordering)
    assert slow.is_hermitian(1e-12)
    assert fast.max_difference(slow.real()) <= 1e-12


def test_product_phase_table():
    """X Y = i Z, Y Z = i X, Z X = i Y on one qubit (sigma form, Y genuine)."""
    x_, y_, z_ = (1, 0), (1, 1), (0, 1)
    for (a, b, c) in ((x_, y_, z_), (y_, z_, x_), (z_, x_, y_)):
        k = product_phase(np.uint64(a[0]), np.uint64(a[1]), np.uint64(b[0]), np.uint64(b[1]))
        assert i_power(k) == 1j
        assert (a[0] ^ b[0], a[1] ^ b[1]) == c
