"""The cost model and the ETA arithmetic, against independent routes and a textbook schedule."""

from __future__ import annotations

import math
from itertools import combinations

import pytest
from pyscf.fci import cistring

from benchsuite.runner.cost import (BUILD_S_PER_SO4, OVERHEAD_S, CostModel, TaskClock, TaskSize, longest_first, makespan_s,
                                    prior_s)


def _excitations_by_enumeration(n_orbitals: int, n_alpha: int, n_beta: int) -> int:
    """Spin-orbital singles and doubles from the reference determinant, counted one by one."""
    occ = [(p, "a") for p in range(n_alpha)] + [(p, "b") for p in range(n_beta)]
    vir = [(p, "a") for p in range(n_alpha, n_orbitals)] + [(p, "b") for p in range(n_beta, n_orbitals)]
    singles = sum(1 for i in occ for a in vir if i[1] == a[1])
    doubles = sum(1 for ij in combinations(occ, 2) for ab in combinations(vir, 2)
                  if sorted(s for _, s in ij) == sorted(s for _, s in ab))
    return singles + doubles


@pytest.mark.parametrize("space", [(2, 1, 1), (6, 2, 2), (7, 5, 4), (10, 7, 7)])
def test_task_size_against_pyscf_strings_and_enumeration(space):
    size = TaskSize.of_space(*space)
    n, na, nb = space
    # sector dimension: PySCF's string count (pyscf.fci.cistring), product of the two spins
    assert size.sector_dimension == cistring.num_strings(n, na) * cistring.num_strings(n, nb)
    assert size.n_excitations == _excitations_by_enumeration(n, na, nb)
    assert size.n_spin_orbitals == 2 * n


def test_graham_lpt_example():
    """Longest-first list scheduling of 2m+1 jobs (2m-1, 2m-1, ..., m+1, m+1, m, m, m) on m machines
    ends at 4m - 1 (the optimum is 3m): R. L. Graham, SIAM J. Appl. Math. 17, 416 (1969), the
    worst case of the 4/3 - 1/(3m) bound."""
    for m in (2, 3, 4):
        jobs = [t for t in range(2 * m - 1, m, -1) for _ in (0, 1)] + [m] * 3
        assert makespan_s(longest_first(jobs, float), [], m) == 4 * m - 1
    assert makespan_s([5.0, 1.0], [10.0, 2.0], 2) == 10.0        # running work occupies its worker first
    assert makespan_s([], [], 2) == 0.0


def test_refinement_learns_a_methods_factor_and_history_wins():
    size = TaskSize.of_space(6, 3, 3)
    model = CostModel(history={"known": 7.0})
    base = prior_s("lab-solver", size)
    for k in ("a", "b", "c"):
        model.observe(k, "lab-solver", size, 2.0 * base)
    # three ratios of 2, shrunk toward one: exp(3 ln 2 / 4)
    assert model.factor("lab-solver") == pytest.approx(2 ** 0.75)
    assert model.predict_s("new", "lab-solver", size) == pytest.approx(base * 2 ** 0.75)
    assert model.factor("uccsd-vqe") == 1.0
    assert model.predict_s("known", "lab-solver", size) == pytest.approx(OVERHEAD_S + BUILD_S_PER_SO4 * 12 ** 4 + 7.0)
    model.observe("x", "lab-solver", size, math.nan)               # no measurement, no change
    assert model.factor("lab-solver") == pytest.approx(2 ** 0.75)


def test_clock_counts_pending_and_running_work():
    size = TaskSize.of_space(2, 1, 1)
    fixed = OVERHEAD_S + BUILD_S_PER_SO4 * 4 ** 4                 # a fork and a 4-spin-orbital build
    model = CostModel(history={"a": 10.0 - fixed, "b": 4.0 - fixed, "c": 4.0 - fixed})
    clock = TaskClock(model, workers=2)
    clock.plan([(k, "m", size) for k in "abc"])
    assert clock.eta_s(0.0) == pytest.approx(10.0)                 # a | b then c
    clock.started("a", 0.0)
    clock.started("b", 0.0)
    assert clock.eta_s(3.0) == pytest.approx(7.0)                  # a: 7 left; b: 1 left, then c: 4
    clock.finished("b", 4.0)
    assert clock.pending == ["c"] and set(clock.running) == {"a"}
    assert clock.eta_s(20.0) == pytest.approx(4.0)                 # a is late: max(0.1 * 20, 1) = 2 s more


def test_refused_and_budget_bounded_predictions():
    """The 120-qubit N2/cc-pVTZ case (60 orbitals, 7 + 7 electrons): state-holding built-ins refuse it
    after the problem build, so only the overhead and the build are predicted; no prediction exceeds
    the task's time budget."""
    wide = TaskSize.of_space(60, 7, 7)
    fixed = OVERHEAD_S + BUILD_S_PER_SO4 * 120 ** 4
    assert prior_s("uccsd-vqe", wide) == fixed and prior_s("adapt-vqe", wide) == fixed
    assert prior_s("lab-solver", wide) > 1e6                       # a plugin may not refuse: no shortcut
    assert CostModel(limit_s=600.0).predict_s("k", "lab-solver", wide) == 600.0 + OVERHEAD_S


def test_static_correlation_raises_the_prior():
    """Same size, CCSD(T) missing 200 mHa (stretched N2) against 2 mHa (N2 at equilibrium): ADAPT's
    prior grows by (200.1 / 2.1) ** b, the fitted exponent."""
    from benchsuite.runner.cost import PRIORS

    eq, stretched = TaskSize.of_space(10, 7, 7, 0.002), TaskSize.of_space(10, 7, 7, -0.2)
    fixed = OVERHEAD_S + BUILD_S_PER_SO4 * 20 ** 4
    ratio = (prior_s("adapt-vqe", stretched) - fixed) / (prior_s("adapt-vqe", eq) - fixed)
    assert ratio == pytest.approx((200.1 / 2.1) ** PRIORS["adapt-vqe"][2])
