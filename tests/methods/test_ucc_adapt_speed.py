"""Speed of ADAPT-VQE's growth loop (pytest-benchmark, ``speed`` group; ratio from the same run).

Anchor: the loop as it was before issue 15, every re-optimisation to the final gradient tolerance
(``growth_tolerance`` = ``gradient_tolerance`` reproduces it).  Ours: loose warm re-optimisations
(``growth_tolerance`` 1e-4) and one final tight optimisation.  Run with
``pytest tests/methods/test_ucc_adapt_speed.py -m speed --benchmark-enable`` (single-threaded:
OMP_NUM_THREADS=1).  The energies of both are checked against FCI (PySCF, independent route).
"""

from __future__ import annotations

import time

import pytest

from benchsuite.methods.base import resolve_options
from benchsuite.methods.ucc import AdaptVQE
from tests.methods.dense_route import fci_energy, integrals_for, make_problem

pytestmark = pytest.mark.speed

CASE = "h4-chain-1p5"


def _adapt(**options):
    method = AdaptVQE()
    return method.run(make_problem(CASE), resolve_options(method, {"pool": "sd", **options}))


def test_adapt_growth_faster_than_tight_reoptimisation_anchor(benchmark):
    start = time.perf_counter()
    anchor = _adapt(growth_tolerance=1e-6)
    anchor_s = time.perf_counter() - start
    ours = benchmark.pedantic(_adapt, rounds=1, iterations=1)
    e_fci = fci_energy(integrals_for(CASE))
    assert ours.converged and anchor.converged
    assert ours.energy_ha - e_fci <= anchor.energy_ha - e_fci + 1e-6      # error unchanged or better
    assert ours.energy_ha >= e_fci - 1e-9
    if benchmark.stats is not None and benchmark.stats.stats.min:
        benchmark.extra_info["ratio_vs_anchor"] = anchor_s / benchmark.stats.stats.min
