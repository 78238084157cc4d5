"""Independent reference routes for the qubit tests (test-side only).

* OpenFermion (McClean et al., Quantum Sci. Technol. 5, 034014 (2020)):
  the same integrals as an ``InteractionOperator``
  H = constant + sum_pq T_pq a+_p a_q + sum_pqrs V_pqrs a+_p a+_q a_r a_s with
  V_pqrs = 1/2 (ps|qr) in chemists' notation over spin-orbitals of matching
  spin (p with s, q with r), in our spin-orbital ordering; then
  ``get_fermion_operator`` and ``jordan_wigner`` / ``bravyi_kitaev`` /
  ``binary_code_transform(parity_code)``.  OpenFermion's
  ``SymbolicOperator.__iadd__`` deletes a term whenever its running sum falls
  below 1e-8 (``EQ_TOLERANCE``), which silently loses contributions to
  coefficients of order 1e-7 (seen on NH3/STO-3G: strings of |c| = 8e-8
  missing); :func:`exact_openfermion` sets that threshold to 0 while the
  reference is built, so the comparison at 1e-10 tests the encoding and not
  this truncation.
* PySCF FCI (Sun et al., WIREs Comput. Mol. Sci. 8, e1340 (2018)):
  ``fci.direct_spin1.kernel`` on the same active-space integrals, plus the
  constant -- the lowest state with the given (n_alpha, n_beta), every spin.
"""

from __future__ import annotations

from contextlib import contextmanager

import numpy as np

from benchsuite.qubit.pauli import PauliSum


@contextmanager
def exact_openfermion():
    """OpenFermion with its near-zero term deletion switched off (see module docstring)."""
    from openfermion.ops.operators.symbolic_operator import SymbolicOperator

    original = SymbolicOperator.__dict__["_issmall"]

    def never_small(val, tol=0.0):
        return abs(val) < tol

    SymbolicOperator._issmall = staticmethod(never_small)
    try:
        yield
    finally:
        SymbolicOperator._issmall = original


def mode_of(p: int, spin: int, n: int, ordering: str) -> int:
    return 2 * p + spin if ordering == "interleaved" else p + spin * n


def interaction_operator(mo, ordering: str):
    import openfermion as of

    n = mo.n_orbitals
    one = np.zeros((2 * n, 2 * n))
    two = np.zeros((2 * n,) * 4)
    for s in range(2):
        idx = [mode_of(p, s, n, ordering) for p in range(n)]
        one[np.ix_(idx, idx)] = mo.h1_ha
    for s in range(2):
        for t in range(2):
            ps = [mode_of(p, s, n, ordering) for p in range(n)]
            qt = [mode_of(p, t, n, ordering) for p in range(n)]
            # two[P, Q, R, S] for P, S of spin s and Q, R of spin t: (ps|qr) = eri[p, s, q, r]
            two[np.ix_(ps, qt, qt, ps)] = mo.eri_ha.transpose(0, 2, 3, 1)
    return of.InteractionOperator(mo.constant_ha, one, 0.5 * two)


def openfermion_fermion_operator(mo, ordering: str):
    import openfermion as of

    return of.get_fermion_operator(interaction_operator(mo, ordering))


def openfermion_pauli(fermion_op, encoding: str, n_qubits: int) -> PauliSum:
    import openfermion as of

    if encoding == "jordan-wigner":
        op = of.jordan_wigner(fermion_op)
    elif encoding == "bravyi-kitaev":
        op = of.bravyi_kitaev(fermion_op, n_qubits=n_qubits)
    elif encoding == "parity":
        op = of.binary_code_transform(fermion_op, of.parity_code(n_qubits))
    else:
        raise ValueError(encoding)
    return PauliSum.from_openfermion(op, n_qubits)


def pyscf_sector_energies(mo, n_alpha: int | None = None, n_beta: int | None = None, nroots: int = 1):
    from pyscf import fci

    na = mo.n_alpha if n_alpha is None else n_alpha
    nb = mo.n_beta if n_beta is None else n_beta
    solver = fci.direct_spin1.FCI()
    solver.conv_tol = 1e-11
    e, _ = solver.kernel(mo.h1_ha, mo.eri_ha, mo.n_orbitals, (na, nb), ecore=mo.constant_ha, nroots=nroots)
    return np.atleast_1d(e)


def assert_same_terms(ours: PauliSum, ref: PauliSum, atol: float = 1e-10, present: float = 1e-9):
    """Same set of strings with |c| > ``present`` on both sides, and every
    coefficient (over the union, absent = 0) equal within ``atol``."""
    assert ours.n_qubits == ref.n_qubits
    mine = {lab for lab, c in ours if abs(c) > present}
    theirs = {lab for lab, c in ref if abs(c) > present}
    assert mine == theirs, (f"{len(mine - theirs)} strings only ours, e.g. {sorted(mine - theirs)[:3]}; "
                            f"{len(theirs - mine)} only the reference, e.g. {sorted(theirs - mine)[:3]}")
    diff = ours.max_difference(ref)
    assert diff <= atol, f"largest coefficient difference {diff:.3e}"
    return diff
