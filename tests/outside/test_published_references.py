"""The reference ladder against published values, each source named beside its check."""

from __future__ import annotations

import pytest

from benchsuite.chem.ladder import reference_ladder
from benchsuite.chem.space import prepare, solve_scf
from benchsuite.constants import CHEMICAL_ACCURACY_MHA, HARTREE_KCAL_MOL
from benchsuite.registry import Registry


@pytest.fixture
def cache(ladder_cache):
    return ladder_cache


def _energy(ladder, method):
    rung = ladder.rung(method)
    assert rung is not None and rung.status == "ok", (method, rung)
    return rung.energy_ha


def test_h2_minimal_basis_szabo_ostlund(registry, cache):
    """H2/STO-3G at R = 1.4 bohr: E(RHF) = -1.1167 Eh (Szabo & Ostlund, Modern Quantum Chemistry,
    1989, section 3.5.2) and minimal-basis full CI -1.1373 Eh (ibid., chapter 4), 4 decimals."""
    lad = reference_ladder(registry.case("h2-1p4-bohr"), "sto-3g", cache=cache)
    assert _energy(lad, "hf") == pytest.approx(-1.1167, abs=5e-5)
    assert _energy(lad, "fci") == pytest.approx(-1.1373, abs=5e-5)
    # two electrons: CCSD is exact (common practice), checked against PySCF's FCI
    assert _energy(lad, "ccsd") == pytest.approx(_energy(lad, "fci"), abs=1e-8)


def _scaled_sto3g(zeta: float) -> list:
    """A 1s STO-3G contraction for Slater exponent zeta: the zeta = 1 exponents and coefficients of
    W. J. Hehre, R. F. Stewart, J. A. Pople, J. Chem. Phys. 51, 2657 (1969) (as tabulated by Szabo &
    Ostlund, from memory), exponents scaled by zeta^2."""
    exponents, coefficients = (2.227660, 0.405771, 0.109818), (0.154329, 0.535328, 0.444635)
    return [[0] + [[a * zeta ** 2, c] for a, c in zip(exponents, coefficients)]]


def test_heh_cation_textbook_scf():
    """HeH+ at R = 1.4632 bohr with STO-3G contractions of zeta(He) = 2.0925, zeta(H) = 1.24 (not the
    standard STO-3G He exponent, hence built here and not a registry case): electronic SCF energy
    -4.227529 Eh, orbital energies -1.597448 and -0.061664 Eh (Szabo & Ostlund, Modern Quantum
    Chemistry, 1989, section 3.5.3 and appendix B; values from memory), to 1e-5 Eh."""
    from pyscf import gto, scf

    mol = gto.M(atom=[["He", (0, 0, 0)], ["H", (0, 0, 1.4632)]], unit="bohr", charge=1, verbose=0,
                basis={"He": _scaled_sto3g(2.0925), "H": _scaled_sto3g(1.24)})
    mf = scf.RHF(mol).run(conv_tol=1e-12)
    assert mf.converged
    assert mf.e_tot - mol.energy_nuc() == pytest.approx(-4.227529, abs=1e-5)
    assert mf.mo_energy == pytest.approx([-1.597448, -0.061664], abs=1e-5)


def test_default_suites_do_not_lean_on_textbook_examples(registry):
    """The textbook worked examples (cases tagged textbook-check) are outside checks for the tests in
    this module; the suites users run by default are our own cited selection."""
    textbook = {"szabo-ostlund-1996", "crawford-programming-projects"}
    checks = {name for name, case in registry.cases.items() if "textbook-check" in case.tags}
    assert {"h2-1p4-bohr", "h2o-crawford"} <= checks
    assert all(registry.cases[name].geometry_source in textbook for name in checks)
    for suite in ("smoke", "core", "stretched", "open-shell"):
        entries = registry.suite_entries(suite)
        assert entries, suite
        for entry in entries:
            assert entry.case.name not in checks and entry.case.geometry_source not in textbook, (suite, entry)
            assert entry.case.geometry_source in registry.bib
    assert any(entry.case.charge > 0 for entry in registry.suite_entries("smoke"))   # the demo's cation


def test_water_sto3g_crawford_project(registry, cache):
    """H2O/STO-3G at the geometry of T. D. Crawford's Programming Projects (Project #5, STO-3G
    water output): E(SCF) = -74.942079928192 Eh, CCSD correlation -0.070680088376 Eh (1e-6)."""
    lad = reference_ladder(registry.case("h2o-crawford"), "sto-3g", cache=cache)
    e_hf = _energy(lad, "hf")
    assert e_hf == pytest.approx(-74.942079928192, abs=1e-6)
    assert _energy(lad, "ccsd") - e_hf == pytest.approx(-0.070680088376, abs=1e-6)


