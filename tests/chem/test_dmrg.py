"""The DMRG rung checked against PySCF's determinant FCI (an independent route) and its fit
against NumPy's polynomial fit.  Needs the optional block2 (``benchsuite[dmrg]``)."""

from __future__ import annotations

import dataclasses
import types

import numpy as np
import pytest

from benchsuite.chem import dmrg as dmrg_module
from benchsuite.chem.ladder import reference_ladder
from benchsuite.chem.space import prepare, solve_scf

#: The agreement asked of DMRG where FCI also runs (issue 13): 1 microhartree.
AGREEMENT_HA = 1e-6


def _chain(registry, n_atoms: int, spacing_angstrom: float = 1.0):
    """A linear H_n chain built from the registry's H8 chain case (same fields, more atoms)."""
    base = registry.case("h8-chain-1p0")
    coords = tuple((0.0, 0.0, spacing_angstrom * i) for i in range(n_atoms))
    return dataclasses.replace(base, name=f"h{n_atoms}-test", symbols=("H",) * n_atoms, coords=coords)


def _fci(case):
    """PySCF's determinant FCI on the case's own RHF orbitals, called directly."""
    from pyscf import fci

    prep = solve_scf(prepare(case))
    return fci.FCI(prep.mf).kernel()[0]


@pytest.mark.parametrize("which", ["h10", "n2"])
def test_dmrg_equals_fci(registry, which):
    """H10/STO-3G (linear chain, 1.0 A) and N2/STO-3G: the DMRG rung as primary reference (FCI
    forbidden with max_determinants=0) equals PySCF FCI within 1e-6 Eh, with a small stated
    uncertainty, the right <S^2> and <N>."""
    pytest.importorskip("pyblock2")
    case = _chain(registry, 10) if which == "h10" else registry.case("n2")
    lad = reference_ladder(case, max_determinants=0)
    primary = lad.primary
    assert primary.method == "dmrg" and primary.status == "ok", primary
    e_fci = _fci(case)
    assert primary.energy_ha == pytest.approx(e_fci, abs=AGREEMENT_HA)
    assert primary.variational_ha >= e_fci - AGREEMENT_HA
    assert 0.0 <= primary.uncertainty_ha < AGREEMENT_HA
    assert primary.s2 == pytest.approx(0.0, abs=1e-6)
    assert primary.details["n_electrons"] == pytest.approx(case.n_electrons, abs=1e-6)
    assert lad.to_json()["primary"] == "dmrg"
    assert [p["bond_dim"] for p in primary.details["points"]] == sorted(dmrg_module.DmrgSettings().bond_dims)


def test_both_rungs_when_asked(registry):
    """dmrg="always" keeps FCI as the primary (exact beats extrapolated) and adds the DMRG rung."""
    pytest.importorskip("pyblock2")
    lad = reference_ladder(registry.case("h4-square"), dmrg="always")
    assert lad.primary.method == "fci"
    assert lad.rung("dmrg").energy_ha == pytest.approx(lad.primary.energy_ha, abs=AGREEMENT_HA)


def test_triplet_state_has_its_spin(registry):
    """The spin-adapted DMRG targets S = 1 for triplet CH2: <S^2> = 2 and FCI's triplet energy."""
    pytest.importorskip("pyblock2")
    lad = reference_ladder(registry.case("ch2-triplet"), basis="sto-3g", dmrg="always")
    d = lad.rung("dmrg")
    assert d.status == "ok" and d.s2 == pytest.approx(2.0, abs=1e-5)
    assert d.energy_ha == pytest.approx(lad.rung("fci").energy_ha, abs=AGREEMENT_HA)


def test_extrapolation_matches_numpy_polyfit():
    """The intercept and its standard error equal numpy.polyfit's (cov='unscaled' scaled by the
    residual variance, the textbook least-squares formula)."""
    w = [3e-5, 1.2e-5, 4e-6, 1e-6]
    e = [-10.0 + 120 * x + (1e-6 if i % 2 else -1e-6) for i, x in enumerate(w)]
    fit = dmrg_module.extrapolate(w, e)
    coef, cov = np.polyfit(w, e, 1, cov=True)
    assert fit.energy_ha == pytest.approx(coef[1], abs=1e-12)
    assert fit.stderr_ha == pytest.approx(np.sqrt(cov[1, 1]), rel=1e-6)
    u = dmrg_module.uncertainty(fit, min(e))
    assert u == max(abs(fit.energy_ha - min(e)), fit.stderr_ha)


def test_exact_mps_has_no_extrapolation():
    """All discarded weights zero: the extrapolation is the lowest energy, u the points' spread."""
    fit = dmrg_module.extrapolate([0.0, 1e-20, 0.0], [-1.0, -1.0 + 2e-12, -1.0 + 1e-12])
    assert fit.energy_ha == -1.0 and fit.stderr_ha == pytest.approx(2e-12)


