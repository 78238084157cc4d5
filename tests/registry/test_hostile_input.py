"""Hostile and careless case files: each ends in exit code 2 naming the file and the field.

Every input here once crashed (a traceback, exit 3) or was blamed on the wrong field.  Each goes
through the command line (``cases`` for what the registry checks, ``references`` for what the orbital
space check catches before any SCF) and must leave nothing cached.
"""

from __future__ import annotations

import codecs
import tracemalloc

import numpy as np
import pytest
from scipy.spatial.distance import pdist, squareform

from benchsuite.errors import InputError
from benchsuite.registry import bounds
from benchsuite.registry.case import hill_formula, neighbour_distances_angstrom
from benchsuite.registry.loader import parse_case_file
from tests.conftest import H2_CASE

GEOMETRY = 'atoms = [["H", 0.0, 0.0, 0.0], ["H", 0.0, 0.0, 0.7414]]'
LIH = H2_CASE.replace(GEOMETRY, 'atoms = [["Li", 0.0, 0.0, 0.0], ["H", 0.0, 0.0, 1.5949]]')
REFERENCE = '[[reference]]\nmethod = "fci"\nbasis = "sto-3g"\nsource = "scratch-geometry"\nenergy_ha = '


def _h2(old: str, new: str) -> str:
    assert old in H2_CASE
    return H2_CASE.replace(old, new)


def _h2_at(z: str) -> str:
    return _h2("0.7414]", f"{z}]")


# label -> (file text or bytes, field named in the message or None for a whole-file problem, words)
REGISTRY_LEVEL = {
    "UTF-16 with byte-order mark": (H2_CASE.encode("utf-16"), None, "UTF-16"),
    "UTF-16 big-endian": (codecs.BOM_UTF16_BE + H2_CASE.encode("utf-16-be"), None, "UTF-16"),
    "UTF-16 without byte-order mark": (H2_CASE.encode("utf-16-le"), None, "NUL character"),
    "Latin-1 byte in the title": (_h2("scratch copy", "scratch copy \xe9").encode("latin-1"), "title",
                                  "byte 0xe9 is not valid UTF-8"),
    "invalid UTF-8 in a coordinate line": (_h2("0.7414]", "0.7414\xff]").encode("latin-1"), "atoms",
                                           "not valid UTF-8"),
    "arrays nested 5000 deep": (_h2('tags = ["closed-shell"]', "tags = " + "[" * 5000 + "]" * 5000), "tags",
                                "nested more than"),
    "inline tables nested 200 deep": (H2_CASE + "notes = " + "{a = " * 200 + "1" + "}" * 200 + "\n",
                                      "notes", "nested more than"),
    "energy 1 followed by 400 zeros": (H2_CASE + REFERENCE + "1" + "0" * 400 + "\n",
                                       "reference[0].energy_ha", "out of range"),
    "integer of 5000 digits": (H2_CASE + REFERENCE + "1" + "0" * 5000 + "\n", "reference.energy_ha",
                               "4300 digits"),
    "energy nan": (H2_CASE + REFERENCE + "nan\n", "reference[0].energy_ha", "finite"),
    "energy 1e300": (H2_CASE + REFERENCE + "1e300\n", "reference[0].energy_ha", "out of range"),
    "charge -2**63": (_h2("charge = 0", "charge = -9223372036854775808"), "charge", "out of range"),
    "charge 2**63 - 1": (_h2("charge = 0", "charge = 9223372036854775807"), "charge", "out of range"),
    "multiplicity 2**63 - 1": (_h2("multiplicity = 1", "multiplicity = 9223372036854775807"), "multiplicity",
                               "cannot have multiplicity"),
    "coordinate 1e6 angstrom": (_h2_at("1e6"), "atoms[1]", "out of range"),
    "coordinate 1e308 angstrom": (_h2_at("1e308"), "atoms[1]", "out of range"),
    "coordinate 1e308 bohr": (_h2_at("1e308").replace('"angstrom"', '"bohr"'), "atoms[1]", "out of range"),
    "coordinate inf": (_h2_at("inf"), "atoms[1]", "finite"),
    "coordinate nan": (_h2_at("nan"), "atoms[1]", "finite"),
    "coordinate -inf": (_h2("0.0, 0.0, 0.0]", "-inf, 0.0, 0.0]"), "atoms[0]", "finite"),
    "isolated atom at 30 angstrom": (_h2_at("30.0"), "atoms", "isolated fragment"),
    "scan of two coincident atoms (NaN direction)": (_h2_at("0.0") + "[scan]\nbond = [0, 1]\nlengths = [0.7]\n",
                                                     "scan.bond", "same place"),
    "scan length 1e308": (H2_CASE + "[scan]\nbond = [0, 1]\nlengths = [0.7, 1e308]\n", "scan.lengths",
                          "out of range"),
    "scan length nan": (H2_CASE + "[scan]\nbond = [0, 1]\nlengths = [nan]\n", "scan.lengths", "finite"),
    "scan length inf": (H2_CASE + "[scan]\nbond = [0, 1]\nlengths = [inf]\n", "scan.lengths", "finite"),
    "threshold inf": (H2_CASE + "threshold_mha = inf\n", "threshold_mha", "finite"),
    "threshold -nan": (H2_CASE + "threshold_mha = -nan\n", "threshold_mha", "finite"),
    "name with a trailing newline": (_h2('name = "scratch-h2"', 'name = "scratch-h2\\n"'), "name",
                                     "lowercase letters"),
    "name of 200 characters": (_h2('name = "scratch-h2"', f'name = "{"h" * 200}"'), "name", "at most"),
    "basis given as a file path": (_h2('["sto-3g"]', '["/etc/passwd"]'), "basis[0]", "not a basis name"),
    "too many atoms": (_h2(GEOMETRY, "atoms = [" + ", ".join(
        f'["H", {x}.0, 0.0, 0.0]' for x in range(bounds.MAX_ATOMS + 1)) + "]"), "atoms", "at most"),
}