def test_water_ccpvdz_ccsd_t_al_saidi(registry, cache):
    """H2O/cc-pVDZ CCSD(T), all electrons correlated, at the Olsen et al. geometry (J. Olsen et al.,
    J. Chem. Phys. 104, 8007, 1996): -76.241201 Eh (W. A. Al-Saidi, S. Zhang, H. Krakauer,
    J. Chem. Phys. 124, 224101, 2006, Table I; value from memory of that table), 1e-5.
    FCI in 24 orbitals is beyond the default determinant limit and must be skipped, not attempted.
    DMRG is switched off here (its own checks live in tests/chem/test_dmrg.py): with no exact or DMRG
    energy the primary reference is the skipped FCI rung itself."""
    lad = reference_ladder(registry.case("h2o-olsen"), "cc-pvdz", cache=cache, dmrg="never")
    assert _energy(lad, "ccsd(t)") == pytest.approx(-76.241201, abs=1e-5)
    fci = lad.rung("fci")
    assert fci.status == "skipped" and "exceed the limit" in fci.note
    assert fci.seconds == 0.0
    assert lad.primary is fci and lad.rung("dmrg") is None


@pytest.mark.slow
def test_water_ccpvdz_published_values_in_case_file(registry, cache):
    """Every published value in the h2o-olsen case file for cc-pVDZ that the ladder computes."""
    lad = reference_ladder(registry.case("h2o-olsen"), "cc-pvdz", cache=cache)
    computed = [(pub, lad.rung(pub.method)) for pub in lad.published]
    computed = [(pub, rung) for pub, rung in computed if rung is not None and rung.status == "ok"]
    assert computed, "the case file's published values name no rung the ladder computes"
    for pub, rung in computed:
        assert rung.energy_ha == pytest.approx(pub.energy_ha, abs=1e-5), pub.method


def test_n2_ccpvdz_rhf_wang_li_lu(registry):
    """N2/cc-pVDZ at R = 2.118 bohr, the first point of the n2-dz-fc curve: RHF -108.9493778784 Eh
    (Z. Wang, Y. Li, J. Lu, J. Chem. Theory Comput. 15, 3558, 2019, section 4.1 system as given in
    the authors' repository quan-tum/CDFCI, test/example/n2_ccpvdz/README.md; integrals from Psi4),
    to 1e-7 Eh: the geometry, the basis and the SCF are those of that benchmark (frozen cores do not
    change the RHF)."""
    prep = solve_scf(prepare(registry.case("n2-dz-fc@2.118")))
    assert prep.scf.converged and not prep.scf.symmetry_broken
    assert prep.scf.energy_ha == pytest.approx(-108.9493778784, abs=1e-7)


def test_h2_basis_set_limit_pachucki(registry, cache):
    """H2 at R = 1.4 bohr: FCI correlation energies in cc-pVTZ and cc-pVQZ, extrapolated with the
    two-point X^-3 formula (T. Helgaker, W. Klopper, H. Koch, J. Noga, J. Chem. Phys. 106, 9639,
    1997) and added to the cc-pVQZ HF energy, land within 0.3 mHa of the exact Born-Oppenheimer
    energy -1.1744757142 Eh (K. Pachucki, Phys. Rev. A 82, 032509, 2010)."""
    case = registry.case("h2-1p4-bohr")
    tz = reference_ladder(case, "cc-pvtz", cache=cache)
    qz = reference_ladder(case, "cc-pvqz", cache=cache)
    corr_tz, corr_qz = tz.primary.correlation_ha, qz.primary.correlation_ha
    corr_cbs = (4 ** 3 * corr_qz - 3 ** 3 * corr_tz) / (4 ** 3 - 3 ** 3)
    e_cbs = _energy(qz, "hf") + corr_cbs
    assert abs(e_cbs - (-1.1744757142)) < 0.3e-3
    # and the extrapolation is a real improvement over the larger basis alone
    assert abs(e_cbs + 1.1744757142) < abs(_energy(qz, "fci") + 1.1744757142)


def test_codata_2018_hartree_in_kcal_per_mol():
    """1 Eh = 627.5094740631 kcal/mol (CODATA 2018: Eh = 4.3597447222071e-18 J, N_A = 6.02214076e23
    /mol exact, 4184 J per thermochemical kcal; Tiesinga et al., Rev. Mod. Phys. 93, 025010, 2021)."""
    eh_joule, avogadro = 4.3597447222071e-18, 6.02214076e23
    assert HARTREE_KCAL_MOL == pytest.approx(eh_joule * avogadro / 4184.0, rel=1e-12)
    assert HARTREE_KCAL_MOL == 627.5094740631
    assert CHEMICAL_ACCURACY_MHA == pytest.approx(1.5936, abs=1e-4)
