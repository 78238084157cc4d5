"""An independent dense statevector route for the determinant-space kernels (shared test helpers).

Everything is built with OpenFermion from the same MO integrals, nothing from benchsuite's Pauli code:
each excitation generator tau_k = T_k - T_k^dagger as a ``FermionOperator`` on the register's modes,
``jordan_wigner`` -> ``get_sparse_operator`` -> ``scipy.linalg.expm`` (dense, <= 10 qubits) or
``expm_multiply`` (12 qubits), applied in the same order to the Jordan-Wigner Hartree-Fock vector; the
Hamiltonian as an ``InteractionOperator`` -> ``get_fermion_operator`` -> ``jordan_wigner``.
OpenFermion's sparse matrices put qubit 0 in the most significant bit; benchsuite's basis-state
integers have qubit q as bit q.  "The H4 chain" is a linear H4 built here (spacing 1.0 A, STO-3G, RHF),
there being no linear H4 in the registry.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import scipy.linalg
import scipy.sparse.linalg

from benchsuite.methods.base import QubitProblem
from benchsuite.methods.determinant import (
    DeterminantSpace,
    Excitation,
    ExponentialProduct,
    SectorHamiltonian,
    reference_on_register,
)
from benchsuite.methods.ucc import (
    reference_singles_doubles,
    serial_blas,
)
from benchsuite.qubit.encodings import mode_indices
from benchsuite.qubit.hamiltonian import encode_integrals, drop_spin_parity_qubits

# -- problems -------------------------------------------------------------------------


@lru_cache(maxsize=None)
def chain_integrals(n_atoms: int, spacing: float, spin: int = 0):
    """Linear H_n (STO-3G, all electrons), RHF or ROHF orbitals."""
    from pyscf import gto, scf

    from benchsuite.chem.integrals import build_mo_integrals

    mol = gto.M(atom=[["H", (0.0, 0.0, i * spacing)] for i in range(n_atoms)], basis="sto-3g",
                unit="Angstrom", spin=spin, verbose=0)
    mf = (scf.RHF(mol) if spin == 0 else scf.ROHF(mol))
    mf.conv_tol = 1e-12
    mf.kernel()
    assert mf.converged
    return build_mo_integrals(mol, mf.mo_coeff, mf.mo_energy, 0, mol.nao_nr())


@lru_cache(maxsize=None)
def case_integrals_cached(name: str):
    from benchsuite.chem.space import case_integrals
    from benchsuite.registry import Registry

    case = Registry.load().case(name)
    ints, _, space = case_integrals(case)
    return ints, case, space


def integrals_for(name: str):
    """'h4-chain' (linear, 1.0 A), 'h3-chain' (doublet), 'h4-chain-1p5' or a registry case."""
    built = {"h4-chain": (4, 1.0, 0), "h3-chain": (3, 1.0, 1), "h4-chain-1p5": (4, 1.5, 0)}
    if name in built:
        return chain_integrals(*built[name])
    return case_integrals_cached(name)[0]


def make_problem(name: str, encoding: str = "jordan-wigner", ordering: str = "interleaved",
                 reduce: str | None = None, **extra) -> QubitProblem:
    ints = integrals_for(name)
    ham = encode_integrals(ints, encoding, ordering)
    if reduce == "sp-dropped":
        ham = drop_spin_parity_qubits(ham)
    elif reduce == "taper":
        from benchsuite.qubit.tapering import taper

        ham = taper(ham)
    return QubitProblem(case=name, basis="sto-3g", space="all-electron", hamiltonian=ham, integrals=ints,
                        multiplicity=ints.n_alpha - ints.n_beta + 1, **extra)


def fci_energy(ints) -> float:
    from pyscf import fci

    solver = fci.direct_spin1.FCI()
    solver.conv_tol = 1e-12
    e, _ = solver.kernel(ints.h1_ha, ints.eri_ha, ints.n_orbitals, (ints.n_alpha, ints.n_beta),
                         ecore=ints.constant_ha)
    return float(e)


# -- the independent OpenFermion route ----------------------------------------------------


def register_modes(n: int, ordering: str):
    ia, ib = mode_indices(n, ordering)
    return lambda label: int(ia[label]) if label < n else int(ib[label - n])


def fermion_generator(exc: Excitation, ordering: str):
    import openfermion as of

    mode = register_modes(exc.n_orbitals, ordering)
    word = tuple((mode(p), 1) for p in exc.creators) + tuple((mode(p), 0) for p in reversed(exc.annihilators))
    t = of.FermionOperator(word, 1.0)
    return t - of.hermitian_conjugated(t)


@lru_cache(maxsize=None)
def openfermion_hamiltonian(name: str, ordering: str):
    import openfermion as of

    ints = integrals_for(name)
    n = ints.n_orbitals
    nq = 2 * n
    ia, ib = mode_indices(n, ordering)
    one = np.zeros((nq, nq))
    two = np.zeros((nq, nq, nq, nq))
    g = np.einsum("psqr->pqrs", np.asarray(ints.eri_ha))   # g[p,q,r,s] = (ps|qr)
    for m1 in (ia, ib):
        one[np.ix_(m1, m1)] = ints.h1_ha
        for m2 in (ia, ib):
            two[np.ix_(m1, m2, m2, m1)] = 0.5 * g
    op = of.InteractionOperator(ints.constant_ha, one, two)
    return of.get_sparse_operator(of.jordan_wigner(of.get_fermion_operator(op)), nq).tocsr()


def openfermion_order(vec: np.ndarray, n_qubits: int) -> np.ndarray:
    """benchsuite index (bit q = qubit q) -> OpenFermion index (qubit 0 most significant)."""
    return vec.reshape((2,) * n_qubits).transpose(tuple(reversed(range(n_qubits)))).reshape(-1)


def hf_vector(ints, ordering: str) -> np.ndarray:
    n = ints.n_orbitals
    ia, ib = mode_indices(n, ordering)
    occupied = [int(m) for m in ia[:ints.n_alpha]] + [int(m) for m in ib[:ints.n_beta]]
    vec = np.zeros(1 << (2 * n), dtype=complex)
    vec[sum(1 << (2 * n - 1 - m) for m in occupied)] = 1.0
    return vec


def dense_route_state(name: str, excitations, angles, ordering: str = "interleaved") -> np.ndarray:
    """prod_k expm(angle_k tau_k) |HF>, first factor first, OpenFermion qubit order."""
    import openfermion as of

    ints = integrals_for(name)
    nq = 2 * ints.n_orbitals
    psi = hf_vector(ints, ordering)
    with serial_blas():            # small dense products: threads only add waiting on a shared machine
        for exc, t in zip(excitations, angles):
            gen = of.get_sparse_operator(of.jordan_wigner(fermion_generator(exc, ordering)), nq)
            if nq <= 10:
                psi = scipy.linalg.expm(t * gen.toarray()) @ psi
            else:
                psi = scipy.sparse.linalg.expm_multiply(t * gen.tocsc(), psi)
    return psi


def kernel_objects(name: str, excitations, ordering="interleaved", parameter_index=None, backend=None):
    problem = make_problem(name, ordering=ordering)
    ints = problem.integrals
    space = DeterminantSpace(ints.n_orbitals, ints.n_alpha, ints.n_beta)
    ham = SectorHamiltonian(ints, space)
    ref = reference_on_register(space, problem.hamiltonian)
    product = ExponentialProduct(space, excitations, parameter_index, reference=ref, backend=backend)
    return problem, space, ham, product


def uccsd_objects(name: str, ordering: str = "interleaved", backend=None):
    """(problem, space, sector Hamiltonian, UCCSD product, excitations) of a case."""
    ints = integrals_for(name)
    exc = reference_singles_doubles(ints.n_orbitals, ints.n_alpha, ints.n_beta)
    return (*kernel_objects(name, exc, ordering=ordering, backend=backend), exc)


def central_differences(product, ham, theta, components=None, step: float = 1e-4) -> np.ndarray:
    """(E(theta + h e_k) - E(theta - h e_k)) / 2h for the given components (default all)."""
    ks = range(theta.size) if components is None else components
    out = []
    for k in ks:
        e = np.zeros_like(theta)
        e[k] = step
        out.append((product.energy(theta + e, ham) - product.energy(theta - e, ham)) / (2 * step))
    return np.array(out)


def random_angles(n: int, seed: int = 7, scale: float = 0.2) -> np.ndarray:
    return np.random.default_rng(seed).normal(scale=scale, size=n)


# -- tests ---------------------------------------------------------------------------------
