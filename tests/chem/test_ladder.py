"""The reference ladder checked against PySCF used independently, as a reference library.

Each check builds the comparison by a different PySCF route (mcscf.CASCI on the SCF object, CCSD
with an explicit frozen list, ...) than the ladder's own code path.
"""

from __future__ import annotations

import numpy as np
import pytest

from benchsuite.chem import scf as scf_module
from benchsuite.chem.ladder import DEFAULT_MAX_DETERMINANTS, exact_in_space, reference_ladder
from benchsuite.chem.scf import build_mole, run_scf
from benchsuite.chem.space import prepare, solve_scf
from benchsuite.registry import Registry
from tests.conftest import H2_CASE


@pytest.fixture
def cache(ladder_cache):
    return ladder_cache


def _e(ladder, method):
    rung = ladder.rung(method)
    assert rung is not None and rung.energy_ha is not None, (method, rung)
    return rung.energy_ha


def test_ccsd_equals_fci_for_two_electrons(registry, cache):
    """Coupled cluster with singles and doubles is exact for two electrons (common practice)."""
    lad = reference_ladder(registry.case("heh-cation"), cache=cache)
    assert _e(lad, "ccsd") == pytest.approx(_e(lad, "fci"), abs=1e-8)
    assert _e(lad, "ccsd(t)") == pytest.approx(_e(lad, "fci"), abs=1e-8)


def test_casci_over_full_space_equals_fci(registry):
    """PySCF mcscf.CASCI with every orbital active reproduces the ladder's FCI rung."""
    from pyscf import mcscf

    prep = solve_scf(prepare(registry.case("h2o")))
    lad = reference_ladder(registry.case("h2o"))
    n = prep.mol.nao_nr()
    e_casci = mcscf.CASCI(prep.mf, n, prep.mol.nelectron).run(verbose=0).e_tot
    assert _e(lad, "fci") == pytest.approx(e_casci, abs=1e-9)


def test_active_space_casci_matches_pyscf_mcscf(registry, cache):
    """The ladder's CASCI (our active-space integrals + FCI) equals mcscf.CASCI(mf, 6, 6) for N2, and
    CCSD in that space equals PySCF's CCSD with the same frozen orbitals given by hand."""
    from pyscf import cc, mcscf

    case = registry.case("n2-cas66")
    prep = solve_scf(prepare(case))
    lad = reference_ladder(case, cache=cache)
    assert lad.primary.method == "casci"
    e_ref = mcscf.CASCI(prep.mf, 6, 6).run(verbose=0).e_tot
    assert _e(lad, "casci") == pytest.approx(e_ref, abs=1e-8)
    nmo = prep.mol.nao_nr()
    frozen = [0, 1, 2, 3] + list(range(10, nmo))
    mycc = cc.CCSD(prep.mf, frozen=frozen).run(verbose=0)
    assert _e(lad, "ccsd") == pytest.approx(mycc.e_tot, abs=1e-7)


def test_frozen_core_fci_matches_casci_of_the_rest(registry, cache):
    """Frozen-core FCI equals mcscf.CASCI with every orbital above the core active."""
    from pyscf import mcscf

    case = registry.case("hf-fc")
    prep = solve_scf(prepare(case))
    lad = reference_ladder(case, cache=cache)
    nc = lad.space.n_core
    assert nc == 1
    e_ref = mcscf.CASCI(prep.mf, prep.mol.nao_nr() - nc, prep.mol.nelectron - 2 * nc).run(verbose=0).e_tot
    assert _e(lad, "fci") == pytest.approx(e_ref, abs=1e-8)
    assert prep.integrals.core_energy_ha != 0.0


def test_water_631g_ccsd_t_close_to_fci(registry, cache):
    """At equilibrium CCSD(T) is within 1 mHa of FCI (H2O/6-31G, all electrons)."""
    lad = reference_ladder(registry.case("h2o"), "6-31g", cache=cache)
    gap_mha = 1000 * (_e(lad, "ccsd(t)") - _e(lad, "fci"))
    assert abs(gap_mha) < 1.0


def test_stretched_n2_ccsd_t_far_from_fci(registry, cache):
    """Triple-bond breaking: CCSD(T) misses FCI by tens of mHa (the reason references matter)."""
    lad = reference_ladder(registry.case("n2-stretch@1.6"), cache=cache)
    gap_mha = 1000 * (_e(lad, "ccsd(t)") - _e(lad, "fci"))
    assert abs(gap_mha) > 20.0


@pytest.mark.slow   # the ladder of every registry case: ~200 s cold on 2 cores
def test_every_registry_reference_root_has_the_right_spin(registry, cache):
    """<S^2> of each case's FCI/CASCI root is S(S+1) within 1e-6, over the whole registry's default
    basis; the triplets come out as triplets."""
    for name, case in sorted(registry.cases.items()):
        lad = reference_ladder(case, cache=cache)
        s = (case.multiplicity - 1) / 2
        assert lad.primary.status == "ok", (name, lad.primary)
        assert abs(lad.primary.s2 - s * (s + 1)) < 1e-6, (name, lad.primary.s2)
    triplets = [c for c in registry.cases.values() if c.multiplicity == 3]
    assert triplets
    for case in triplets:
        assert reference_ladder(case, cache=cache).primary.s2 == pytest.approx(2.0, abs=1e-6)