SPACE_LEVEL = {
    "H2 triplet in STO-3G": (_h2("multiplicity = 1", "multiplicity = 3"), "multiplicity", "no empty orbital"),
    "H2 charge -2 in STO-3G": (_h2("charge = 0", "charge = -2"), "charge", "no empty orbital"),
    "H2 charge -4 in STO-3G": (_h2("charge = 0", "charge = -4"), "charge", "6 electrons (3 alpha)"),
    "H2 frozen_core = 1": (H2_CASE + "frozen_core = 1\n", "frozen_core", "no occupied orbital"),
    "LiH active space (2e, 1o)": (LIH + "[active_space]\nelectrons = 2\norbitals = 1\n",
                                  "active_space.orbitals", "no empty orbital"),
    "LiH active space (4e, 2o)": (LIH + "[active_space]\nelectrons = 4\norbitals = 2\n",
                                  "active_space.orbitals", "no empty orbital"),
    "He atom in STO-3G": (_h2(GEOMETRY, 'atoms = [["He", 0.0, 0.0, 0.0]]'), "basis", "no empty orbital"),
}


def _write(scratch, content) -> str:
    path = scratch.dir / "case.toml"
    if isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_text(content, encoding="utf-8")
    return str(path)


def _assert_input_error(code: int, err: str, path: str, fieldname: str | None, words: str) -> None:
    assert code == 2, err
    assert "Traceback" not in err and "internal error" not in err, err
    assert path in err, err
    if fieldname:
        assert f"field '{fieldname}'" in err, err
    assert words in err, err
    assert len(err) < 2000, "the message must stay short whatever the input"


@pytest.mark.parametrize("label", sorted(REGISTRY_LEVEL))
def test_registry_rejects_with_file_and_field(label, scratch, run_cli):
    content, fieldname, words = REGISTRY_LEVEL[label]
    path = _write(scratch, content)
    code, _, err = run_cli("cases", "--case-file", path)
    _assert_input_error(code, err, path, fieldname, words)


@pytest.mark.parametrize("label", sorted(SPACE_LEVEL))
def test_space_without_room_is_an_input_error_before_any_scf(label, scratch, run_cli, tmp_path):
    content, fieldname, words = SPACE_LEVEL[label]
    path = _write(scratch, content)
    cache = tmp_path / "refcache"
    code, _, err = run_cli("references", "scratch-h2", "--case-file", path, "--cache-dir", str(cache))
    _assert_input_error(code, err, path, fieldname, words)
    assert not cache.exists(), "nothing may be cached on bad input"


def test_run_rejects_a_space_without_room_before_storing_anything(scratch, run_cli, tmp_path):
    """`run` plans every case (the room check included) before it opens the database."""
    path = _write(scratch, SPACE_LEVEL["H2 triplet in STO-3G"][0])
    db = tmp_path / "results.sqlite"
    code, _, err = run_cli("run", "--case", "scratch-h2", "--case-file", path, "--method", "hf-bitstring",
                           "--db", str(db), "--cache-dir", str(tmp_path / "refcache"))
    _assert_input_error(code, err, path, "multiplicity", "no empty orbital")
    assert not db.exists() and not (tmp_path / "refcache").exists()


def test_spaces_with_room_still_pass(scratch, run_cli):
    """Open shells with an empty beta channel are fine (H atom in 6-31G: one alpha electron, two
    orbitals), as are the neighbours of the rejected spaces."""
    h_atom = _h2(GEOMETRY, 'atoms = [["H", 0.0, 0.0, 0.0]]').replace("multiplicity = 1", "multiplicity = 2")
    for text in (h_atom.replace('["sto-3g"]', '["6-31g"]'),
                 _h2("multiplicity = 1", "multiplicity = 3").replace('["sto-3g"]', '["6-31g"]'),
                 LIH + "[active_space]\nelectrons = 2\norbitals = 2\n"):
        path = _write(scratch, text)
        from benchsuite.chem.space import prepare
        from benchsuite.registry.loader import parse_case_file as parse

        (case,) = parse(path, {"scratch-geometry"})
        space = prepare(case).space
        assert 0 < space.n_alpha < space.n_orbitals


