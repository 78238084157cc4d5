"""Electron number and spin of a state a method returned, measured by the benchsuite itself.

A method may return its final state (``MethodResult.state``): a
:class:`~benchsuite.methods.base.SectorState` or a dense vector of the
problem's register (length 2^n_qubits, index bit q = qubit q, after any
reductions).  :func:`check_state` measures on it, independently of the method,

* <N> = <N_alpha> + <N_beta>, <S_z> = (<N_alpha> - <N_beta>) / 2 and
  <S^2> = <S_- S_+ + S_z + S_z^2> (hbar = 1),

with each operator encoded like the Hamiltonian (same encoding, ordering and
reductions: :meth:`QubitHamiltonian.transform`) and its expectation value taken
term by term on the state's amplitudes (sigma(x, z)|b> = i^{|x&z|} (-1)^{|z&b|}
|b ^ x>).  The state is normalised first; its norm is reported.  <S^2> is None
when S^2 does not commute with a tapered symmetry (it has no form on the
reduced register).  The declared values are N and S_z of the problem and
S(S+1) with S = (multiplicity - 1) / 2.

The comparison with the declared values is :func:`benchsuite.scoring.state_deviations`
(tolerance :data:`benchsuite.scoring.STATE_TOLERANCE`).
"""

from __future__ import annotations

import numpy as np

from benchsuite.methods.base import QubitProblem, SectorState
from benchsuite.qubit.encodings import mode_indices
from benchsuite.qubit.majorana import number_pauli, spin_square_pauli
from benchsuite.qubit.pauli import PauliSum, i_power, parity, popcount
from benchsuite.scoring import state_deviations

#: Basis states per block when signs are evaluated (bounds the work arrays to terms x block).
_CHUNK = 1 << 14

#: Largest register a dense state vector is accepted for (2^n complex amplitudes).
MAX_DENSE_QUBITS = 26


class StateError(ValueError):
    """A returned state that cannot be a state of the problem's register (shape, type, norm)."""


def sparse_state(state, n_qubits: int) -> tuple[np.ndarray, np.ndarray, float]:
    """``(basis_states, amplitudes, norm)`` of a SectorState or a dense vector: normalised, sorted by state."""
    if isinstance(state, SectorState):
        if state.n_qubits != n_qubits:
            raise StateError(f"state is on {state.n_qubits} qubits, the problem's register has {n_qubits}")
        states = np.asarray(state.basis_states).astype(np.uint64).ravel()
        amps = np.asarray(state.amplitudes, dtype=complex).ravel()
        if states.size != amps.size:
            raise StateError(f"{states.size} basis states but {amps.size} amplitudes")
        if states.size and int(states.max()) >> n_qubits:
            raise StateError(f"a basis state lies outside the {n_qubits}-qubit register")
    else:
        if n_qubits > MAX_DENSE_QUBITS:
            raise StateError(f"dense state vectors are accepted up to {MAX_DENSE_QUBITS} qubits")
        try:
            vec = np.asarray(state, dtype=complex)
        except (TypeError, ValueError):
            raise StateError(f"state of type {type(state).__name__} is neither a SectorState "
                             f"nor a vector") from None
        if vec.ndim != 1 or vec.size != 1 << n_qubits:
            raise StateError(f"state vector of shape {vec.shape}; the register needs {1 << n_qubits} amplitudes")
        states = np.flatnonzero(vec).astype(np.uint64)
        amps = vec[states.astype(np.int64)]
    if not np.all(np.isfinite(amps)):
        raise StateError("state amplitudes are not all finite")
    order = np.argsort(states, kind="stable")
    states, amps = states[order], amps[order]
    if states.size > 1 and np.any(states[1:] == states[:-1]):
        raise StateError("a basis state appears twice in the state")
    norm = float(np.linalg.norm(amps))
    if norm == 0.0:
        raise StateError("state has zero norm")
    return states, amps / norm, norm


def expectation(pauli: PauliSum, states: np.ndarray, amps: np.ndarray) -> complex:
    """<psi| pauli |psi> for psi = sum_k amps[k] |states[k]> (``states`` sorted ascending)."""
    order = np.argsort(pauli.x, kind="stable")
    xs, zs, cs = pauli.x[order], pauli.z[order], pauli.coeffs[order]
    starts = np.flatnonzero(np.concatenate([[True], xs[1:] != xs[:-1]])) if xs.size else np.zeros(0, int)
    ends = np.append(starts[1:], xs.size)
    weights = cs * i_power(popcount(xs & zs))
    total = 0.0 + 0.0j
    for s, e in zip(starts, ends):
        targets = states ^ xs[s]
        pos = np.minimum(np.searchsorted(states, targets), states.size - 1)
        hit = states[pos] == targets
        if not np.any(hit):
            continue
        b, bra, ket = states[hit], np.conj(amps[pos[hit]]), amps[hit]
        for lo in range(0, b.size, _CHUNK):          # bounded memory: terms x chunk signs at a time
            hi = lo + _CHUNK
            phase = weights[s:e] @ (1 - 2 * parity(zs[s:e, None] & b[None, lo:hi]))
            total += np.sum(bra[lo:hi] * phase * ket[lo:hi])
    return complex(total)


def declared_values(problem: QubitProblem) -> dict:
    """N, S_z and S(S+1) that the problem's answer must have."""
    spin = 0.5 * (problem.multiplicity - 1)
    return {"n_electrons": float(problem.n_electrons), "sz": 0.5 * (problem.n_alpha - problem.n_beta),
            "s2": spin * (spin + 1.0)}


def spin_operators(ham) -> tuple[PauliSum, PauliSum, PauliSum | None]:
    """N_alpha, N_beta and S^2 on the Hamiltonian's (reduced) register; S^2 None if it has no form there."""
    ia, ib = mode_indices(ham.n_orbitals, ham.ordering)
    n_alpha = ham.transform(number_pauli(ia, ham.table))
    n_beta = ham.transform(number_pauli(ib, ham.table))
    try:
        s2 = ham.transform(spin_square_pauli(ham.n_orbitals, ham.ordering, ham.table))
    except ValueError:
        s2 = None
    return n_alpha, n_beta, s2


def measure(problem: QubitProblem, state) -> dict:
    """<N>, <S_z>, <S^2> and the norm of ``state`` (raises :class:`StateError` for a malformed one)."""
    states, amps, norm = sparse_state(state, problem.n_qubits)
    n_alpha, n_beta, s2 = spin_operators(problem.hamiltonian)
    na = expectation(n_alpha, states, amps).real
    nb = expectation(n_beta, states, amps).real
    return {"n_electrons": na + nb, "sz": 0.5 * (na - nb),
            "s2": None if s2 is None else expectation(s2, states, amps).real,
            "norm": norm, "n_basis_states": int(states.size)}


def check_state(problem: QubitProblem, state) -> dict:
    """The state check recorded in a result's ``metadata["state_check"]`` (JSON-ready).

    ``checked`` False with a ``note`` when there is no state; a malformed state raises
    :class:`StateError`.  ``off`` lists the quantities off their declared values.
    """
    declared = declared_values(problem)
    if state is None:
        return {"checked": False, "note": "the method returned no state", "declared": declared}
    check = {"checked": True, **measure(problem, state), "declared": declared}
    if check["s2"] is None:
        check["note"] = "S^2 does not commute with a tapered symmetry: <S^2> not measured"
    check["off"] = state_deviations(check)
    return check