def test_ladder_without_block2(registry, monkeypatch):
    """Without block2 the DMRG rung is skipped with the install hint; the FCI ladder is unchanged."""
    monkeypatch.setattr(dmrg_module, "block2_version", lambda: None)
    lad = reference_ladder(registry.case("h2"), dmrg="always")
    assert lad.rung("dmrg").status == "skipped" and "benchsuite[dmrg]" in lad.rung("dmrg").note
    assert lad.primary.method == "fci"
    past = reference_ladder(registry.case("h2"), max_determinants=0)
    assert past.primary.method == "fci" and past.primary.status == "skipped"
    assert any("dmrg skipped" in f for f in past.flags)


def test_dmrg_rung_is_cached(registry, tmp_path):
    """A cached ladder with a DMRG rung is served from disk with the same numbers."""
    pytest.importorskip("pyblock2")
    from benchsuite.chem.cache import DiskCache

    cache = DiskCache(tmp_path)
    first = reference_ladder(registry.case("lih"), cache=cache, max_determinants=0)
    again = reference_ladder(registry.case("lih"), cache=cache, max_determinants=0)
    assert (first.cache_status, again.cache_status) == ("miss", "hit")
    assert again.primary == first.primary and again.primary.method == "dmrg"


def test_rung_past_its_orbital_limit_is_skipped_before_block2(monkeypatch):
    """41 active orbitals: skipped with the limit named; block2 is never called."""
    from benchsuite.chem.integrals import MOIntegrals
    from benchsuite.chem.ladder import dmrg_rung

    n = dmrg_module.MAX_ORBITALS + 1
    ints = MOIntegrals(h1_ha=np.eye(n), eri_ha=np.zeros((n,) * 4), constant_ha=0.0, nuclear_repulsion_ha=0.0,
                       core_energy_ha=0.0, n_alpha=1, n_beta=1, n_core=0, mo_energy_ha=np.ones(n))
    monkeypatch.setattr(dmrg_module, "block2_version", lambda: "test")
    monkeypatch.setattr(dmrg_module, "run_dmrg", lambda *a, **k: pytest.fail("block2 was called"))
    prep = types.SimpleNamespace(integrals=ints, case=types.SimpleNamespace(multiplicity=1))
    rung = dmrg_rung(prep, "test space", dmrg_module.DmrgSettings())
    assert rung.status == "skipped" and rung.energy_ha is None
    assert f"{n} active orbitals exceed the DMRG rung's limit of {dmrg_module.MAX_ORBITALS}" in rung.note


def test_split_localised_integrals_are_a_rotation_of_the_canonical_ones(registry):
    """Split localisation keeps the SCF determinant's energy and the Hamiltonian's spectrum (its
    FCI energy, PySCF's direct solver on both sets of integrals), and does localise: the orbitals'
    spread (the one-electron matrix's off-diagonal weight) changes."""
    from pyscf import fci

    case = _chain(registry, 6, 1.8)
    prep = solve_scf(prepare(case))
    ints = prep.integrals
    loc = dmrg_module.split_localised(ints, prep.mol, prep.mf.mo_coeff)
    assert loc.reference_energy_ha() == pytest.approx(ints.reference_energy_ha(), abs=1e-9)
    # the whole (3a, 3b) sector, 400 determinants: PySCF's determinant Hamiltonian, dense eigenvalues
    # (no Davidson tolerance in the way at this near-degenerate stretched chain)
    energies = [np.linalg.eigvalsh(fci.direct_spin1.pspace(x.h1_ha, x.eri_ha, x.n_orbitals,
                                                           (x.n_alpha, x.n_beta), np=400)[1])[0]
                for x in (ints, loc)]
    assert energies[0] == pytest.approx(energies[1], abs=1e-9)
    assert not np.allclose(np.abs(loc.h1_ha), np.abs(ints.h1_ha), atol=1e-3)


def test_case_schedule_reaches_block2_and_the_cache_key(registry, tmp_path):
    """A case's [dmrg] schedule (here split-localised orbitals, M = 50, 100) is the one block2 runs:
    recorded in the rung's details and note, part of the cache key (the same bond dimensions on
    canonical orbitals are a miss), and the H8/1.8 A DMRG energy equals PySCF FCI within 1e-6 Eh."""
    pytest.importorskip("pyblock2")
    from benchsuite.chem.cache import DiskCache
    from benchsuite.registry.case import DmrgSchedule

    schedule = DmrgSchedule(bond_dims=(50, 100), fit_points=2, orbitals="split-localised")
    case = dataclasses.replace(_chain(registry, 8, 1.8), dmrg=schedule)
    cache = DiskCache(tmp_path)
    lad = reference_ladder(case, cache=cache, max_determinants=0)
    d = lad.primary
    assert d.method == "dmrg" and d.status == "ok", d
    assert d.details["schedule"]["bond_dims"] == [50, 100]
    assert d.details["schedule"]["orbitals"] == "split-localised" and "split-localised" in d.note
    assert d.energy_ha == pytest.approx(_fci(case), abs=AGREEMENT_HA)
    canonical = dataclasses.replace(schedule, orbitals="canonical")
    plain = reference_ladder(dataclasses.replace(case, dmrg=canonical), cache=cache, max_determinants=0)
    assert plain.cache_status == "miss" and plain.primary.details["schedule"]["orbitals"] == "canonical"
