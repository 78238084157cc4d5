"""Deterministic orbitals: symmetry adaptation, degenerate sets, the symmetry-broken flag.

The reference for "deterministic" is PySCF's own symmetry-adapted RHF (Sun et al., WIREs
Comput. Mol. Sci. 8, e1340 (2018)), run here with ``symmetry=True`` outside benchsuite's
SCF: degenerate pi (N2) and e (NH3) sets fall into different irreducible representations
of its Abelian subgroup, so its orbitals are fixed up to sign, and the 1-norm of the
Jordan-Wigner Hamiltonian (sign independent) is fixed with them.
"""

from __future__ import annotations

import numpy as np
import pytest

NH3_ATOMS = [("N", (0.0, 0.0, 0.0)), ("H", (0.0, -0.9377, -0.3816)),
             ("H", (0.8121, 0.4689, -0.3816)), ("H", (-0.8121, 0.4689, -0.3816))]


def _case_text(atoms, name: str) -> str:
    rows = ", ".join(f'["{s}", {x!r}, {y!r}, {z!r}]' for s, (x, y, z) in atoms)
    return (f'name = "{name}"\ntitle = "ammonia, reordered"\nunits = "angstrom"\ncharge = 0\n'
            f'multiplicity = 1\natoms = [{rows}]\nbasis = ["sto-3g"]\ntags = ["closed-shell"]\n'
            f'geometry_source = "cccbdb-srd101"\nnotes = "registry nh3 geometry, atoms reordered or rotated"\n')


def _one_norm(mo) -> tuple[int, float]:
    from benchsuite.qubit.hamiltonian import encode_integrals

    p = encode_integrals(mo).pauli
    return len(p) - 1, p.one_norm()


def _local_case(tmp_path, atoms, name):
    from benchsuite.registry import Registry

    path = tmp_path / f"{name}.toml"
    path.write_text(_case_text(atoms, name))
    return Registry.load(case_files=[path]).case(name)


def _rotated(atoms, angle: float):
    c, s = np.cos(angle), np.sin(angle)
    rot = np.array([[c, -s, 0.0], [s * 0.6, c * 0.6, 0.8], [-s * 0.8, -c * 0.8, 0.6]])
    return [(sym, tuple(float(v) for v in rot @ np.array(xyz))) for sym, xyz in atoms]


@pytest.mark.slow
def test_atom_order_and_orientation_do_not_change_the_hamiltonian(tmp_path):
    from benchsuite.chem.space import case_integrals

    runs = [NH3_ATOMS, [NH3_ATOMS[i] for i in (2, 0, 3, 1)], _rotated(NH3_ATOMS[::-1], 0.7)]
    results, groups = [], set()
    for k, atoms in enumerate(runs):
        mo, scf, _ = case_integrals(_local_case(tmp_path, atoms, f"nh3-order-{k}"))
        assert not scf.symmetry_broken
        groups.add(scf.point_group)  # Cs: the 4-digit registry coordinates are C3v to ~1e-4 only
        results.append(_one_norm(mo))
    assert len(groups) == 1
    assert results[0][0] == results[1][0] == results[2][0]
    assert results[1][1] == pytest.approx(results[0][1], rel=1e-10)
    assert results[2][1] == pytest.approx(results[0][1], rel=1e-10)


def _plain_n2():
    from pyscf import gto, scf

    mol = gto.M(atom="N 0 0 0; N 0 0 2.0743", unit="Bohr", basis="sto-3g", symmetry=True, verbose=0)
    plain = mol.copy()
    plain.symmetry = False
    mf = scf.RHF(plain)
    mf.conv_tol = 1e-10
    mf.kernel()
    return mol, mf


