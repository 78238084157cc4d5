"""The registry's hydrogen-chain DMRG schedule against PySCF's determinant FCI (an independent
route), on a chain short enough for FCI: linear H12/STO-3G (853,776 determinants) at the registry's
two spacings, built with the schedule and orbitals the H14-H20 chain cases use."""

from __future__ import annotations

import dataclasses

import pytest

from benchsuite.chem.ladder import reference_ladder
from benchsuite.chem.space import prepare, solve_scf

#: Agreement asked of the DMRG extrapolation where FCI runs: 1 microhartree, as for H10
#: (tests/chem/test_dmrg.py), and the stated u must cover the difference.
AGREEMENT_HA = 1e-6


def _h12(registry, spacing: str):
    """H12 at the spacing of ``h14-chain-<spacing>``, with that case's fields and [dmrg] table."""
    base = registry.case(f"h14-chain-{spacing}")
    step = base.coords[1][2] - base.coords[0][2]
    coords = tuple((0.0, 0.0, step * i) for i in range(12))
    return dataclasses.replace(base, name=f"h12-test-{spacing}", symbols=("H",) * 12, coords=coords)


def _fci_energy(case) -> float:
    """PySCF FCI on the case's RHF orbitals, two roots to a tight tolerance (a single-root Davidson
    was seen to stall ~1e-6 Eh high on a stretched chain)."""
    from pyscf import fci

    prep = solve_scf(prepare(case))
    solver = fci.FCI(prep.mf)
    solver.conv_tol, solver.nroots = 1e-10, 2
    return float(solver.kernel()[0][0])


@pytest.mark.slow
@pytest.mark.parametrize("spacing", ["1p0", "1p8"])
def test_chain_schedule_reproduces_fci_on_h12(registry, spacing, tmp_path):
    """DMRG as primary (FCI withheld by max_determinants=0) with the H14 case's schedule equals
    PySCF FCI within 1e-6 Eh, and |E_DMRG - E_FCI| <= u + 1e-7 Eh."""
    pytest.importorskip("pyblock2")
    from benchsuite.chem.cache import DiskCache

    case = _h12(registry, spacing)
    assert case.dmrg is not None and case.dmrg.orbitals == "split-localised"
    d = reference_ladder(case, cache=DiskCache(tmp_path), max_determinants=0).primary
    assert d.method == "dmrg" and d.status == "ok", d
    e_fci = _fci_energy(case)
    assert d.energy_ha == pytest.approx(e_fci, abs=AGREEMENT_HA)
    assert abs(d.energy_ha - e_fci) <= d.uncertainty_ha + 1e-7
    assert d.variational_ha >= e_fci - 1e-8
