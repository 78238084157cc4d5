"""The problem fingerprint: stable for one problem, different (and saying where) for another."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from benchsuite import api
from benchsuite.chem.cache import DiskCache
from benchsuite.chem.space import prepare, solve_scf
from benchsuite.methods.fingerprint import (COMPONENTS, differing_components, digest, orbital_signature,
                                            problem_fingerprint)
from benchsuite.methods.problem import Encoding


def test_stable_across_independent_runs(tmp_path):
    """Two cold caches, two SCF runs: the same token and full digest."""
    case = api.load_case("heh-cation")
    a = problem_fingerprint(case, None, Encoding(), DiskCache(tmp_path / "a"))
    b = problem_fingerprint(case, None, Encoding(), DiskCache(tmp_path / "b"))
    assert a.token == b.token and a.sha256 == b.sha256
    assert a.token.startswith("bsfp1.") and len(a.token.split(".")) == 1 + len(COMPONENTS)
    assert differing_components(a.token, b) == [] and differing_components(a.sha256, b) == []


def test_stable_in_a_separate_process(tmp_path, cache):
    """A fresh interpreter with its own empty cache computes the same token (no state carried over)."""
    import subprocess
    import sys

    code = ("from benchsuite import api; from benchsuite.chem.cache import DiskCache; "
            "from benchsuite.methods.fingerprint import problem_fingerprint; "
            "from benchsuite.methods.problem import Encoding; "
            f"print(problem_fingerprint(api.load_case('lih'), None, Encoding(), DiskCache({str(tmp_path)!r})).token)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300, check=True)
    assert done.stdout.strip() == problem_fingerprint(api.load_case("lih"), None, Encoding(), cache).token


def _differ(cache, case_a, case_b, basis_a=None, basis_b=None, enc_a=Encoding(), enc_b=Encoding()):
    a = problem_fingerprint(case_a, basis_a, enc_a, cache)
    b = problem_fingerprint(case_b, basis_b, enc_b, cache)
    return set(differing_components(a.token, b))


def test_each_change_is_named(cache):
    h2, lih = api.load_case("h2"), api.load_case("lih")
    moved = replace(h2, coords=((0.0, 0.0, 0.0), (0.0, 0.0, 0.75)))
    assert _differ(cache, h2, moved) == {"geometry", "orbitals"}
    assert {"basis", "orbitals"} <= _differ(cache, h2, h2, "sto-3g", "6-31g")
    assert _differ(cache, lih, replace(lih, frozen_core=1)) == {"space"}
    assert _differ(cache, lih, lih, enc_b=Encoding("parity", "blocked", False, True)) == {"encoding"}
    assert _differ(cache, h2, replace(h2, charge=1, multiplicity=2)) >= {"charge", "multiplicity", "orbitals"}


def test_geometry_below_the_rounding_step_is_the_same_problem(cache):
    """1e-10 bohr is below the 1e-8 bohr step: same token (common practice: hash rounded values)."""
    h2 = api.load_case("h2")
    bohr_in_file = 1.0 / 1.8897261246257702 if h2.units == "angstrom" else 1.0
    nudged = replace(h2, coords=(h2.coords[0], (0.0, 0.0, h2.coords[1][2] + 1e-10 * bohr_in_file)))
    assert _differ(cache, h2, nudged) == set()


def test_orbital_signature_is_phase_invariant_and_sees_another_solution():
    """Flipping an orbital's sign leaves the signature unchanged; another orbital set (an occupied-virtual
    rotation: a determinant that is not the SCF solution) changes it."""
    prep = solve_scf(prepare(api.load_case("lih"), "sto-3g"))
    mf = prep.mf
    c = np.asarray(mf.mo_coeff)
    base = digest(orbital_signature(prep.mol, c, mf.mo_energy, mf.mo_occ, "rhf"))
    flipped = c * np.where(np.arange(c.shape[1]) % 2 == 0, -1.0, 1.0)
    assert digest(orbital_signature(prep.mol, flipped, mf.mo_energy, mf.mo_occ, "rhf")) == base
    homo, lumo = 1, 2
    angle = 0.2
    rotated = c.copy()
    rotated[:, homo] = np.cos(angle) * c[:, homo] + np.sin(angle) * c[:, lumo]
    rotated[:, lumo] = -np.sin(angle) * c[:, homo] + np.cos(angle) * c[:, lumo]
    assert digest(orbital_signature(prep.mol, rotated, mf.mo_energy, mf.mo_occ, "rhf")) != base


def test_malformed_tokens_are_refused(cache):
    fp = problem_fingerprint(api.load_case("h2"), None, Encoding(), cache)
    for bad in ("", "bsfp1.abc", "bsfp2" + fp.token[5:], fp.token + ".0123456789", "x" * 64):
        with pytest.raises(ValueError):
            differing_components(bad, fp)
    assert differing_components(fp.token.upper(), fp) == []
    assert differing_components("0" * 64, fp) == ["sha256"]


def test_another_scf_solution_changes_only_the_orbitals(cache):
    """H2/STO-3G has two closed-shell RHF solutions, sigma_g^2 (ground) and sigma_u^2 (a stationary
    excited determinant, reached with PySCF's maximum-overlap method; common practice).  Same geometry,
    basis, charge, multiplicity, space and encoding; only the orbitals component differs."""
    from pyscf import scf

    from benchsuite.methods.fingerprint import component_values, fingerprint_from_parts, orbital_component

    prep = solve_scf(prepare(api.load_case("h2"), "sto-3g"))
    ground = prep.mf
    excited = scf.addons.mom_occ(scf.RHF(prep.mol), ground.mo_coeff, np.array([0.0, 2.0]))
    excited.verbose = 0
    excited.kernel(ground.make_rdm1(ground.mo_coeff, np.array([0.0, 2.0])))
    assert excited.converged and excited.e_tot > ground.e_tot + 0.5
    values = component_values(prep.case, prep.basis, prep.space, Encoding())
    fp_ground = fingerprint_from_parts(values, orbital_component(prep, cache))
    sig = orbital_signature(prep.mol, excited.mo_coeff, excited.mo_energy, excited.mo_occ, "rhf")
    fp_excited = fingerprint_from_parts(values, {"sha256": digest(sig), "summary": {}})
    assert differing_components(fp_excited.token, fp_ground) == ["orbitals"]