def _mix_degenerate(mf, angle: float) -> None:
    """Rotate the k-th degenerate pair by (k + 1) * ``angle``: another SCF solution of the
    same energy, as a different initial guess may give (one angle for every pair would only
    turn the molecule about its axis)."""
    e = mf.mo_energy
    c = mf.mo_coeff.copy()
    pairs = [i for i in range(len(e) - 1) if abs(e[i + 1] - e[i]) < 1e-6]
    for k, i in enumerate(pairs):
        t = (k + 1) * angle
        a, b = c[:, i].copy(), c[:, i + 1].copy()
        c[:, i], c[:, i + 1] = np.cos(t) * a + np.sin(t) * b, -np.sin(t) * a + np.cos(t) * b
    mf.mo_coeff = c


def test_degenerate_sets_fixed_whatever_the_starting_mixture():
    from pyscf import scf as pscf

    from benchsuite.chem.integrals import build_mo_integrals
    from benchsuite.chem.scf import fix_degenerate_orbitals

    mol, mf = _plain_n2()
    norms = []
    for angle in (0.3, 1.1):
        _mix_degenerate(mf, angle)
        fix_degenerate_orbitals(mol, mf)
        norms.append(_one_norm(build_mo_integrals(mol, mf.mo_coeff, mf.mo_energy, 0, mol.nao)))
    ref = pscf.RHF(mol)
    ref.conv_tol = 1e-10
    ref.kernel()
    expected = _one_norm(build_mo_integrals(mol, ref.mo_coeff, ref.mo_energy, 0, mol.nao))
    assert norms[0][0] == norms[1][0] == expected[0]
    assert norms[0][1] == pytest.approx(norms[1][1], rel=1e-10)
    assert norms[0][1] == pytest.approx(expected[1], rel=1e-9)


def test_mixed_degenerate_orbitals_do_change_the_one_norm():
    """The check above can fail: without the fix, mixing the pi pairs changes the 1-norm."""
    from benchsuite.chem.integrals import build_mo_integrals

    mol, mf = _plain_n2()
    norms = []
    for angle in (0.0, 0.4):
        _mix_degenerate(mf, angle)
        norms.append(_one_norm(build_mo_integrals(mol, mf.mo_coeff, mf.mo_energy, 0, mol.nao))[1])
    assert abs(norms[0] - norms[1]) > 1e-3


def test_symmetry_broken_flag_on_o2_triplet_and_not_on_n2(registry):
    """O2 X 3Sigma_g- in STO-3G: an ROHF solution below the D2h-adapted one exists (PySCF's
    symmetric ROHF is checked here as the higher one); N2 keeps its symmetry."""
    from pyscf import scf as pscf

    from benchsuite.chem.space import prepare, solve_scf

    o2 = solve_scf(prepare(registry.case("o2-triplet")))
    assert o2.scf.symmetry_broken and o2.scf.symmetry_breaking > 1e-3
    assert [f for f in o2.scf.flags if f.startswith("symmetry-broken")]
    sym = pscf.ROHF(o2.mol)
    sym.conv_tol = 1e-10
    assert o2.scf.energy_ha < sym.kernel() - 1e-4
    n2 = solve_scf(prepare(registry.case("n2")))
    assert not n2.scf.symmetry_broken and n2.scf.symmetry_breaking < 1e-10
    assert not [f for f in n2.scf.flags if f.startswith("symmetry-broken")]
    assert n2.scf.point_group == "Dooh"


@pytest.mark.slow
def test_symmetry_broken_shown_in_the_ladder(registry, ladder_cache):
    from benchsuite.chem.ladder import reference_ladder

    ladder = reference_ladder(registry.case("o2-triplet"), cache=ladder_cache)
    doc = ladder.to_json()
    assert doc["scf"]["symmetry_broken"] is True
    assert any(f.startswith("symmetry-broken") for f in doc["flags"])
    assert "symmetry-broken" in ladder.rung("hf").note


def test_orbital_version_is_part_of_the_cache_key(registry):
    from benchsuite.chem.scf import ORBITALS_VERSION
    from benchsuite.chem.space import prepare

    assert prepare(registry.case("h2")).fields["orbitals"] == ORBITALS_VERSION
