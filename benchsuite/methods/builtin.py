"""Built-in reference methods: the Hartree-Fock basis state and exact sector
diagonalisation; :func:`measured`, the measurement stage applied to any method's state.

Shot sampling is not a method: ``--shots N`` passes any state-returning method's
result through :mod:`benchsuite.qubit.measurement` (:func:`measured`).

The variational ansatz solvers live in :mod:`benchsuite.methods.ucc`.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from benchsuite.methods.base import MethodResult, Option, QubitProblem, Resources, SectorState
from benchsuite.qubit.measurement import ShotPlan, check_measurable, estimate_energy
from benchsuite.qubit.register import RegisterTooWide
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
        metadata = {"bitstring": ham.hf_bitstring()}
        try:
            psi = SectorState(np.array([state], dtype=np.uint64), np.array([1.0]), ham.n_qubits)
        except RegisterTooWide as exc:  # the energy needs no state; a SectorState holds one-word states
            psi, metadata["state"] = None, f"not returned: {exc}"
        return MethodResult(energy_ha=energy, converged=True, iterations=0, parameters=[],
                            resources=Resources(n_parameters=0, two_qubit_gates=0, circuit_depth=0,
                                                compilation="X gates only"),
                            metadata=metadata, state=psi)


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


def builtin_classes() -> dict:
    """Every built-in method class by name, in listing order (the UCC family is in
    :mod:`benchsuite.methods.ucc`); :mod:`benchsuite.methods.discovery` lists these first."""
    from benchsuite.methods import ucc

    classes = [HartreeFockBitstring, ExactSector, ucc.UCCSDVQE, ucc.UpCCGSDVQE, ucc.AdaptVQE]
    return {cls.name: cls for cls in classes}


def measured(result: MethodResult, problem: QubitProblem, plan: ShotPlan) -> MethodResult:
    """``result`` with its energy replaced by a shot estimate of its state (seed ``problem.seed``).

    The method's own energy is kept as ``metadata["state_energy_ha"]``; ``stderr_ha`` and
    ``resources.shots`` say how the estimate was made, so the gate judges it as stochastic.
    Raises ValueError when the method returned no state.
    """
    check_measurable(problem.n_qubits)  # before the dense 2^n vector is made
    if not isinstance(result.state, SectorState):
        raise ValueError("the method returned no state to measure (--shots needs a state)")
    est = estimate_energy(problem.hamiltonian.pauli.real(), result.state.dense(), problem.n_qubits, plan,
                          np.random.default_rng(problem.seed))
    resources = replace(result.resources if isinstance(result.resources, Resources) else Resources(),
                        shots=est.shots)
    metadata = {**result.metadata, "state_energy_ha": result.energy_ha,
                "measurement": {**plan.as_dict(), "groups": est.groups}}
    return MethodResult(energy_ha=est.energy_ha, stderr_ha=est.stderr_ha, converged=result.converged,
                        iterations=result.iterations, parameters=result.parameters, resources=resources,
                        metadata=metadata, state=result.state)
