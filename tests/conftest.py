"""Shared fixtures: a scratch case directory and a CLI runner."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

from benchsuite import cli

BIB = textwrap.dedent("""\
    @misc{scratch-geometry,
      author = {Nobody, A.},
      title = {Scratch geometry for input-validation tests},
      year = {2026},
    }
""")

H2_CASE = textwrap.dedent("""\
    name = "scratch-h2"
    title = "Hydrogen molecule, scratch copy"
    units = "angstrom"
    charge = 0
    multiplicity = 1
    atoms = [["H", 0.0, 0.0, 0.0], ["H", 0.0, 0.0, 0.7414]]
    basis = ["sto-3g"]
    tags = ["closed-shell"]
    geometry_source = "scratch-geometry"
""")


@pytest.fixture
def scratch(tmp_path: Path):
    """Write case files into a directory holding its own sources.bib."""
    (tmp_path / "sources.bib").write_text(BIB)

    def write(text: str, name: str = "case.toml") -> Path:
        path = tmp_path / name
        path.write_text(textwrap.dedent(text))
        return path

    write.dir = tmp_path
    return write


@pytest.fixture
def run_cli(capsys, tmp_path, monkeypatch):
    """Run the CLI in-process with a private cache; returns (exit code, stdout, stderr)."""
    monkeypatch.setenv("BENCHSUITE_CACHE", str(tmp_path / "cache"))

    def run(*argv: str):
        code = cli.main(list(argv))
        out = capsys.readouterr()
        return code, out.out, out.err

    return run


@pytest.fixture(scope="session")
def registry():
    """The built-in registry, loaded once."""
    from benchsuite.registry import Registry

    return Registry.load()


@pytest.fixture(scope="session")
def ladder_cache(tmp_path_factory):
    """One disk cache for the whole test session, so a ladder is computed once."""
    from benchsuite.chem.cache import DiskCache

    return DiskCache(tmp_path_factory.mktemp("ladder-cache"))
