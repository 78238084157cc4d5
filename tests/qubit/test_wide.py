"""Registers past 64 qubits (two mask words), checked against OpenFermion's jordan_wigner
(McClean et al., Quantum Sci. Technol. 5, 034014 (2020)) as the independent route."""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.errors import InputError
from benchsuite.qubit.encodings import majorana_table
from benchsuite.qubit.majorana import spin_free_pauli
from benchsuite.qubit.pauli import PauliSum
from benchsuite.qubit.register import Register, RegisterTooWide


def _sparse_integrals(n: int, seed: int = 3):
    """A few real integrals with the 8-fold symmetry, touching orbitals on both sides of qubit 64."""
    rng = np.random.default_rng(seed)
    h1 = np.zeros((n, n))
    eri = np.zeros((n,) * 4)
    for p, q in [(0, 33), (31, 32), (33, 33), (2, 2)]:
        h1[p, q] = h1[q, p] = rng.normal()
    for p, q, r, s in [(0, 33, 32, 1), (33, 33, 0, 0), (31, 32, 32, 31), (2, 33, 2, 33)]:
        v = rng.normal()
        for a, b, c, d in [(p, q, r, s), (q, p, r, s), (p, q, s, r), (q, p, s, r)]:
            eri[a, b, c, d] = eri[c, d, a, b] = v
    return h1, eri


def _openfermion_jw(h1, eri, n):
    import openfermion as of

    op = of.FermionOperator()
    for p, q in (map(int, pq) for pq in zip(*np.nonzero(h1))):
        for s in range(2):
            op += of.FermionOperator(((2 * p + s, 1), (2 * q + s, 0)), float(h1[p, q]))
    for p, q, r, t in (map(int, k) for k in zip(*np.nonzero(eri))):
        for s in range(2):
            for u in range(2):
                op += of.FermionOperator(((2 * p + s, 1), (2 * r + u, 1), (2 * t + u, 0), (2 * q + s, 0)),
                                         float(0.5 * eri[p, q, r, t]))
    return of.jordan_wigner(op)


def test_wide_jordan_wigner_matches_openfermion():
    """68 qubits (two words), interleaved ordering: identical strings and coefficients."""
    n = 34
    h1, eri = _sparse_integrals(n)
    ours = spin_free_pauli(h1, eri, 0.0, majorana_table("jordan-wigner", 2 * n), "interleaved", tol=1e-12)
    assert ours.wide and ours.x.shape[1] == 2
    ref = PauliSum.from_openfermion(_openfermion_jw(h1, eri, n), 2 * n).simplify(1e-12)
    assert len(ours) == len(ref)
    assert ours.max_difference(ref) < 1e-12
    assert abs(ours.one_norm() - ref.one_norm()) < 1e-12


def test_wide_labels_round_trip_through_openfermion():
    p = PauliSum.from_terms([("X0 Y70 Z127", 0.5), ("Z64", -1.0), ("", 2.0)], 128)
    assert sorted(p.labels()) == ["", "X0 Y70 Z127", "Z64"]
    assert PauliSum.from_openfermion(p.to_openfermion(), 128).allclose(p)


def test_register_bounds_and_refusal():
    assert Register(120).n_words == 2 and Register(64).n_words == 1
    with pytest.raises(InputError):
        Register(-1)
    with pytest.raises(RegisterTooWide, match="120 qubits"):
        Register(120).require_single_word("exact-sector")
