"""Built-in reference methods: the Hartree-Fock basis state, exact sector
diagonalisation, and shot-sampled energies of another method's state.

The variational ansatz solvers live in :mod:`benchsuite.methods.ucc`.
"""

from __future__ import annotations

import numpy as np

from benchsuite.methods.base import MethodResult, Option, QubitProblem, Resources, SectorState
from benchsuite.qubit.metrics import qwc_groups
from benchsuite.qubit.pauli import parity
from benchsuite.qubit.sector import DEFAULT_MAX_QUBITS, sector_eigen


class HartreeFockBitstring:
    """<HF|H|HF> on the encoded register: the floor every correlated method must beat."""

    name = "hf-bitstring"
    description = "energy of the Hartree-Fock computational basis state"
    options: tuple[Option, ...] = ()
    variational = True
    stochastic = False

    def run(self, problem: QubitProblem, options: dict) -> MethodResult:
        ham = problem.hamiltonian
        state = ham.hf_state()
        energy = float(ham.basis_state_energy(state))
        psi = SectorState(np.array([state], dtype=np.uint64), np.array([1.0]), ham.n_qubits)
        return MethodResult(energy_ha=energy, converged=True, iterations=0, parameters=[],
                            resources=Resources(n_parameters=0, two_qubit_gates=0, circuit_depth=0,
                                                compilation="X gates only"),
                            metadata={"bitstring": ham.hf_bitstring()}, state=psi)


class ExactSector:
    """Lowest eigenvalue of the encoded Pauli sum in the problem's (N, S_z) sector and declared spin.

    The root is the lowest with <S^2> = S(S+1) for the problem's multiplicity (the same
    state the reference ladder's FCI/CASCI keeps), found with a spin penalty
    (:func:`benchsuite.qubit.sector.sector_eigen`).  On a tapered register where S^2 has no
    form the spin cannot be targeted: the lowest (N, S_z) root is returned with a note.
    """

    name = "exact-sector"
    description = "exact diagonalisation of the encoded Hamiltonian in the N/Sz sector, declared spin"
    options = (Option("max_qubits", int, DEFAULT_MAX_QUBITS,
                      "refuse registers wider than this (unreduced 2 x orbitals)", minimum=1),)
    variational = True
    stochastic = False

    def run(self, problem: QubitProblem, options: dict) -> MethodResult:
        args = dict(n_electrons=problem.n_electrons, two_sz=problem.n_alpha - problem.n_beta, n_roots=1,
                    max_qubits=options["max_qubits"], keep_vectors=True)
        note = f"lowest root of multiplicity {problem.multiplicity}"
        try:
            res = sector_eigen(problem.hamiltonian, multiplicity=problem.multiplicity, **args)
        except ValueError as exc:
            res, note = sector_eigen(problem.hamiltonian, **args), f"lowest (N, S_z) root, any spin: {exc}"
        psi = SectorState(res.states, res.vectors[:, 0], problem.n_qubits)
        s2 = None if res.spin_square is None else float(res.spin_square[0])
        return MethodResult(energy_ha=res.ground_ha, converged=True, iterations=0,
                            metadata={"sector_dimension": res.dimension, "solver": res.solver, "s2": s2,
                                      "root": note},
                            state=psi)


# -- sampling -------------------------------------------------------------------

_HADAMARD = np.array([[1, 1], [1, -1]], dtype=complex) / np.sqrt(2)
_Y_TO_Z = _HADAMARD @ np.diag([1, -1j])          # H S^dagger: maps the Y eigenbasis to Z's


def rotate_to_measurement_basis(psi: np.ndarray, n_qubits: int, x_mask: int, z_mask: int) -> np.ndarray:
    """psi after the single-qubit rotations that turn the group's letters into Z.

    Qubit q is bit q of the basis index; X on q -> H, Y (x and z bits) -> H S^dagger.
    """
    tensor = psi.reshape((2,) * n_qubits)
    for q in range(n_qubits):
        if not (x_mask >> q) & 1:
            continue
        gate = _Y_TO_Z if (z_mask >> q) & 1 else _HADAMARD
        axis = n_qubits - 1 - q
        tensor = np.moveaxis(np.tensordot(gate, tensor, axes=([1], [axis])), 0, axis)
    return tensor.reshape(-1)


def group_values(supports: np.ndarray, coeffs: np.ndarray, outcomes: np.ndarray) -> np.ndarray:
    """Per-outcome value sum_j c_j (-1)^{|outcome & support_j|} of one group (after rotation)."""
    signs = 1.0 - 2.0 * parity(outcomes[:, None] & supports[None, :])
    return signs @ coeffs


def allocate_shots(total: int, sigmas: np.ndarray, how: str) -> np.ndarray:
    """Shots per group, at least one each: ``uniform``, or the rest ``proportional`` to each
    group's standard deviation (the split minimising the total variance for a fixed budget;
    Rubin, Babbush & McClean, New J. Phys. 20, 053020, 2018)."""
    n = len(sigmas)
    if total < n:
        raise ValueError(f"{total} shots cannot cover {n} measurement groups")
    if how == "uniform" or not np.any(sigmas > 0):
        weights = np.full(n, 1.0 / n)
    else:
        weights = sigmas / sigmas.sum()
    extra = total - n
    shots = 1 + np.floor(weights * extra).astype(np.int64)
    order = np.argsort(-(weights * extra - np.floor(weights * extra)), kind="stable")
    shots[order[: total - int(shots.sum())]] += 1
    return shots


