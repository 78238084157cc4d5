"""The measurement stage: a state's energy estimated from finite shots.

Any method that returns a state can have its result passed through this stage
(``--shots N`` on the command line, ``shots=`` in the API): the method's own
energy is replaced by a shot estimate with a standard error, which the gate then
judges as a stochastic result (z * sigma, run-level multiple-testing control).

Conventions
-----------
* Qubit q is bit q of a basis index (as in :mod:`benchsuite.qubit.pauli`).
* The Hamiltonian's terms are split into qubit-wise-commuting groups
  (:func:`benchsuite.qubit.metrics.qwc_groups`); each group is measured after the
  single-qubit rotations that turn its letters into Z (X -> H, Y -> H S^dagger),
  by drawing outcomes from the Born distribution (``numpy.random.Generator``).
* Estimator: identity coefficient + sum over groups of the sample mean of the
  group's per-shot value.  Standard error sqrt(sum_g s_g^2 / m_g) with s_g^2 the
  unbiased (n - 1) sample variance of group g's m_g values.  A group with a single
  shot has no sample variance; its variance is then bounded from above by
  (sum_j |c_j|)^2, the square of half the range of its values (Popoviciu), so the
  stated error never claims more precision than the data give.
* Allocation ``uniform`` splits the shots evenly; ``proportional`` gives each group
  a share proportional to its exact standard deviation on the state (an oracle
  allocation, the optimum for a fixed budget; Rubin, Babbush & McClean,
  New J. Phys. 20, 053020, 2018).  Every group gets at least one shot.
Energies in hartree.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from benchsuite.qubit.metrics import qwc_groups
from benchsuite.qubit.pauli import parity
from benchsuite.qubit.register import Register

ALLOCATIONS = ("uniform", "proportional")
#: Widest register the stage measures (the state is held densely: 2^n amplitudes).
MAX_MEASURED_QUBITS = 18


@dataclass(frozen=True)
class ShotPlan:
    """How a state is measured: ``shots`` in total, split between groups by ``allocation``."""

    shots: int
    allocation: str = "uniform"

    def problems(self) -> list[str]:
        """What is wrong with the plan, as sentences naming the option."""
        out = []
        if isinstance(self.shots, bool) or not isinstance(self.shots, int) or self.shots < 1:
            out.append(f"--shots must be a whole number >= 1, got {self.shots!r}")
        if self.allocation not in ALLOCATIONS:
            out.append(f"--shot-allocation must be one of {list(ALLOCATIONS)}, got {self.allocation!r}")
        return out

    def as_dict(self) -> dict:
        return {"shots": self.shots, "allocation": self.allocation}


@dataclass(frozen=True)
class ShotEstimate:
    """A sampled energy: value and standard error (Eh), shots spent, per-group shot counts."""

    energy_ha: float
    stderr_ha: float
    shots: int
    groups: int
    shots_per_group: tuple[int, ...]


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
    group's standard deviation (largest remainders get the leftover shots)."""
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


@dataclass(frozen=True)
class _Group:
    probs: np.ndarray          # Born probabilities of each outcome after rotation
    values: np.ndarray         # the group's value on each outcome (Eh)
    sigma_ha: float            # exact standard deviation of the value on the state
    bound_ha: float            # sum_j |c_j|: half the range of the values


def measurement_groups(pauli, psi: np.ndarray, n_qubits: int) -> tuple[float, list[_Group]]:
    """The identity coefficient and every QWC group's outcome distribution on ``psi`` (real Pauli sum)."""
    groups = qwc_groups(pauli)
    n_groups = int(groups.max()) + 1 if groups.size and groups.max() >= 0 else 0
    constant = float(np.real(pauli.identity_coeff()))
    support = pauli.x | pauli.z
    coeffs = np.real(pauli.coeffs)
    outcomes = np.arange(1 << n_qubits, dtype=np.uint64)
    out = []
    for g in range(n_groups):
        members = np.flatnonzero(groups == g)
        xg = int(np.bitwise_or.reduce(pauli.x[members]))
        zg = int(np.bitwise_or.reduce(pauli.z[members]))
        p = np.abs(rotate_to_measurement_basis(psi, n_qubits, xg, zg)) ** 2
        p /= p.sum()
        v = group_values(support[members], coeffs[members], outcomes)
        sigma = np.sqrt(max(float(p @ v ** 2 - (p @ v) ** 2), 0.0))
        out.append(_Group(p, v, sigma, float(np.abs(coeffs[members]).sum())))
    return constant, out


def group_variance(sample: np.ndarray, bound_ha: float) -> float:
    """Unbiased (n - 1) sample variance of one group's values; with one shot, the bound bound_ha^2."""
    return float(sample.var(ddof=1)) if sample.size > 1 else bound_ha ** 2


def check_measurable(n_qubits: int) -> None:
    """Refuse (:class:`~benchsuite.qubit.register.RegisterTooWide`) registers past :data:`MAX_MEASURED_QUBITS`:
    the stage rotates a dense 2^n state vector per group."""
    Register(n_qubits).require(MAX_MEASURED_QUBITS, "the measurement stage", "it rotates a dense 2^n state")


def estimate_energy(pauli, psi: np.ndarray, n_qubits: int, plan: ShotPlan, rng) -> ShotEstimate:
    """Sampled <psi|H|psi> with its standard error (module conventions); ``rng`` a numpy Generator."""
    check_measurable(n_qubits)
    constant, groups = measurement_groups(pauli, psi, n_qubits)
    sigmas = np.array([g.sigma_ha for g in groups])
    per_group = allocate_shots(plan.shots, sigmas, plan.allocation) if groups else np.zeros(0, np.int64)
    energy, variance = constant, 0.0
    for g, m in zip(groups, per_group):
        sample = g.values[rng.choice(len(g.probs), size=int(m), p=g.probs)]
        energy += float(sample.mean())
        variance += group_variance(sample, g.bound_ha) / int(m)
    return ShotEstimate(energy, float(np.sqrt(variance)), int(per_group.sum()), len(groups),
                        tuple(int(m) for m in per_group))
