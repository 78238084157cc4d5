"""The measurement stage (benchsuite.qubit.measurement) against independent routes.

Outside checks: the exact <psi|H|psi> from OpenFermion's sparse operator (an independent route);
"common practice" for the estimator's statistics (the central limit theorem: the mean over seeds lies
within its standard error of the exact value, the stated standard error matches the spread over seeds,
a 95 % interval covers the exact value in about 95 % of seeds, error ~ 1/sqrt(shots)).
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from benchsuite.methods.base import resolve_options
from benchsuite.methods.builtin import ExactSector, HartreeFockBitstring, measured
from benchsuite.methods.problem import build_problem
from benchsuite.qubit.measurement import ShotPlan, estimate_energy, group_variance
from benchsuite.qubit.metrics import qwc_groups


@pytest.fixture(scope="module")
def h2_state(registry, ladder_cache):
    problem = build_problem(registry.case("h2"), cache=ladder_cache, seed=5).problem
    psi = ExactSector().run(problem, resolve_options(ExactSector(), {})).state.dense()
    return problem, psi


def _openfermion_expectation(problem, psi) -> float:
    import openfermion

    n = problem.n_qubits
    # OpenFermion's sparse matrices put qubit 0 in the most significant bit; ours in the least.
    psi_of = psi.reshape((2,) * n).transpose(tuple(reversed(range(n)))).reshape(-1)
    h_sparse = openfermion.get_sparse_operator(problem.hamiltonian.pauli.to_openfermion(), n)
    return float(np.real(psi_of.conj() @ (h_sparse @ psi_of)))


def _runs(problem, psi, plan, seeds):
    pauli = problem.hamiltonian.pauli.real()
    return [estimate_energy(pauli, psi, problem.n_qubits, plan, np.random.default_rng(s)) for s in seeds]


def test_mean_over_seeds_is_the_exact_expectation(h2_state):
    problem, psi = h2_state
    exact = _openfermion_expectation(problem, psi)
    runs = _runs(problem, psi, ShotPlan(4000), range(200))
    energies = np.array([r.energy_ha for r in runs])
    sem = energies.std(ddof=1) / np.sqrt(len(runs))
    assert abs(energies.mean() - exact) < 4 * sem
    # the stated standard error against the sample standard deviation over seeds
    assert np.mean([r.stderr_ha for r in runs]) == pytest.approx(energies.std(ddof=1), rel=0.2)


@pytest.mark.parametrize("shots", [1000])
def test_95_percent_interval_covers_the_exact_value(h2_state, shots):
    """Coverage of the normal 95 % interval over seeds.  Known limit: near-deterministic groups
    (a state ~99 % one determinant) at ~20 shots per group often show no rare outcome, so the sample
    variance is 0 and coverage falls (measured 0.84 at 100 shots on H2); not yet fixed."""
    problem, psi = h2_state
    exact = _openfermion_expectation(problem, psi)
    runs = _runs(problem, psi, ShotPlan(shots), range(400))
    covered = np.mean([abs(r.energy_ha - exact) <= 1.959964 * r.stderr_ha for r in runs])
    assert 0.90 <= covered <= 0.995, covered


def test_one_shot_group_gets_the_range_bound():
    """With one value there is no sample variance: the bound (sum |c|)^2 (Popoviciu) is used."""
    assert group_variance(np.array([0.3]), 0.5) == pytest.approx(0.25)
    sample = np.array([1.0, -1.0, 1.0])
    assert group_variance(sample, 1.0) == pytest.approx(np.var(sample, ddof=1))


def test_error_falls_as_inverse_sqrt_shots_and_proportional_beats_uniform(h2_state):
    problem, psi = h2_state
    small = np.mean([r.stderr_ha for r in _runs(problem, psi, ShotPlan(2_000), range(20))])
    large = np.mean([r.stderr_ha for r in _runs(problem, psi, ShotPlan(32_000), range(20))])
    assert small / large == pytest.approx(4.0, rel=0.15)
    uni = np.mean([r.stderr_ha for r in _runs(problem, psi, ShotPlan(8_000), range(10))])
    prop = np.mean([r.stderr_ha for r in _runs(problem, psi, ShotPlan(8_000, "proportional"), range(10))])
    assert prop < uni
    run = _runs(problem, psi, ShotPlan(100), [0])[0]
    assert run.groups == int(qwc_groups(problem.hamiltonian.pauli.real()).max()) + 1 and run.shots == 100


def test_stage_applies_to_any_state_returning_method(h2_state):
    problem, _ = h2_state
    hf = HartreeFockBitstring().run(problem, {})
    out = measured(hf, problem, ShotPlan(5000))
    assert out.metadata["state_energy_ha"] == hf.energy_ha and out.resources.shots == 5000
    assert abs(out.energy_ha - hf.energy_ha) < 5 * out.stderr_ha + 1e-9
    assert out.metadata["measurement"] == {"shots": 5000, "allocation": "uniform", "groups": run_groups(problem)}


def run_groups(problem) -> int:
    return int(qwc_groups(problem.hamiltonian.pauli.real()).max()) + 1


def test_shots_through_the_cli(run_cli):
    code, out, err = run_cli("solve", "h2", "--method", "exact-sector", "--shots", "50000", "--seed", "3",
                             "--format", "json")
    assert code == 0, err
    rec = json.loads(out)
    assert rec["status"] == "ok" and rec["stderr_ha"] > 0 and rec["resources"]["shots"] == 50000
    assert abs(rec["error_mha"]) < 5 * 1000 * rec["stderr_ha"]
    code, out2, _ = run_cli("solve", "h2", "--method", "exact-sector", "--shots", "50000", "--seed", "3",
                            "--format", "json")
    assert json.loads(out2)["energy_ha"] == rec["energy_ha"]


def test_bad_shot_options_and_the_old_method_name(run_cli):
    code, _, err = run_cli("solve", "h2", "--method", "exact-sector", "--shots", "0")
    assert code == 2 and "--shots" in err
    code, _, err = run_cli("solve", "h2", "--method", "sampled")
    assert code == 2 and "--shots" in err
