"""Run-level control of stochastic fail claims: the procedures against independent routes, and the
measured false-fail rate of a gate over 1,000 sampled tasks of exact states."""

from __future__ import annotations

from itertools import combinations

import numpy as np
import pytest
import scipy.stats

from benchsuite.scoring import (Judgement, bh_rejections, fail_level, fail_p_value, holm_rejections,
                                stochastic_verdicts, verdict, z_value)

THRESHOLD_MHA = 1.5936


def closed_bonferroni(p: list[float], level: float) -> list[bool]:
    """Holm's procedure by its definition as a closed test (Marcus, Peritz & Gabriel 1976, Biometrika 63,
    655; Holm 1979, Scand. J. Statist. 6, 65): reject H_i iff every intersection containing i is rejected
    by its Bonferroni test, min_{j in S} p_j <= level / |S|.  Exponential; an independent route."""
    m = len(p)
    out = []
    for i in range(m):
        others = [j for j in range(m) if j != i]
        out.append(all(min(p[j] for j in (i, *rest)) <= level / (len(rest) + 1)
                       for k in range(m) for rest in combinations(others, k)))
    return out


@pytest.mark.parametrize("seed", range(25))
def test_holm_equals_the_closed_bonferroni_test(seed):
    rng = np.random.default_rng(seed)
    p = list(np.concatenate([rng.uniform(0, 0.02, rng.integers(0, 4)), rng.uniform(0, 1, rng.integers(1, 6))]))
    assert holm_rejections(p, 0.05) == closed_bonferroni(p, 0.05)


@pytest.mark.parametrize("seed", range(25))
def test_bh_equals_scipy_adjusted_p_values(seed):
    """SciPy's ``false_discovery_control`` (Benjamini & Hochberg 1995, J. R. Stat. Soc. B 57, 289) gives
    adjusted p-values; a hypothesis is rejected at level q iff its adjusted p <= q."""
    rng = np.random.default_rng(100 + seed)
    p = np.concatenate([rng.uniform(0, 0.01, rng.integers(0, 10)), rng.uniform(0, 1, rng.integers(1, 40))])
    expected = scipy.stats.false_discovery_control(p, method="bh") <= 0.05
    assert bh_rejections(list(p), 0.05) == list(expected)


def test_a_single_task_keeps_the_interval_rule():
    """A family of one: fail iff the two-sided interval lies beyond the threshold (|e| - z sigma > t),
    up to the far tail Phi((-t - |e|)/sigma), here below 1e-12."""
    z, sigma = z_value(0.95), 0.2
    for err in np.linspace(1.0, 3.0, 201):
        j = verdict("ok", -1.0 + err / 1000, -1.0, THRESHOLD_MHA, sigma / 1000)
        assert (j.verdict == "fail") == (abs(err) - z * sigma > THRESHOLD_MHA + 1e-9) or \
            abs(abs(err) - z * sigma - THRESHOLD_MHA) < 1e-9
        assert stochastic_verdicts([j])[0] == j


def test_p_value_is_largest_on_the_boundary():
    """Under H0 |mu| <= t, P(|X| >= a) grows with |mu| (common practice); the p-value is its value at |mu| = t."""
    rng = np.random.default_rng(7)
    a, sigma, t = 2.0, 0.5, THRESHOLD_MHA
    for mu in (0.0, 0.5 * t, t):
        x = rng.normal(mu, sigma, 400_000)
        assert np.mean(np.abs(x) >= a) <= fail_p_value(a, sigma, t) + 3e-3
    x = rng.normal(t, sigma, 400_000)
    assert np.mean(np.abs(x) >= a) == pytest.approx(fail_p_value(a, sigma, t), abs=3e-3)


def _run_fails(errors_mha, sigmas_mha, procedure: str | None) -> bool:
    judged = [verdict("ok", e / 1000 - 1.0, -1.0, THRESHOLD_MHA, s / 1000) for e, s in zip(errors_mha, sigmas_mha)]
    if procedure is not None:
        judged = stochastic_verdicts(judged, 0.95, procedure)
    return any(j.verdict == "fail" for j in judged)


def _false_fail_rate(mu_mha: float, procedure: str | None, n_runs: int, seed: int) -> float:
    rng = np.random.default_rng(seed)
    fails = 0
    for _ in range(n_runs):
        sigmas = THRESHOLD_MHA * rng.uniform(0.3, 20.0, 1000)    # from well-measured to a few shots
        errors = rng.normal(mu_mha, sigmas)
        fails += _run_fails(errors, sigmas, procedure)
    return fails / n_runs


@pytest.mark.parametrize("procedure", ["holm", "bh"])
def test_false_fail_rate_of_1000_exact_state_tasks(procedure):
    """1,000 stochastic tasks whose true error is zero (exact states, shot noise only), 300 simulated runs:
    the fraction of runs with any fail verdict stays at or below the nominal level (1 - 0.95)/2; judged
    task by task instead, almost every run fails."""
    level = fail_level(0.95)
    assert _false_fail_rate(0.0, procedure, 300, seed=11) <= level
    assert _false_fail_rate(0.0, None, 30, seed=11) > 0.9


def test_false_fail_rate_on_the_threshold_itself():
    """The least favourable truth, |mu| = threshold for every task: Holm's family-wise rate is at most the
    level (binomial allowance of three standard errors over 400 runs)."""
    level, n_runs = fail_level(0.95), 400
    rate = _false_fail_rate(THRESHOLD_MHA, "holm", n_runs, seed=12)
    assert rate <= level + 3 * np.sqrt(level * (1 - level) / n_runs)


def test_1000_sampled_energies_of_an_exact_state(ladder_cache, registry):
    """Real shot sampling: 1,000 estimates (20,000 shots each, uniform over QWC groups) of the exact H2/STO-3G
    ground state, judged against FCI.  Task by task some estimates 'fail'; over the run, none does.
    (At a few hundred shots the method's own standard error is unreliable -- groups whose rare outcomes
    were never drawn report zero variance -- and no run-level procedure can repair invalid p-values.)"""
    from benchsuite.qubit.measurement import ShotPlan, estimate_energy
    from benchsuite.methods.problem import build_problem
    from benchsuite.qubit.sector import sector_eigen

    prepared = build_problem(registry.case("h2"), cache=ladder_cache)
    ham = prepared.problem.hamiltonian
    res = sector_eigen(ham, keep_vectors=True)
    from benchsuite.methods.base import SectorState

    psi = SectorState(res.states, res.vectors[:, 0], ham.n_qubits).dense()
    rng = np.random.default_rng(2026)
    ref = prepared.reference.energy_ha
    judged = []
    for _ in range(1000):
        est = estimate_energy(ham.pauli.real(), psi, ham.n_qubits, ShotPlan(20_000), rng)
        judged.append(verdict("ok", est.energy_ha, ref, THRESHOLD_MHA, est.stderr_ha))
    per_task_fails = sum(j.verdict == "fail" for j in judged)
    final = stochastic_verdicts(judged, 0.95, "holm")
    assert per_task_fails >= 5                   # about 2.5 % of 1,000 without run-level control
    assert sum(j.verdict == "fail" for j in final) == 0
    assert all(isinstance(j, Judgement) and j.p_fail is not None for j in final)
