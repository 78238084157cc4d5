"""Resource metrics of a qubit Hamiltonian.

Definitions (every output names them):

* ``n_terms``: Pauli strings other than the identity.
* ``one_norm_ha``: lambda = sum_j |c_j| over the non-identity strings
  (hartree), after strings with |c| <= ``drop_tolerance_ha`` were dropped
  (their summed |c| is ``dropped_one_norm_ha``).  The identity's coefficient shifts every energy equally and
  needs no measurement, so it is excluded (common practice).
* ``qwc_groups``: number of qubit-wise-commuting measurement groups found by
  a greedy colouring: strings sorted by |c| descending (ties: canonical
  order), each put in the first group whose every member it qubit-wise
  commutes with, else in a new group.  A group's members agree on every
  qubit where both act, so one tensor-product basis measures them all.
  Greedy colouring gives an upper bound on the minimum number of groups
  (Verteletskyi, Yen & Izmaylov, J. Chem. Phys. 152, 124114 (2020), compare
  such heuristics; reference from memory).
* Shots for a target standard error eps of the energy estimate, from
  variances on a given state |psi> (Wecker, Hastings & Troyer, Phys. Rev. A
  92, 042303 (2015); Rubin, Babbush & McClean, New J. Phys. 20, 053020
  (2018); the formulas below as recalled from these papers, from memory):

    - no grouping, each string measured separately, shots allocated
      optimally (M_j proportional to |c_j| sigma_j):
          M = (sum_j |c_j| sigma_j)^2 / eps^2,   sigma_j^2 = 1 - <P_j>^2;
    - with the QWC groups above, shots allocated optimally over groups:
          M = (sum_g sqrt(Var_psi(H_g)))^2 / eps^2,  H_g = sum_{j in g} c_j P_j;
    - state-independent bound (sigma_j <= 1): M <= lambda^2 / eps^2.

  On a computational basis state (the Hartree-Fock default) every X-free
  string has zero variance, so these are the shots of a perfect reference;
  pass the exact ground state (``state=`` a vector on the register) for the
  correlated value.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from benchsuite.constants import CHEMICAL_ACCURACY_MHA
from benchsuite.qubit.hamiltonian import QubitHamiltonian
from benchsuite.qubit.pauli import PauliSum, i_power, is_zero, parity, popcount, qubitwise_commute

#: Default target standard error: chemical accuracy, 1 kcal/mol in hartree.
DEFAULT_EPSILON_HA = CHEMICAL_ACCURACY_MHA / 1000.0

GROUPING_METHOD = "greedy first-fit QWC colouring, strings by |c| descending"


#: The greedy colouring costs O(strings x groups); above this many non-identity strings it is not
#: attempted (``qwc_groups`` is then None, with the reason in ``grouping_method``).  Measured on one
#: core (2026-12): H2O/cc-pVDZ JW, 1.29 x 10^5 strings, 6.4 s; NH3/cc-pVDZ JW, 5.23 x 10^5 strings,
#: 148 s (cost ~ strings^2.3), so the limit costs about 20 s and the 120-qubit N2/cc-pVTZ case
#: (2.05 x 10^6 strings, about an hour by that law) is reported ungrouped.
MAX_GROUPING_STRINGS = 200_000


def qwc_groups(pauli: PauliSum) -> np.ndarray:
    """Group index of each term of ``pauli`` (the identity gets -1), by the
    greedy colouring described in the module docstring.  Any register width:
    a group's signature has the masks' layout ((G,) or (G, n_words))."""
    n = len(pauli)
    wide = pauli.wide
    group = np.full(n, -1, dtype=np.int64)
    order = np.argsort(-np.abs(pauli.coeffs), kind="stable")
    order = order[~pauli.identity_terms()[order]]
    # A group's signature: the letter on each qubit where any member acts.
    sig_x = np.zeros((0,) + pauli.x.shape[1:], dtype=np.uint64)
    sig_z = np.zeros_like(sig_x)
    count = 0
    for t in order:
        x, z = pauli.x[t], pauli.z[t]
        hit = np.flatnonzero(qubitwise_commute(sig_x[:count], sig_z[:count], x, z, wide)) if count else ()
        if len(hit):
            g = int(hit[0])
            sig_x[g] |= x
            sig_z[g] |= z
        else:
            if count == sig_x.shape[0]:
                grow = np.zeros((max(16, count),) + sig_x.shape[1:], dtype=np.uint64)
                sig_x, sig_z = np.concatenate([sig_x, grow]), np.concatenate([sig_z, grow])
            g = count
            sig_x[g], sig_z[g] = x, z
            count += 1
        group[t] = g
    return group


def groups_within_limit(pauli: PauliSum) -> np.ndarray | None:
    """:func:`qwc_groups`, or None when ``pauli`` has more than :data:`MAX_GROUPING_STRINGS`
    non-identity strings (the module global, read at call time)."""
    return qwc_groups(pauli) if pauli.n_strings() <= MAX_GROUPING_STRINGS else None


def n_groups_of(groups: np.ndarray | None) -> int | None:
    """Number of QWC groups in a :func:`qwc_groups` array (None stays None)."""
    if groups is None:
        return None
    return int(groups.max()) + 1 if groups.size and groups.max() >= 0 else 0


def grouping_method(pauli: PauliSum, groups: np.ndarray | None) -> str:
    """:data:`GROUPING_METHOD`, or why no grouping was computed."""
    if groups is not None:
        return GROUPING_METHOD
    return (f"not computed: {pauli.n_strings()} strings exceed the greedy colouring's limit of "
            f"{MAX_GROUPING_STRINGS} (benchsuite.qubit.metrics.MAX_GROUPING_STRINGS)")


def register_figures(pauli: PauliSum) -> dict:
    """``n_qubits``, ``n_terms`` (non-identity strings), ``one_norm_ha`` (Eh) and ``qwc_groups`` (None
    past :data:`MAX_GROUPING_STRINGS`) of a task's Pauli sum, as the runner records them."""
    return {"n_qubits": pauli.n_qubits, "n_terms": pauli.n_strings(), "one_norm_ha": float(pauli.one_norm()),
            "qwc_groups": n_groups_of(groups_within_limit(pauli))}


