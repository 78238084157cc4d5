"""Physical constants and unit conversions, one place for the whole package.

Source: CODATA 2018 recommended values (E. Tiesinga, P. J. Mohr, D. B. Newell,
B. N. Taylor, Rev. Mod. Phys. 93, 025010 (2021); NIST SP 961).
"""

#: Bohr radius a0 in angstrom (CODATA 2018: 0.529177210903(80) x 10^-10 m).
BOHR_ANGSTROM = 0.529177210903
ANGSTROM_BOHR = 1.0 / BOHR_ANGSTROM

#: Hartree energy in kcal/mol.  CODATA 2018: Eh = 4.3597447222071e-18 J;
#: times N_A = 6.02214076e23 / mol (exact) / 4184 J per thermochemical kcal
#: gives 627.5094740631 kcal/mol.
HARTREE_KCAL_MOL = 627.5094740631

#: Hartree energy in electronvolt (CODATA 2018: 27.211386245988 eV).
HARTREE_EV = 27.211386245988

#: 1 kcal/mol in millihartree: the "chemical accuracy" threshold, 1.5936 mHa.
CHEMICAL_ACCURACY_MHA = 1000.0 / HARTREE_KCAL_MOL

#: Where the threshold and conversions come from, for reports and provenance.
CONSTANTS_SOURCE = "CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93, 025010, 2021)"


def ha_to_mha(energy_ha: float) -> float:
    """Hartree to millihartree."""
    return 1000.0 * energy_ha


def ha_to_kcal_mol(energy_ha: float) -> float:
    """Hartree to kcal/mol (thermochemical calorie, CODATA 2018)."""
    return energy_ha * HARTREE_KCAL_MOL
