"""Built-in reference methods: HF bitstring and exact sector (the measurement stage: tests/qubit/test_measurement.py)."""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.methods.base import resolve_options
from benchsuite.methods.builtin import ExactSector, HartreeFockBitstring
from benchsuite.methods.problem import Encoding, build_problem


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