#: Dense state vectors are accepted on registers up to this size (2^n amplitudes,
#: work proportional to n_terms * 2^n).
MAX_DENSE_QUBITS = 18


def _term_actions(pauli: PauliSum, psi: np.ndarray):
    """Yield (term index, P_j |psi>) for a dense state (bit q of the index = qubit q)."""
    n = pauli.n_qubits
    if n > MAX_DENSE_QUBITS:
        raise ValueError(f"dense states are limited to {MAX_DENSE_QUBITS} qubits, this register has {n}")
    if psi.shape != (1 << n,):
        raise ValueError(f"state of length {psi.shape[0]} for a {n}-qubit register")
    basis = np.arange(1 << n, dtype=np.uint64)
    ny = popcount(pauli.x & pauli.z)
    for j in range(len(pauli)):
        x, z = pauli.x[j], pauli.z[j]
        out = np.empty(psi.shape, dtype=np.complex128)
        out[(basis ^ x).astype(np.int64)] = i_power(ny[j]) * (1 - 2 * parity(basis & z)) * psi
        yield j, out


def apply_pauli(pauli: PauliSum, psi: np.ndarray) -> np.ndarray:
    """pauli |psi> for a dense state on the whole register (length 2^n, bit q = qubit q)."""
    out = np.zeros(psi.shape, dtype=np.complex128)
    for j, p_psi in _term_actions(pauli, psi):
        out += pauli.coeffs[j] * p_psi
    return out


def _basis_state_variances(pauli: PauliSum, groups: np.ndarray | None, state: int):
    """sigma_j and Var(H_g) on a basis state: <P_j> = +-1 for X-free strings, 0 otherwise;
    within a QWC group only strings with equal X masks have nonzero covariance, so
    Var(H_g) = sum over X masks x != 0 in g of (sum_j c_j (-1)^{|z_j & b|})^2.
    ``groups`` None: sigma only (var is None).  Any register width."""
    wide = pauli.wide
    b = pauli.register.masks([int(state)])[0]
    signs = (1 - 2 * parity(pauli.z & b, wide)).astype(float)
    x_free = is_zero(pauli.x, wide)
    expect = np.where(x_free, signs, 0.0)
    sigma = np.sqrt(np.clip(1.0 - expect ** 2, 0.0, None))
    if groups is None:
        return sigma, None
    mask = (groups >= 0) & ~x_free
    var = np.zeros(n_groups_of(groups))
    if np.any(mask):
        c = np.real(pauli.coeffs[mask]) * signs[mask]
        key_g, key_x = groups[mask], pauli.x[mask].reshape(int(mask.sum()), -1)
        order = np.lexsort((*(key_x[:, w] for w in reversed(range(key_x.shape[1]))), key_g))
        kg, kx, cs = key_g[order], key_x[order], c[order]
        start = np.concatenate([[True], (kg[1:] != kg[:-1]) | np.any(kx[1:] != kx[:-1], axis=1)])
        idx = np.flatnonzero(start)
        sums = np.add.reduceat(cs, idx)
        np.add.at(var, kg[idx], sums ** 2)
    return sigma, var


