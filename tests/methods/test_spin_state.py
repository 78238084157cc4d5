"""Spin and electron number of returned states: the state check against OpenFermion, and the
``wrong-state`` status on both runner paths (in process and in a worker)."""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.methods.base import SectorState
from benchsuite.methods.builtin import ExactSector
from benchsuite.qubit.measurement import ShotPlan
from benchsuite.methods.problem import Encoding, build_problem
from benchsuite.methods.statecheck import StateError, check_state
from benchsuite.runner import contract, execute
from tests.methods.plugins import BadState, FakesStateCheck, SectorLowest, TripletState

H2_STRETCHED = "h2-scan@3"      # H2 at 3 A, STO-3G: the triplet lies ~0.7 mHa above the singlet


@pytest.fixture(scope="module")
def stretched(registry, ladder_cache):
    return build_problem(registry.case(H2_STRETCHED), cache=ladder_cache)


def _openfermion_dense(op, n_qubits: int) -> np.ndarray:
    """OpenFermion's sparse matrix of a FermionOperator under JW, re-indexed so that bit q of the
    basis index is qubit q (OpenFermion puts qubit 0 in the most significant bit)."""
    import openfermion as of

    mat = of.get_sparse_operator(of.jordan_wigner(op), n_qubits=n_qubits).toarray()
    idx = np.arange(1 << n_qubits)
    rev = np.zeros_like(idx)
    for q in range(n_qubits):
        rev |= ((idx >> q) & 1) << (n_qubits - 1 - q)
    return mat[np.ix_(rev, rev)]


def test_state_check_matches_openfermion_on_a_generic_state(registry, ladder_cache):
    """<N>, <S_z>, <S^2> of a random 8-qubit vector (H2/6-31G, JW interleaved = OpenFermion's
    up/down alternation) agree with OpenFermion's number, sz and s_squared operators."""
    import openfermion as of

    prepared = build_problem(registry.case("h2"), "6-31g", cache=ladder_cache)
    n = prepared.problem.n_qubits
    rng = np.random.default_rng(7)
    psi = rng.normal(size=1 << n) + 1j * rng.normal(size=1 << n)
    psi /= np.linalg.norm(psi)
    got = check_state(prepared.problem, psi)
    ops = {"n_electrons": of.number_operator(n), "sz": of.sz_operator(n // 2), "s2": of.s_squared_operator(n // 2)}
    for key, op in ops.items():
        want = np.vdot(psi, _openfermion_dense(op, n) @ psi).real
        assert got[key] == pytest.approx(want, abs=1e-10), key
    assert got["off"] and got["checked"]


@pytest.mark.parametrize("enc", [Encoding(), Encoding("bravyi-kitaev"), Encoding("parity", "blocked", False, True),
                                 Encoding(taper=True)], ids=lambda e: e.label)
def test_exact_sector_state_passes_its_check_in_every_encoding(registry, ladder_cache, enc):
    prepared = build_problem(registry.case(H2_STRETCHED), cache=ladder_cache, enc=enc)
    ref = prepared.reference
    out = execute(ExactSector(), prepared.problem, exact_ha=ref.energy_ha, sector_ha=ref.sector_lowest_ha,
                  isolate=False)
    check = out.metadata["state_check"]
    assert out.status == "ok", out.message
    assert check["checked"] and check["off"] == []
    assert check["n_electrons"] == pytest.approx(2.0, abs=1e-10) and check["s2"] == pytest.approx(0.0, abs=1e-10)
    assert out.metadata["s2"] == pytest.approx(0.0, abs=1e-10)


@pytest.mark.parametrize("isolate", [False, True], ids=["in-process", "worker"])
@pytest.mark.parametrize("dense", [False, True], ids=["sector-state", "dense-vector"])
def test_triplet_at_stretched_h2_is_wrong_state_not_pass(stretched, isolate, dense):
    """Its energy is within 1 kcal/mol of the singlet reference (0.70 mHa above), so only the spin
    check catches it; the message carries the measured values."""
    ref = stretched.reference
    out = execute(TripletState(), stretched.problem, {"dense": dense}, exact_ha=ref.energy_ha,
                  sector_ha=ref.sector_lowest_ha, isolate=isolate)
    assert 0.5 < 1000 * (out.energy_ha - ref.energy_ha) < 1.0
    assert out.status == "wrong-state"
    assert "<S^2> = 2.000000 (declared 0.000000)" in out.message and "<N> = 2.000000" in out.message
    assert out.metadata["state_check"]["s2"] == pytest.approx(2.0, abs=1e-8)


@pytest.mark.parametrize("isolate", [False, True], ids=["in-process", "worker"])
def test_forged_state_check_is_replaced_by_the_runners_own(stretched, isolate):
    ref = stretched.reference
    out = execute(FakesStateCheck(), stretched.problem, exact_ha=ref.energy_ha, sector_ha=ref.sector_lowest_ha,
                  isolate=isolate)
    assert out.status == "wrong-state" and out.metadata["state_check"]["s2"] == pytest.approx(2.0, abs=1e-8)


def test_malformed_state_is_invalid(stretched):
    out = execute(BadState(), stretched.problem, exact_ha=stretched.reference.energy_ha, isolate=False)
    assert out.status == "invalid" and "state vector of shape (3,)" in out.message
    with pytest.raises(StateError, match="5 qubits"):
        check_state(stretched.problem, SectorState(np.array([0]), np.array([1.0]), 5))


def test_no_state_is_recorded_as_unchecked(stretched):
    """Energy rules still apply: the (N, S_z) lowest energy is the singlet here, so this passes."""
    ref = stretched.reference
    out = execute(SectorLowest(), stretched.problem, exact_ha=ref.energy_ha, sector_ha=ref.sector_lowest_ha,
                  isolate=False)
    assert out.status == "ok"
    assert out.metadata["state_check"] == {"checked": False, "note": "the method returned no state",
                                           "declared": {"n_electrons": 2.0, "sz": 0.0, "s2": 0.0}}


def test_measured_result_keeps_the_state_it_measured(stretched):
    out = execute(ExactSector(), stretched.problem, exact_ha=stretched.reference.energy_ha,
                  isolate=False, shots=ShotPlan(1000))
    assert out.resources["shots"] == 1000 and out.stderr_ha > 0
    assert out.metadata["state_check"]["checked"] and out.metadata["state_check"]["off"] == []


def test_worker_cannot_claim_a_decided_status_or_send_a_bad_check():
    """below-exact and wrong-state are the parent's decision; a state check must hold numbers."""
    for status in ("wrong-state", "below-exact"):
        assert contract.checked_fields({"status": status, "energy_ha": -1.0}, True)["status"] == "error"
    bad = {"status": "ok", "energy_ha": -1.0,
           "metadata": {"state_check": {"checked": True, "n_electrons": "two", "sz": 0.0,
                                        "declared": {"n_electrons": 2.0, "sz": 0.0, "s2": 0.0}}}}
    got = contract.checked_fields(bad, True)
    assert got["status"] == "invalid" and "state_check.n_electrons" in got["message"]
    big = {"status": "ok", "energy_ha": -1.0, "metadata": {"log": "z" * (contract.MAX_METADATA_JSON_BYTES + 10),
           "state_check": {"checked": True, "n_electrons": 2.0, "sz": 0.0, "s2": 2.0,
                           "declared": {"n_electrons": 2.0, "sz": 0.0, "s2": 0.0}}}}
    kept = contract.checked_fields(big, True)["metadata"]
    assert "metadata_truncated" in kept and kept["state_check"]["s2"] == 2.0