def builtin_classes() -> dict:
    """Every built-in method class by name, in listing order (the UCC family is in
    :mod:`benchsuite.methods.ucc`); :mod:`benchsuite.methods.discovery` lists these first."""
    from benchsuite.methods import ucc

    classes = [HartreeFockBitstring, ExactSector, ucc.UCCSDVQE, ucc.UpCCGSDVQE, ucc.AdaptVQE, SampledEnergy]
    return {cls.name: cls for cls in classes}


def _sampleable(name: str) -> str | None:
    """a built-in method other than 'sampled'"""
    names = list(builtin_classes())
    if name == "sampled" or name not in names:
        return f"must name a built-in method other than 'sampled' ({names})"
    return None


class SampledEnergy:
    """Energy of another method's final state from finite measurement samples.

    The Hamiltonian's terms are split into qubit-wise-commuting groups
    (:func:`benchsuite.qubit.metrics.qwc_groups`); each group is measured in its
    rotated basis by drawing outcomes from the Born distribution of the state
    (seeded ``numpy.random.default_rng(problem.seed)``).  Estimator: identity +
    sum over groups of the sample mean; standard error sqrt(sum_g s_g^2 / m_g)
    with s_g the sample standard deviation.  ``proportional`` allocation uses
    each group's exact standard deviation on the state (an oracle allocation,
    the optimum for a fixed budget).
    """

    name = "sampled"
    description = "shot-sampled energy of another method's final state (qubit-wise-commuting groups)"
    options = (
        Option("state", str, "exact-sector", "method whose final state is measured (a built-in)",
               check=lambda name: _sampleable(name)),
        Option("shots", int, 100_000, "total shots over all groups", minimum=1),
        Option("allocation", str, "uniform", "how shots are split between groups",
               choices=("uniform", "proportional")),
        Option("max_qubits", int, 18, "refuse wider registers (the state is held densely)", minimum=1),
    )
    variational = False
    stochastic = True

    def run(self, problem: QubitProblem, options: dict) -> MethodResult:
        if problem.n_qubits > options["max_qubits"]:
            raise ValueError(f"{problem.n_qubits} qubits exceed max_qubits={options['max_qubits']}")
        source = builtin_classes()[options["state"]]()
        if source.name == self.name:
            raise ValueError("sampled cannot measure its own state")
        from benchsuite.methods.base import resolve_options

        prepared = source.run(problem, resolve_options(source, {}))
        if not isinstance(prepared.state, SectorState):
            raise ValueError(f"method {source.name!r} returned no state to sample")
        psi = prepared.state.dense()
        estimate = sample_energy(problem.hamiltonian.pauli.real(), psi, problem.n_qubits, options["shots"],
                                 options["allocation"], np.random.default_rng(problem.seed))
        return MethodResult(energy_ha=estimate["energy_ha"], stderr_ha=estimate["stderr_ha"],
                            converged=True, iterations=0, parameters=prepared.parameters,
                            resources=Resources(shots=int(estimate["shots"]),
                                                n_parameters=prepared.resources.n_parameters),
                            metadata={"state_from": source.name, "state_energy_ha": prepared.energy_ha,
                                      "groups": estimate["groups"], "allocation": options["allocation"]},
                            state=prepared.state)


def sample_energy(pauli, psi: np.ndarray, n_qubits: int, shots: int, allocation: str, rng) -> dict:
    """Sampled <psi|H|psi>: identity plus a sample mean per QWC group (real Pauli sum)."""
    groups = qwc_groups(pauli)
    n_groups = int(groups.max()) + 1 if groups.size and groups.max() >= 0 else 0
    constant = float(np.real(pauli.identity_coeff()))
    support = pauli.x | pauli.z
    coeffs = np.real(pauli.coeffs)
    all_outcomes = np.arange(1 << n_qubits, dtype=np.uint64)
    probs, values, sigmas = [], [], np.zeros(n_groups)
    for g in range(n_groups):
        members = np.flatnonzero(groups == g)
        xg = int(np.bitwise_or.reduce(pauli.x[members]))
        zg = int(np.bitwise_or.reduce(pauli.z[members]))
        p = np.abs(rotate_to_measurement_basis(psi, n_qubits, xg, zg)) ** 2
        p /= p.sum()
        v = group_values(support[members], coeffs[members], all_outcomes)
        probs.append(p)
        values.append(v)
        sigmas[g] = np.sqrt(max(float(p @ v ** 2 - (p @ v) ** 2), 0.0))
    shots_per_group = allocate_shots(shots, sigmas, allocation) if n_groups else np.zeros(0, int)
    energy, variance = constant, 0.0
    for g in range(n_groups):
        m = int(shots_per_group[g])
        draws = rng.choice(len(probs[g]), size=m, p=probs[g])
        sample = values[g][draws]
        energy += float(sample.mean())
        variance += float(sample.var(ddof=1)) / m if m > 1 else 0.0
    return {"energy_ha": energy, "stderr_ha": float(np.sqrt(variance)), "shots": int(shots_per_group.sum()),
            "groups": n_groups}
