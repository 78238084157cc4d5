"""Fixtures for the qubit-Hamiltonian tests: registry integrals through one
session cache (shared with the reference-ladder tests), and independent
reference routes (OpenFermion, PySCF FCI) kept apart from the code under test."""

from __future__ import annotations

import pytest


@pytest.fixture(scope="session")
def case_ints(registry, ladder_cache):
    """``case_ints(name, basis=None) -> (MOIntegrals, ScfSummary, OrbitalSpace)``, memoised."""
    from benchsuite.chem.space import case_integrals

    memo: dict = {}

    def get(name: str, basis: str | None = None):
        key = (name, basis)
        if key not in memo:
            memo[key] = case_integrals(registry.case(name), basis, cache=ladder_cache)
        return memo[key]

    return get


@pytest.fixture
def benchmark_set(request):
    """Several pytest-benchmark timers in one test, so ratios come from one run.

    ``make(label)`` returns a ``BenchmarkFixture`` reported as ``<test>[label]``
    in the benchmark table (grouped per test).  Skips when benchmarks are
    disabled (the default ``--benchmark-disable``; run ``-m speed
    --benchmark-enable``).
    """
    session = getattr(request.config, "_benchmarksession", None)
    if session is None or session.disabled:
        pytest.skip("benchmarks disabled: run with -m speed --benchmark-enable")
    from pytest_benchmark.fixture import BenchmarkFixture

    made = []

    def make(label: str):
        fx = BenchmarkFixture(request.node, add_stats=session.benchmarks.append, logger=session.logger,
                              warner=request.node.warn, disabled=session.disabled, **session.options)
        fx.name = f"{request.node.name}[{label}]"
        fx.fullname = f"{request.node.nodeid}[{label}]"
        fx.group = request.node.name
        made.append(fx)
        return fx

    yield make
    for fx in made:
        fx._cleanup()