def test_several_fci_roots_are_spin_eigenstates(registry):
    """Every one of the lowest FCI roots of H4 (square and rectangle) is an S^2 eigenstate."""
    from pyscf import fci

    for name in ("h4-square", "h4-rect"):
        ints = solve_scf(prepare(registry.case(name))).integrals
        solver = fci.direct_spin1.FCI()
        solver.nroots, solver.verbose = 6, 0
        _, cis = solver.kernel(ints.h1_ha, ints.eri_ha, ints.n_orbitals, (2, 2), ecore=ints.constant_ha)
        for ci in cis:
            s2 = solver.spin_square(ci, ints.n_orbitals, (2, 2))[0]
            s = 0.5 * (np.sqrt(1 + 4 * s2) - 1)
            assert abs(2 * s - round(2 * s)) < 1e-6 and abs(s2 - s * (s + 1)) < 1e-6


def test_wrong_spin_root_rejected(scratch, cache):
    """O2 declared a singlet: the lowest M_S = 0 root is the triplet ground state's component; it is
    rejected and the lowest true singlet (above the triplet) is reported instead."""
    o2 = (H2_CASE.replace('"H", 0.0, 0.0, 0.0', '"O", 0.0, 0.0, 0.0')
          .replace('"H", 0.0, 0.0, 0.7414', '"O", 0.0, 0.0, 1.2075')
          .replace("scratch-h2", "scratch-o2-singlet"))
    path = scratch(o2)
    reg = Registry.load(case_files=[path], builtin=False)
    ints = solve_scf(prepare(reg.case("scratch-o2-singlet"))).integrals
    singlet = exact_in_space(ints, 1, "test")
    triplet = exact_in_space(ints, 3, "test")
    assert "rejected" in singlet.note
    assert singlet.s2 == pytest.approx(0.0, abs=1e-6) and triplet.s2 == pytest.approx(2.0, abs=1e-6)
    assert singlet.energy_ha > triplet.energy_ha


def test_determinant_limit_skips_without_attempting(registry):
    ints = solve_scf(prepare(registry.case("h2o"))).integrals
    rung = exact_in_space(ints, 1, "test", max_determinants=100)
    assert rung.status == "skipped" and rung.energy_ha is None
    assert rung.n_determinants == 441 and "441" in rung.note


def test_uhf_instability_followed_at_stretched_bond(scratch):
    """Stretched H2: the spin-restricted-like UHF solution is a saddle point; stability analysis
    must lead to the lower broken-symmetry UHF solution (common practice: Coulson-Fischer point)."""
    path = scratch(H2_CASE.replace("0.7414", "2.5"))
    case = Registry.load(case_files=[path], builtin=False).case("scratch-h2")
    mol = build_mole(case, case.default_basis)
    _, rhf = run_scf(mol, "rhf")
    _, uhf = run_scf(mol, "uhf")
    assert rhf.stable and rhf.stable_external is False      # RHF -> UHF unstable, recorded
    assert uhf.attempts >= 2 and uhf.stable and uhf.converged
    assert uhf.energy_ha < rhf.energy_ha - 1e-3
    assert uhf.s2 > 0.5


def test_unconverged_scf_is_flagged_everywhere(scratch, monkeypatch, run_cli):
    """An SCF that cannot converge is flagged in the summary, the hf rung and the CLI output."""
    real_make = scf_module._make

    def starved(mol, kind):
        mf = real_make(mol, kind)
        mf.max_cycle = 1
        mf.diis = None
        return mf

    monkeypatch.setattr(scf_module, "_make", starved)
    path = scratch(H2_CASE.replace('["H", 0.0, 0.0, 0.7414]', '["H", 0.0, 0.0, 0.7414], '
                                   '["H", 0.0, 0.0, 1.7], ["H", 0.0, 0.0, 2.6]'))
    code, out, err = run_cli("references", "scratch-h2", "--case-file", str(path), "--no-cache")
    assert code == 0, err
    assert "NOT CONVERGED" in out and "FLAGS:" in out and "not converged" in out


def test_a_non_finite_rung_is_failed_not_ok():
    """NaN from a zero orbital-energy gap (MP2 on a degenerate open-shell singlet) never counts as a value."""
    from benchsuite.chem.ladder import Rung, _finite_or_failed

    bad = _finite_or_failed(Rung("mp2", float("nan"), float("nan"), "full", 0.1))
    assert (bad.status, bad.energy_ha, bad.correlation_ha) == ("failed", None, None)
    assert "non-finite" in bad.note
    good = Rung("mp2", -1.0, -0.01, "full", 0.1)
    assert _finite_or_failed(good) is good


@pytest.mark.parametrize("name, label, n_determinants", [
    ("n2-dz-fc@2.118", "frozen core 2 (10e, 26o)", 4_327_008_400),
    ("n2-dz-fc@4.2", "frozen core 2 (10e, 26o)", 4_327_008_400),
    ("cr2-cas-12e20o", "CAS(12e, 20o), core 18", 1_502_337_600),
])
def test_beyond_exact_spaces_are_past_the_determinant_limit(registry, name, label, n_determinants):
    """The N2/cc-pVDZ frozen-core curve and the Cr2 active space: comb(26, 5)^2 and comb(20, 6)^2
    determinants (common practice: alpha and beta strings independent), so FCI/CASCI is skipped and
    DMRG is the primary rung; the space is resolved without any SCF."""
    prep = prepare(registry.case(name))
    assert prep.space.label == label
    assert prep.space.n_determinants == n_determinants > DEFAULT_MAX_DETERMINANTS
