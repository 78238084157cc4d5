"""Every class of bad input: exit code 2, a message naming file and field, nothing cached."""

from __future__ import annotations

import subprocess
import sys

import pytest

from tests.conftest import H2_CASE


def _variant(old: str, new: str) -> str:
    assert old in H2_CASE
    return H2_CASE.replace(old, new)


LIH_ACTIVE = _variant('["H", 0.0, 0.0, 0.7414]', '["Li", 0.0, 0.0, 1.5949]').replace(
    'name = "scratch-h2"', 'name = "scratch-lih"')

BAD_CASES = {
    "unknown element": (_variant('["H", 0.0, 0.0, 0.0]', '["Xx", 0.0, 0.0, 0.0]'), "atoms[0]",
                        "unknown element"),
    "atoms too close": (_variant("0.7414]", "0.2]"), "atoms", "0.200 angstrom apart"),
    "electron parity": (_variant("multiplicity = 1", "multiplicity = 2"), "multiplicity", "parity"),
    "multiplicity below one": (_variant("multiplicity = 1", "multiplicity = 0"), "multiplicity",
                               "at least 1"),
    "active space more orbitals than the basis": (
        LIH_ACTIVE + "[active_space]\nelectrons = 2\norbitals = 7\n", "active_space.orbitals",
        "the basis has 6"),
    "active space more electrons than the molecule": (
        LIH_ACTIVE + "[active_space]\nelectrons = 6\norbitals = 4\n", "active_space.electrons",
        "only 4"),
    "basis lacks an element": (_variant('["H", 0.0, 0.0, 0.0]', '["I", 0.0, 0.0, 0.0]').replace(
        '["sto-3g"]', '["6-31g"]').replace("0.7414]", "1.609]"), "basis", "lacks I"),
    "reference cites a missing bib key": (
        H2_CASE + '[[reference]]\nmethod = "fci"\nbasis = "sto-3g"\nenergy_ha = -1.1\n'
                  'source = "no-such-key"\n', "reference[0].source", "not in sources.bib"),
    "scan index out of range": (H2_CASE + "[scan]\nbond = [0, 5]\nlengths = [0.7, 0.8]\n", "scan.bond",
                                "out of range"),
    "malformed TOML": (H2_CASE.replace('charge = 0', 'charge = = 0'), None, "line 4"),
    "unknown field": (H2_CASE + "multiplicty = 1\n", "multiplicty", "unknown field"),
    "dmrg bond dimensions not increasing": (H2_CASE + "[dmrg]\nbond_dims = [200, 100]\n", "dmrg.bond_dims",
                                            "increase strictly"),
    "dmrg one bond dimension": (H2_CASE + "[dmrg]\nbond_dims = [400]\n", "dmrg.bond_dims", "at least two"),
    "dmrg bond dimension too large": (H2_CASE + "[dmrg]\nbond_dims = [100, 40000]\n", "dmrg.bond_dims",
                                      "1..4000"),
    "dmrg unknown field": (H2_CASE + "[dmrg]\nbond_dim = [100, 200]\n", "dmrg.bond_dim", "unknown field"),
    "dmrg every sweep noisy": (H2_CASE + "[dmrg]\nsweeps_per_dim = 2\nnoisy_sweeps = 2\n", "dmrg.noisy_sweeps",
                               "out of range (0..1)"),
    "dmrg default noisy sweeps leave no clean sweep": (H2_CASE + "[dmrg]\nsweeps_per_dim = 2\n",
                                                       "dmrg.sweeps_per_dim", "noise-free"),
    "dmrg fit past its points": (H2_CASE + "[dmrg]\nbond_dims = [100, 200]\nfit_points = 3\n",
                                 "dmrg.fit_points", "out of range (2..2)"),
    "dmrg unknown orbitals": (H2_CASE + '[dmrg]\norbitals = "natural"\n', "dmrg.orbitals",
                              "canonical, split-localised"),
    "dmrg noise out of range": (H2_CASE + "[dmrg]\nnoise = 0.5\n", "dmrg.noise", "out of range"),
    "dmrg not a table": (H2_CASE.replace('name = "scratch-h2"', 'name = "scratch-h2"\ndmrg = 400'), "dmrg",
                         "a table"),
}


@pytest.mark.parametrize("label", sorted(BAD_CASES))
def test_bad_case_file_exits_2_names_file_and_field(label, scratch, run_cli, tmp_path):
    text, fieldname, what = BAD_CASES[label]
    path = scratch(text)
    code, out, err = run_cli("references", "scratch-h2" if "lih" not in text else "scratch-lih",
                             "--case-file", str(path), "--cache-dir", str(tmp_path / "c"))
    assert code == 2, err
    assert str(path) in err
    if fieldname:
        assert f"field '{fieldname}'" in err
    assert what in err
    assert not (tmp_path / "c").exists(), "nothing may be cached on bad input"


def test_duplicate_case_names_exit_2(scratch, run_cli):
    first = scratch(H2_CASE, "a.toml")
    second = scratch(H2_CASE.replace("0.7414", "0.75"), "b.toml")
    code, _, err = run_cli("cases", "--cases", str(scratch.dir))
    assert code == 2
    assert "duplicate case name 'scratch-h2'" in err
    assert str(first) in err and str(second) in err and "field 'name'" in err


def test_scan_expands_to_named_points(scratch, run_cli):
    path = scratch(H2_CASE + "[scan]\nbond = [0, 1]\nlengths = [0.5, 1.25, 3.0]\n")
    code, out, _ = run_cli("cases", "--case-file", str(path), "--format", "json")
    assert code == 0
    import json
    names = [r["name"] for r in json.loads(out) if r["name"].startswith("scratch-h2")]
    assert names == ["scratch-h2@0.5", "scratch-h2@1.25", "scratch-h2@3"]


def test_console_script_exit_code(scratch, tmp_path):
    """The installed entry point, not only main(), returns 2."""
    path = scratch(_variant("multiplicity = 1", "multiplicity = 0"))
    proc = subprocess.run([sys.executable, "-m", "benchsuite.cli", "references", "scratch-h2",
                           "--case-file", str(path), "--no-cache"], capture_output=True, text=True)
    assert proc.returncode == 2
    assert "field 'multiplicity'" in proc.stderr


def test_unknown_case_and_suite(run_cli):
    code, _, err = run_cli("references", "no-such-molecule", "--no-cache")
    assert code == 2 and "unknown case 'no-such-molecule'" in err
    code, _, err = run_cli("cases", "--suite", "no-such-suite")
    assert code == 2 and "unknown suite" in err


def test_dmrg_table_parsed_with_defaults_for_missing_fields(scratch):
    """A partial [dmrg] table: the given fields, the built-in schedule's for the rest, fit_points
    cut to the number of bond dimensions; no table at all leaves ``dmrg`` None (built-in schedule)."""
    from benchsuite.registry.case import DmrgSchedule
    from benchsuite.registry.loader import parse_case_file

    path = scratch(H2_CASE + '[dmrg]\nbond_dims = [150, 600]\norbitals = "split-localised"\n')
    (case,) = parse_case_file(path, {"scratch-geometry"})
    assert case.dmrg == DmrgSchedule(bond_dims=(150, 600), fit_points=2, orbitals="split-localised")
    (plain,) = parse_case_file(scratch(H2_CASE, "plain.toml"), {"scratch-geometry"})
    assert plain.dmrg is None
