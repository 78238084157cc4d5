"""Resource metrics: QWC colouring validity and shot formulas against a
brute-force evaluation with OpenFermion's dense matrices of each string."""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.qubit.hamiltonian import encode_integrals
from benchsuite.qubit.metrics import qwc_groups, resource_metrics, shot_estimate
from benchsuite.qubit.pauli import PauliSum, qubitwise_commute
from benchsuite.qubit.sector import sector_eigen
from benchsuite.qubit.tapering import taper


def _dense(ps: PauliSum) -> np.ndarray:
    """OpenFermion's matrix, reindexed to our basis order (bit q = qubit q)."""
    import openfermion as of

    n = ps.n_qubits
    m = of.get_sparse_operator(ps.to_openfermion(), n_qubits=n).toarray()
    perm = [int(format(i, f"0{n}b")[::-1], 2) for i in range(2 ** n)]
    return m[np.ix_(perm, perm)]


@pytest.mark.parametrize("name", ["h2o", "n2"])
def test_qwc_groups_are_valid_and_complete(case_ints, name):
    ham = encode_integrals(case_ints(name, "sto-3g")[0])
    p = ham.pauli
    groups = qwc_groups(p)
    is_id = (p.x == 0) & (p.z == 0)
    assert np.all(groups[is_id] == -1) and np.all(groups[~is_id] >= 0)
    for g in range(groups.max() + 1):
        members = np.flatnonzero(groups == g)
        xa, za = p.x[members][:, None], p.z[members][:, None]
        assert np.all(qubitwise_commute(xa, za, xa.T, za.T))
    # Greedy by |c|: the largest non-identity term opens group 0.
    biggest = np.argmax(np.where(is_id, -1, np.abs(p.coeffs)))
    assert groups[biggest] == 0
    assert groups.max() + 1 < len(p)


def _brute_force_shots(p: PauliSum, psi: np.ndarray, groups: np.ndarray, eps: float):
    sig = []
    for j in range(len(p)):
        if p.x[j] == 0 and p.z[j] == 0:
            continue
        m = _dense(PauliSum(p.n_qubits, p.x[j:j + 1], p.z[j:j + 1], [1.0]))
        ev = np.vdot(psi, m @ psi).real
        sig.append(abs(p.coeffs[j]) * np.sqrt(max(0.0, 1 - ev ** 2)))
    sd_groups = []
    for g in range(groups.max() + 1):
        members = np.flatnonzero(groups == g)
        m = _dense(PauliSum(p.n_qubits, p.x[members], p.z[members], p.coeffs[members]))
        mean = np.vdot(psi, m @ psi).real
        sd_groups.append(np.sqrt(max(0.0, np.vdot(psi, m @ (m @ psi)).real - mean ** 2)))
    return sum(sig) ** 2 / eps ** 2, sum(sd_groups) ** 2 / eps ** 2


@pytest.mark.parametrize("state_kind", ["hartree-fock", "ground"])
def test_shot_formulas_match_brute_force(case_ints, state_kind):
    """M = (sum |c_j| sigma_j)^2 / eps^2 and M = (sum_g sd(H_g))^2 / eps^2
    (Wecker, Hastings & Troyer, PRA 92, 042303 (2015); Rubin, Babbush &
    McClean, NJP 20, 053020 (2018)), evaluated here from dense matrices."""
    mo = case_ints("heh-cation", "6-31g")[0]  # 8 qubits
    ham = encode_integrals(mo, "bravyi-kitaev")
    p = ham.pauli
    eps = 1.6e-3
    if state_kind == "hartree-fock":
        psi = np.zeros(2 ** p.n_qubits)
        psi[ham.hf_state()] = 1.0
        state = ham.hf_state()
    else:
        res = sector_eigen(ham, keep_vectors=True)
        psi = np.zeros(2 ** p.n_qubits)
        psi[res.states.astype(np.int64)] = res.vectors[:, 0]
        state = psi
        assert np.vdot(psi, _dense(p) @ psi).real == pytest.approx(res.ground_ha, abs=1e-9)
    groups = qwc_groups(p)
    est = shot_estimate(p, state, eps, groups)
    ref_none, ref_grouped = _brute_force_shots(p, psi, groups, eps)
    assert est.no_grouping == pytest.approx(ref_none, rel=1e-9)
    assert est.with_grouping == pytest.approx(ref_grouped, rel=1e-9)
    assert est.upper_bound == pytest.approx(p.one_norm() ** 2 / eps ** 2, rel=1e-12)
    assert est.no_grouping <= est.upper_bound and est.with_grouping <= est.upper_bound * (1 + 1e-12)


def test_resource_metrics_record(case_ints):
    mo = case_ints("lih", "sto-3g")[0]
    ham = encode_integrals(mo)
    tap = taper(ham)
    m_full, m_tap = resource_metrics(ham), resource_metrics(tap)
    assert m_full["n_qubits"] == m_full["n_qubits_before_reductions"] == 12
    assert m_tap["n_qubits_before_reductions"] == 12
    assert m_tap["n_qubits"] == 12 - m_tap["qubits_removed"] < 12
    assert m_full["n_terms"] == len(ham.pauli) - 1  # identity excluded
    assert m_full["one_norm_ha"] == pytest.approx(float(np.abs(ham.pauli.coeffs).sum() - abs(ham.constant_ha)))
    assert "identity excluded" in m_full["one_norm_definition"]
    assert m_full["shots"]["state"] == "hartree-fock"
    assert 0 < m_full["qwc_groups"] < m_full["n_terms"]
