"""Built-in reference methods: HF bitstring, exact sector, and the shot-sampled estimator."""

from __future__ import annotations

import json

import numpy as np
import pytest

from benchsuite.methods.base import resolve_options
from benchsuite.methods.builtin import ExactSector, HartreeFockBitstring, SampledEnergy, sample_energy
from benchsuite.methods.problem import Encoding, build_problem
from benchsuite.qubit.metrics import qwc_groups


@pytest.fixture
def lih(registry, ladder_cache):
    return build_problem(registry.case("lih"), cache=ladder_cache, seed=11)


@pytest.mark.parametrize("name", ["h2", "heh-cation", "lih", "oh"])
def test_hf_bitstring_and_exact_sector_against_the_ladder(registry, ladder_cache, name):
    """HF determinant energy = SCF energy and the exact sector energy = FCI (PySCF) within 1e-8."""
    prep = build_problem(registry.case(name), cache=ladder_cache)
    hf = HartreeFockBitstring().run(prep.problem, {})
    exact = ExactSector().run(prep.problem, resolve_options(ExactSector(), {}))
    assert hf.energy_ha == pytest.approx(prep.ladder.rung("hf").energy_ha, abs=1e-8)
    assert exact.energy_ha == pytest.approx(prep.reference.energy_ha, abs=1e-8)
    s = (registry.case(name).multiplicity - 1) / 2
    assert exact.metadata["s2"] == pytest.approx(s * (s + 1), abs=1e-6)


def test_exact_sector_under_every_encoding(registry, ladder_cache):
    case = registry.case("lih")
    ref = None
    for enc in (Encoding("bravyi-kitaev"), Encoding("parity", "blocked", drop_spin_parity_qubits=True),
                Encoding("jordan-wigner", taper=True)):
        prep = build_problem(case, enc=enc, cache=ladder_cache)
        ref = prep.reference.energy_ha
        e = ExactSector().run(prep.problem, resolve_options(ExactSector(), {})).energy_ha
        assert e == pytest.approx(ref, abs=1e-8), enc.label


def test_group_rotation_reproduces_the_exact_expectation(lih):
    """sum over QWC groups of the rotated-basis expectations equals <psi|H|psi> computed densely
    from the Pauli matrices (an independent route: OpenFermion's sparse operator)."""
    import openfermion

    problem = lih.problem
    state = ExactSector().run(problem, resolve_options(ExactSector(), {})).state
    psi = state.dense()
    n = problem.n_qubits
    # OpenFermion's sparse matrices put qubit 0 in the most significant bit; ours in the least.
    psi_of = psi.reshape((2,) * n).transpose(tuple(reversed(range(n)))).reshape(-1)
    h_sparse = openfermion.get_sparse_operator(problem.hamiltonian.pauli.to_openfermion(), n)
    exact = float(np.real(psi_of.conj() @ (h_sparse @ psi_of)))
    # an effectively infinite sample: the Born probabilities themselves
    est = sample_energy(problem.hamiltonian.pauli.real(), psi, problem.n_qubits, 2_000_000, "proportional",
                        np.random.default_rng(0))
    assert est["energy_ha"] == pytest.approx(exact, abs=5 * est["stderr_ha"] + 1e-9)
    assert exact == pytest.approx(lih.reference.energy_ha, abs=1e-8)


def test_sampled_standard_error_falls_as_inverse_sqrt_shots(lih):
    """Common practice (central limit theorem): 16x the shots gives 1/4 the standard error; the
    reported error matches the spread of seeded repetitions.  Shot counts leave ~45 or more shots
    per group: with only a handful per group the sample variance of near-deterministic groups is
    often zero and the reported error is biased low."""
    problem = lih.problem
    psi = ExactSector().run(problem, resolve_options(ExactSector(), {})).state.dense()
    pauli = problem.hamiltonian.pauli.real()
    spreads, reported = {}, {}
    for shots in (8_000, 128_000):
        runs = [sample_energy(pauli, psi, problem.n_qubits, shots, "uniform", np.random.default_rng(s))
                for s in range(24)]
        energies = np.array([r["energy_ha"] for r in runs])
        spreads[shots] = energies.std(ddof=1)
        reported[shots] = np.mean([r["stderr_ha"] for r in runs])
        assert abs(energies.mean() - lih.reference.energy_ha) < 4 * reported[shots] / np.sqrt(len(runs)) + 1e-6
    assert reported[8_000] / reported[128_000] == pytest.approx(4.0, rel=0.1)
    assert spreads[8_000] / spreads[128_000] == pytest.approx(4.0, rel=0.45)
    for shots in spreads:
        assert spreads[shots] == pytest.approx(reported[shots], rel=0.45)


def test_proportional_allocation_beats_uniform(lih):
    problem = lih.problem
    psi = ExactSector().run(problem, resolve_options(ExactSector(), {})).state.dense()
    pauli = problem.hamiltonian.pauli.real()
    uni = sample_energy(pauli, psi, problem.n_qubits, 20_000, "uniform", np.random.default_rng(1))
    prop = sample_energy(pauli, psi, problem.n_qubits, 20_000, "proportional", np.random.default_rng(1))
    assert prop["stderr_ha"] < uni["stderr_ha"]
    assert uni["groups"] == int(qwc_groups(pauli).max()) + 1


def test_sampled_method_through_the_cli(run_cli):
    code, out, err = run_cli("solve", "h2", "--method", "sampled", "--option", "shots=50000",
                             "--option", "state=exact-sector", "--seed", "3", "--format", "json")
    assert code == 0, err
    rec = json.loads(out)
    assert rec["status"] == "ok" and rec["stderr_ha"] > 0
    assert rec["resources"]["shots"] == 50000
    assert abs(rec["error_mha"]) < 5 * 1000 * rec["stderr_ha"]
    # same seed, same answer
    code, out2, _ = run_cli("solve", "h2", "--method", "sampled", "--option", "shots=50000",
                            "--seed", "3", "--format", "json")
    assert json.loads(out2)["energy_ha"] == rec["energy_ha"]


def test_sampled_options_are_checked(run_cli):
    code, _, err = run_cli("solve", "h2", "--method", "sampled", "--option", "allocation=random")
    assert code == 2 and "allocation" in err and "one of" in err
    assert SampledEnergy().stochastic and not SampledEnergy().variational


def test_problem_and_reference_share_one_scf(registry, monkeypatch):
    """Without a cache, building a problem runs the SCF once: ladder and integrals share it."""
    import benchsuite.chem.space as space

    calls = []
    real = space.run_scf

    def counting(*args, **kwargs):
        calls.append(args)
        return real(*args, **kwargs)

    monkeypatch.setattr(space, "run_scf", counting)
    prep = build_problem(registry.case("lih"))
    assert len(calls) == 1
    assert prep.problem.integrals.reference_energy_ha() == pytest.approx(prep.ladder.rung("hf").energy_ha,
                                                                         abs=1e-9)
