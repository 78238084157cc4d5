"""The determinant-space kernels against an independent dense statevector route.

Independent route (everything built with OpenFermion from the same MO
integrals, nothing from benchsuite's Pauli code): each excitation generator
tau_k = T_k - T_k^dagger as a ``FermionOperator`` on the register's modes,
``jordan_wigner`` -> ``get_sparse_operator`` -> ``scipy.linalg.expm`` (dense,
<= 10 qubits) or ``expm_multiply`` (12 qubits), applied in the same order to
the Jordan-Wigner Hartree-Fock vector; the Hamiltonian as an
``InteractionOperator`` (H = c + sum h_PQ a+_P a_Q + sum h_PQRS a+_P a+_Q a_R a_S
with h_PQRS = 1/2 (ps|qr) for matching spins) -> ``get_fermion_operator`` ->
``jordan_wigner``.  OpenFermion's sparse matrices put qubit 0 in the most
significant bit; benchsuite's basis-state integers have qubit q as bit q.

"The H4 chain" here is a linear H4 built in these tests (spacing 1.0 A,
STO-3G, RHF), there being no linear H4 in the registry.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from benchsuite.methods.determinant import (
    DeterminantSpace,
    Excitation,
    ExponentialProduct,
    GeneratorPool,
    SectorHamiltonian,
    kernel_backend,
    kernel_note,
    reference_on_register,
    register_state,
    weight_outside,
)
from benchsuite.methods.ucc import (
    generalised_doubles,
    generalised_singles,
    generator_pauli,
    reference_singles_doubles,
    staircase_cost,
    upccgsd_layer,
)
from benchsuite.qubit.metrics import apply_pauli
from tests.methods.dense_route import (
    central_differences,
    dense_route_state,
    fermion_generator,
    hf_vector,
    integrals_for,
    kernel_objects,
    make_problem,
    openfermion_hamiltonian,
    openfermion_order,
    random_angles,
    uccsd_objects,
)


def test_openfermion_route_reproduces_reference_energy():
    """The independent Hamiltonian gives the SCF energy on the HF vector (checks the route itself)."""
    for name in ("h2", "h4-chain", "h3-chain"):
        ints = integrals_for(name)
        h = openfermion_hamiltonian(name, "interleaved")
        hf = hf_vector(ints, "interleaved")
        assert np.real(np.vdot(hf, h @ hf)) == pytest.approx(ints.reference_energy_ha(), abs=1e-10)


@pytest.mark.parametrize("name", ["h2", "h4-chain", "lih"])
def test_uccsd_energy_matches_dense_route(name):
    """UCCSD energies agree within 1e-7 Eh with the OpenFermion/expm route at the same parameters."""
    ints = integrals_for(name)
    problem, space, ham, product, exc = uccsd_objects(name)
    theta = random_angles(product.n_parameters)
    e_kernel = product.energy(theta, ham)
    psi = dense_route_state(name, exc, theta)
    h = openfermion_hamiltonian(name, "interleaved")
    e_dense = float(np.real(np.vdot(psi, h @ psi)))
    assert abs(e_kernel - e_dense) < 1e-7
    assert abs(e_kernel - ints.reference_energy_ha()) > 1e-3      # the parameters do something
    if name == "lih":      # 12 qubits: also the whole sector state, through the sparse route
        mine = openfermion_order(register_state(space, product.state(theta), problem.hamiltonian).dense(), 12)
        assert np.max(np.abs(mine - psi)) < 1e-9


@pytest.mark.parametrize("name, ordering", [("h2", "interleaved"), ("h4-chain", "interleaved"),
                                            ("h4-chain", "blocked"), ("h3-chain", "interleaved"),
                                            ("h3-chain", "blocked"), ("heh-cation", "interleaved")])
def test_sector_state_equals_dense_statevector(name, ordering):
    """The determinant-space state mapped to the register is the 2^n JW statevector, sign included."""
    problem, space, ham, product, exc = uccsd_objects(name, ordering)
    nq = problem.n_qubits
    assert nq <= 10
    theta = random_angles(product.n_parameters, seed=3)
    state = register_state(space, product.state(theta), problem.hamiltonian)
    dense_mine = state.dense()
    dense_ref = dense_route_state(name, exc, theta, ordering)
    assert np.max(np.abs(openfermion_order(dense_mine, nq) - dense_ref)) < 1e-10
    # the energy of the mapped state with benchsuite's own encoded Pauli sum
    e_pauli = float(np.real(np.vdot(dense_mine, apply_pauli(problem.hamiltonian.pauli, dense_mine))))
    assert e_pauli == pytest.approx(product.energy(theta, ham), abs=1e-9)


def test_upccgsd_and_generalised_excitations_match_dense_route():
    """Generalised singles (shared alpha/beta angle), paired and generalised doubles, two layers."""
    ints = integrals_for("h4-chain")
    n = ints.n_orbitals
    layer, local = upccgsd_layer(n, spin_complemented=True)
    extra = generalised_doubles(n)[::15]
    exc = layer + layer + extra
    top = max(local) + 1
    index = local + [top + i for i in local] + [2 * top + i for i in range(len(extra))]
    problem, space, ham, product = kernel_objects("h4-chain", exc, parameter_index=index)
    theta = random_angles(product.n_parameters, seed=11)
    angles = theta[np.asarray(index)]
    psi = dense_route_state("h4-chain", exc, angles)
    mine = openfermion_order(register_state(space, product.state(theta), problem.hamiltonian).dense(), 8)
    assert np.max(np.abs(mine - psi)) < 1e-10


def test_pool_gradients_are_commutator_expectations():
    """2 <H psi|tau|psi> = <psi|[H, tau]|psi> for every generalised pool operator, densely."""
    import openfermion as of

    ints = integrals_for("h4-chain")
    n = ints.n_orbitals
    pool_exc = generalised_singles(n, 0) + generalised_singles(n, 1) + generalised_doubles(n)
    problem, space, ham, product = kernel_objects("h4-chain", reference_singles_doubles(n, 2, 2))
    theta = random_angles(product.n_parameters, seed=5)
    psi_det = product.state(theta)
    grads = GeneratorPool(space, pool_exc).gradients(psi_det, ham.apply(psi_det))
    psi = openfermion_order(register_state(space, psi_det, problem.hamiltonian).dense(), 8)
    h = openfermion_hamiltonian("h4-chain", "interleaved")
    for k in range(0, len(pool_exc), 5):
        tau = of.get_sparse_operator(of.jordan_wigner(fermion_generator(pool_exc[k], "interleaved")), 8)
        comm = h @ tau - tau @ h
        assert grads[k] == pytest.approx(float(np.real(np.vdot(psi, comm @ psi))), abs=1e-10)
    assert np.max(np.abs(grads)) > 1e-3


@pytest.mark.parametrize("name", ["h2", "h4-chain", "lih", "oh"])
def test_analytic_gradient_equals_central_differences(name):
    _, _, ham, product, _ = uccsd_objects(name)
    theta = random_angles(product.n_parameters, seed=1, scale=0.1)
    energy, grad, _ = product.energy_and_gradient(theta, ham)
    assert energy == pytest.approx(product.energy(theta, ham), abs=1e-12)
    assert np.max(np.abs(grad - central_differences(product, ham, theta))) < 1e-6
    assert np.max(np.abs(grad)) > 1e-3


def test_shared_parameters_gradient_equals_central_differences():
    ints = integrals_for("h4-chain")
    layer, local = upccgsd_layer(ints.n_orbitals, spin_complemented=True)
    top = max(local) + 1
    _, _, ham, product = kernel_objects("h4-chain", layer + layer, parameter_index=local + [top + i for i in local])
    theta = random_angles(product.n_parameters, seed=2)
    _, grad, _ = product.energy_and_gradient(theta, ham)
    assert np.max(np.abs(grad - central_differences(product, ham, theta))) < 1e-6


def test_numpy_and_compiled_kernels_agree():
    if kernel_backend() != "c":
        pytest.skip(f"only the numpy kernel runs here ({kernel_note()})")
    _, _, ham, fast, _ = uccsd_objects("lih", backend="c")
    _, _, _, slow, _ = uccsd_objects("lih", backend="numpy")
    theta = random_angles(fast.n_parameters, seed=4)
    e1, g1, s1 = fast.energy_and_gradient(theta, ham)
    e2, g2, s2 = slow.energy_and_gradient(theta, ham)
    assert abs(e1 - e2) < 1e-12 and np.max(np.abs(g1 - g2)) < 1e-12 and np.max(np.abs(s1 - s2)) < 1e-13


@pytest.mark.parametrize("encoding, ordering, reduce", [
    ("bravyi-kitaev", "interleaved", None), ("parity", "blocked", "sp-dropped"),
    ("jordan-wigner", "interleaved", "taper"), ("bravyi-kitaev", "blocked", "taper")])
def test_sector_state_on_other_registers(encoding, ordering, reduce):
    """On encoded and tapered registers the returned state has the determinant-space energy and,
    at zero parameters, is exactly +|hf_state>."""
    problem = make_problem("h4-chain", encoding, ordering, reduce)
    ints = problem.integrals
    space = DeterminantSpace(ints.n_orbitals, ints.n_alpha, ints.n_beta)
    ham = SectorHamiltonian(ints, space)
    ref = reference_on_register(space, problem.hamiltonian)
    exc = reference_singles_doubles(ints.n_orbitals, 2, 2)
    product = ExponentialProduct(space, exc, reference=ref)
    zero = register_state(space, product.state(np.zeros(product.n_parameters)), problem.hamiltonian)
    assert zero.basis_states.tolist() == [problem.hamiltonian.hf_state()]
    assert zero.amplitudes[0] == pytest.approx(1.0)
    theta = random_angles(product.n_parameters, seed=9)
    if reduce == "taper":
        # excitations that break a tapered (spatial) symmetry would move weight out of the sector
        breaking = []
        for k, e in enumerate(exc):
            try:
                problem.hamiltonian.transform(generator_pauli(e, problem.hamiltonian))
            except ValueError:
                breaking.append(k)
        assert 0 < len(breaking) < len(exc)
        moved = theta.copy()
        theta[breaking] = 0.0
        assert weight_outside(space, product.state(moved), problem.hamiltonian) > 1e-4
    assert weight_outside(space, product.state(theta), problem.hamiltonian) < 1e-20
    psi = register_state(space, product.state(theta), problem.hamiltonian).dense()
    e_pauli = float(np.real(np.vdot(psi, apply_pauli(problem.hamiltonian.pauli, psi))))
    assert e_pauli == pytest.approx(product.energy(theta, ham), abs=1e-9)
    if reduce:
        assert problem.n_qubits < 2 * ints.n_orbitals


def test_cnot_counts_match_openfermion_jordan_wigner_strings():
    """Staircase CNOTs from benchsuite's encoding of each generator = those of OpenFermion's JW strings."""
    import openfermion as of

    for ordering in ("interleaved", "blocked"):
        problem = make_problem("lih", ordering=ordering)
        ints = problem.integrals
        exc = reference_singles_doubles(ints.n_orbitals, ints.n_alpha, ints.n_beta)
        cnots, depth, label = staircase_cost(exc, problem.hamiltonian)
        expected = 0
        for e in exc:
            qop = of.jordan_wigner(fermion_generator(e, ordering))
            for term, coeff in qop.terms.items():
                if abs(coeff) > 1e-12:
                    expected += 2 * (len(term) - 1)
            n_strings = sum(abs(c) > 1e-12 for c in qop.terms.values())
            assert n_strings == (2 if len(e.creators) == 1 else 8)
        assert cnots == expected == depth
        assert "jordan-wigner/" + ordering in label


def test_excitation_validation():
    with pytest.raises(ValueError):
        Excitation((0,), (0,), 2)                 # creator = annihilator
    with pytest.raises(ValueError):
        Excitation((2,), (0,), 2)                 # alpha -> beta does not conserve S_z
    with pytest.raises(ValueError):
        Excitation((1, 1), (0, 2), 2)
    assert Excitation((1, 3), (0, 2), 2).label() == "0a 0b -> 1a 1b"


def test_exponential_closed_form_on_generalised_excitations():
    """tau^3 = -tau on its support, so exp(t tau) = 1 + sin t tau + (1 - cos t) tau^2 (one factor)."""
    space = DeterminantSpace(4, 2, 1)
    psi = np.random.default_rng(0).normal(size=space.dimension)
    psi /= np.linalg.norm(psi)
    for exc in generalised_singles(4, 1) + generalised_doubles(4)[::9]:
        tau = space.apply_generator(exc, psi)
        tau2 = space.apply_generator(exc, tau)
        assert np.allclose(space.apply_generator(exc, tau2), -tau, atol=1e-14)
        product = ExponentialProduct(space, [exc], reference=psi)
        t = 0.7
        assert np.allclose(product.state(np.array([t])), psi + np.sin(t) * tau + (1 - np.cos(t)) * tau2,
                           atol=1e-14)


def test_extended_product_matches_dense_route():
    """A product grown factor by factor (ADAPT's extended pair table) against OpenFermion's expm route."""
    ints = integrals_for("h4-chain")
    exc = generalised_doubles(ints.n_orbitals)[::9] + generalised_singles(ints.n_orbitals, 0)[:3]
    problem, space, ham, product = kernel_objects("h4-chain", exc[:1])
    for e in exc[1:]:
        product = product.extended(e)
    theta = random_angles(product.n_parameters, seed=5)
    psi = dense_route_state("h4-chain", exc, theta)
    mine = openfermion_order(register_state(space, product.state(theta), problem.hamiltonian).dense(), 8)
    assert product.n_factors == len(exc) and np.max(np.abs(mine - psi)) < 1e-10
    _, grad, _ = product.energy_and_gradient(theta, ham)
    assert np.max(np.abs(grad - central_differences(product, ham, theta))) < 1e-6


def test_spin_complemented_groups_cover_the_pool_once():
    """Every generalised generator of H4 appears in exactly one group (up to sign), each group is a
    generator and its alpha<->beta mirror, and the mirror of a group's first member is its second."""
    from benchsuite.methods.ucc import _generator_key, spin_complemented, spin_mirror

    n = 4
    pool = generalised_singles(n, 0) + generalised_singles(n, 1) + generalised_doubles(n)
    groups = spin_complemented(pool)
    keys = [_generator_key(e) for g in groups for e in g]
    assert sorted(keys) == sorted({_generator_key(e) for e in pool}) and len(keys) == len(set(keys))
    assert all(len(g) == 1 or g[1] == spin_mirror(g[0]) for g in groups)
    # alone: the paired doubles (r alpha, r beta) -> (p alpha, p beta) and the spin exchanges
    # (r alpha, p beta) -> (p alpha, r beta), one of each per pair p > r
    assert sum(len(g) == 1 for g in groups) == 2 * math.comb(n, 2)