def _dense_state_variances(pauli: PauliSum, groups: np.ndarray, psi: np.ndarray):
    """sigma_j from <P_j> and Var(H_g) = ||H_g psi||^2 - <H_g>^2 on a dense state."""
    psi = np.asarray(psi, dtype=np.complex128)
    psi = psi / np.linalg.norm(psi)
    n_groups = int(groups.max()) + 1 if groups.size and groups.max() >= 0 else 0
    sigma = np.zeros(len(pauli))
    h_psi = np.zeros((n_groups,) + psi.shape, dtype=np.complex128) if n_groups * psi.size <= 2 ** 26 else None
    var = np.zeros(n_groups)
    if h_psi is None:  # group by group to bound memory
        for g in range(n_groups):
            members = np.flatnonzero(groups == g)
            sub = PauliSum(pauli.n_qubits, pauli.x[members], pauli.z[members], pauli.coeffs[members], merge=False)
            acc = np.zeros(psi.shape, dtype=np.complex128)
            for k, p_psi in _term_actions(sub, psi):
                sigma[members[k]] = np.sqrt(max(1.0 - np.vdot(psi, p_psi).real ** 2, 0.0))
                acc += sub.coeffs[k] * p_psi
            var[g] = max(np.vdot(acc, acc).real - np.vdot(psi, acc).real ** 2, 0.0)
        return sigma, var
    for j, p_psi in _term_actions(pauli, psi):
        sigma[j] = np.sqrt(max(1.0 - np.vdot(psi, p_psi).real ** 2, 0.0))
        if groups[j] >= 0:
            h_psi[groups[j]] += pauli.coeffs[j] * p_psi
    for g in range(n_groups):
        var[g] = max(np.vdot(h_psi[g], h_psi[g]).real - np.vdot(psi, h_psi[g]).real ** 2, 0.0)
    return sigma, var


@dataclass(frozen=True)
class ShotEstimate:
    """Shots for standard error ``epsilon_ha`` (Eh); ``with_grouping`` is None where no QWC grouping
    was computed (more strings than :data:`MAX_GROUPING_STRINGS`)."""

    epsilon_ha: float
    state: str
    no_grouping: float
    with_grouping: float | None
    upper_bound: float
    formula: str = ("M = (sum_j |c_j| sigma_j)^2 / eps^2 (no grouping); "
                    "M = (sum_g sqrt(Var H_g))^2 / eps^2 (QWC groups); bound lambda^2 / eps^2 "
                    "[Wecker, Hastings & Troyer, PRA 92, 042303 (2015); Rubin, Babbush & McClean, "
                    "NJP 20, 053020 (2018)]")

    def as_dict(self) -> dict:
        return asdict(self)


_UNSET = object()


def shot_estimate(pauli: PauliSum, state: int | np.ndarray, epsilon_ha: float = DEFAULT_EPSILON_HA,
                  groups=_UNSET, state_label: str | None = None) -> ShotEstimate:
    """Shots to reach standard error ``epsilon_ha`` on ``state`` (basis-state integer or dense vector).

    ``groups``: a :func:`qwc_groups` array, None for no grouped figure, or (default) computed here
    within :data:`MAX_GROUPING_STRINGS`."""
    if epsilon_ha <= 0:
        raise ValueError("epsilon must be positive")
    if not pauli.is_hermitian():
        raise ValueError("shot estimates need a Hermitian Pauli sum")
    pauli = pauli.real()
    groups = groups_within_limit(pauli) if groups is _UNSET else groups
    if isinstance(state, (int, np.integer)):
        sigma, var = _basis_state_variances(pauli, groups, int(state))
        label = state_label or f"basis state {int(state)}"
    else:
        if groups is None:
            raise ValueError("dense-state shot estimates need QWC groups")
        sigma, var = _dense_state_variances(pauli, groups, np.asarray(state))
        label = state_label or "given state vector"
    non_id = ~pauli.identity_terms()
    no_group = float(np.sum(np.abs(pauli.coeffs[non_id]) * sigma[non_id]) ** 2 / epsilon_ha ** 2)
    with_group = None if var is None else float(np.sum(np.sqrt(var)) ** 2 / epsilon_ha ** 2)
    bound = float(pauli.one_norm() ** 2 / epsilon_ha ** 2)
    return ShotEstimate(epsilon_ha, label, no_group, with_group, bound)


def resource_metrics(ham: QubitHamiltonian, epsilon_ha: float = DEFAULT_EPSILON_HA,
                     state: int | np.ndarray | None = None, state_label: str | None = None) -> dict:
    """Metrics of ``ham`` as a JSON-ready dict (definitions in the module docstring).

    Shots are evaluated on ``state`` (default: the Hartree-Fock basis state).  Any register width;
    past :data:`MAX_GROUPING_STRINGS` strings ``qwc_groups`` and the grouped shot count are None.
    """
    pauli = ham.pauli
    groups = groups_within_limit(pauli)
    if state is None:
        state, state_label = ham.hf_state(), "hartree-fock"
    shots = shot_estimate(pauli, state, epsilon_ha, groups, state_label)
    removed = sum(r.n_removed for r in ham.reductions)
    return {
        "n_qubits_before_reductions": ham.n_modes,
        "n_qubits": ham.n_qubits,
        "qubits_removed": removed,
        "n_terms": pauli.n_strings(),
        "one_norm_ha": pauli.one_norm(),
        "one_norm_definition": "sum of |c| over Pauli strings, identity excluded",
        "drop_tolerance_ha": ham.tolerance,
        "dropped_one_norm_ha": ham.dropped_one_norm_ha,
        "qwc_groups": n_groups_of(groups),
        "grouping_method": grouping_method(pauli, groups),
        "shots": shots.as_dict(),
    }