def test_non_utf8_bib_file_is_an_input_error(scratch, run_cli):
    (scratch.dir / "sources.bib").write_bytes("@misc{k, author = {M\xfcller}}\n".encode("latin-1"))
    path = _write(scratch, H2_CASE)
    code, _, err = run_cli("cases", "--case-file", path)
    assert code == 2 and "sources.bib" in err and "UTF-8" in err


def test_oversized_file_is_refused_before_parsing(scratch, run_cli):
    path = _write(scratch, H2_CASE + "#" * (bounds.MAX_CASE_FILE_BYTES + 1) + "\n")
    code, _, err = run_cli("cases", "--case-file", path)
    assert code == 2 and path in err and "larger than" in err


def test_a_fifo_among_the_case_files_is_refused_without_blocking(scratch, run_cli):
    import os

    _write(scratch, H2_CASE)
    os.mkfifo(scratch.dir / "pipe.toml")
    code, _, err = run_cli("cases", "--cases", str(scratch.dir))
    assert code == 2 and "pipe.toml" in err and "not a regular file" in err


def test_brackets_inside_strings_and_comments_do_not_count_as_nesting(scratch, run_cli):
    deep = "[" * 100
    text = (H2_CASE.replace('title = "Hydrogen molecule, scratch copy"', f'title = "{deep}"')
            + f"notes = '''{deep}'''\n# {deep}\n")
    path = _write(scratch, text)
    code, out, err = run_cli("cases", "--case-file", path, "--format", "json")
    assert code == 0, err


def test_neighbour_distances_match_a_dense_distance_matrix():
    """The k-d tree against SciPy's dense ``pdist`` (an independent route), duplicates included."""
    rng = np.random.default_rng(7)
    xyz = rng.uniform(-5, 5, size=(300, 3))
    xyz[17] = xyz[3]                                 # two atoms at the same place
    dist, other = neighbour_distances_angstrom(xyz)
    dense = squareform(pdist(xyz))
    np.fill_diagonal(dense, np.inf)
    np.testing.assert_allclose(dist, dense.min(axis=1), atol=1e-12)
    assert np.all(other != np.arange(len(xyz)))
    np.testing.assert_allclose(dense[np.arange(len(xyz)), other], dist, atol=1e-12)


def test_ten_thousand_atoms_validate_in_bounded_memory(scratch):
    """10,000 atoms on a 1.5 Å grid: the old dense check needed 10,000^2 x 3 doubles (2.4 GB) for
    the differences alone; the k-d tree stays far below 100 MB (measured with tracemalloc)."""
    n = 22
    grid = [(i, j, k) for i in range(n) for j in range(n) for k in range(n)][:10_000]
    atoms = ", ".join(f'["H", {1.5 * i}, {1.5 * j}, {1.5 * k}]' for i, j, k in grid)
    path = _write(scratch, _h2(GEOMETRY, f"atoms = [{atoms}]"))
    tracemalloc.start()
    try:
        (case,) = parse_case_file(path, {"scratch-geometry"})
        _, peak_bytes = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert len(case.symbols) == 10_000
    assert peak_bytes < 100 * 2**20, f"peak {peak_bytes / 2**20:.1f} MiB"


def test_too_close_atoms_among_many_are_found(scratch):
    atoms = [f'["H", {1.5 * i}, 0.0, 0.0]' for i in range(1999)] + ['["H", 1498.6, 0.0, 0.0]']
    path = _write(scratch, _h2(GEOMETRY, f"atoms = [{', '.join(atoms)}]"))
    with pytest.raises(InputError) as err:
        parse_case_file(path, {"scratch-geometry"})
    assert err.value.field == "atoms"
    assert "atoms 999 (H) and 1999 (H) are 0.100 angstrom apart" in str(err.value)


@pytest.mark.parametrize("symbols, hill", [
    # Hill, E. A. (1900), J. Am. Chem. Soc. 22, 478-494: with carbon, C then H then the rest
    # alphabetically; without carbon, strictly alphabetical (the Chemical Abstracts order; common practice).
    (("O", "H", "H"), "H2O"),
    (("C", "H", "H", "H", "H"), "CH4"),
    (("H", "F"), "FH"),
    (("N", "H", "H", "H"), "H3N"),
    (("H", "Cl"), "ClH"),
    (("C", "C", "H", "H", "H", "H", "H", "H", "O"), "C2H6O"),
    (("O", "C", "O"), "CO2"),
    (("S", "O", "O", "O", "O", "H", "H"), "H2O4S"),
    (("Br", "C", "Cl", "H", "H"), "CH2BrCl"),
    (("N", "N"), "N2"),
])
def test_hill_formula(symbols, hill):
    assert hill_formula(symbols) == hill


def test_cases_command_prints_hill_formulas(run_cli):
    import json

    code, out, _ = run_cli("cases", "--format", "json")
    assert code == 0
    formula = {r["name"]: r["formula"] for r in json.loads(out)}
    assert formula["h2o"] == "H2O" and formula["ch4"] == "CH4" and formula["hf"] == "FH"
