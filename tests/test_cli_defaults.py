"""Defaults set once: command line, then BENCHSUITE_* variables, then [tool.benchsuite] of the nearest
pyproject.toml, then the built-in default; bad values there are exit 2 naming file and key; -v / -q."""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

from benchsuite import defaults
from benchsuite.errors import InputError
from benchsuite.store.db import ResultStore
from tests.conftest import BIB, H2_CASE

VARIABLES = [variable for variable, _ in defaults.KEYS.values()]


@pytest.fixture
def project(tmp_path, monkeypatch):
    """A project directory with a pyproject.toml; the working directory is a subdirectory of it."""
    for variable in VARIABLES:
        monkeypatch.delenv(variable, raising=False)
    work = tmp_path / "src" / "deep"
    work.mkdir(parents=True)
    monkeypatch.chdir(work)

    def write(table: str) -> Path:
        path = tmp_path / "pyproject.toml"
        path.write_text("[project]\nname = 'tallowick-solver'\n\n[tool.benchsuite]\n" + textwrap.dedent(table))
        return path

    write.root = tmp_path
    return write


def test_precedence_environment_then_pyproject_then_builtin(project):
    path = project('db = "results/runs.sqlite"\nworkers = 3\nthreshold_mha = 2.5\n')
    got = defaults.resolve_defaults(environ={"BENCHSUITE_WORKERS": "5"})
    assert got["db"].value == project.root / "results" / "runs.sqlite"      # relative to the file
    assert got["db"].source == f"[tool.benchsuite] db in {path.resolve()}"
    assert (got["workers"].value, got["workers"].source) == (5, "$BENCHSUITE_WORKERS")
    assert got["threshold_mha"].value == 2.5
    assert (got["cache_dir"].value, got["cache_dir"].source) == (None, "built-in default")


@pytest.mark.parametrize("table, key, message", [
    ("workers = 0\n", "tool.benchsuite.workers", "finite positive"),
    ("workers = 2.5\n", "tool.benchsuite.workers", "expected an integer"),
    ("threshold_mha = \"tight\"\n", "tool.benchsuite.threshold_mha", "bad value"),
    ("timeout_s = nan\n", "tool.benchsuite.timeout_s", "finite positive"),
    ("db = 3\n", "tool.benchsuite.db", "path string"),
    ("colour = \"blue\"\n", "tool.benchsuite.colour", "unknown key"),
])
def test_bad_project_values_name_file_and_key(project, table, key, message):
    path = project(table)
    with pytest.raises(InputError) as info:
        defaults.resolve_defaults(environ={})
    assert info.value.path == str(path.resolve()) and info.value.field == key and message in str(info.value)


def test_bad_environment_value_names_the_variable(project):
    with pytest.raises(InputError, match="BENCHSUITE_THRESHOLD_MHA"):
        defaults.resolve_defaults(environ={"BENCHSUITE_THRESHOLD_MHA": "-1"})


def test_cli_bad_pyproject_exits_2_before_any_work(project, run_cli, monkeypatch):
    monkeypatch.delenv("BENCHSUITE_CACHE", raising=False)
    path = project("workers = -4\n")
    code, out, err = run_cli("run", "--case", "h2", "--method", "hf-bitstring")
    assert code == 2 and str(path.resolve()) in err and "field 'tool.benchsuite.workers'" in err
    assert not any(project.root.rglob("*.sqlite"))


def test_cli_database_from_pyproject_threshold_precedence_and_quiet(project, run_cli, tmp_path):
    """hf-bitstring on H2/STO-3G misses the correlation energy (about 20 mHa near equilibrium, from
    memory): it passes a 50 mHa project threshold, and a case file's own 1 mHa threshold wins over the
    project's."""
    project('db = "store/results.sqlite"\nthreshold_mha = 50\n')
    code, out, err = run_cli("-q", "run", "--case", "h2", "--method", "hf-bitstring")
    assert code == 0, err
    assert out.strip().startswith("run ") and out.strip().endswith("gate passed") and len(out.splitlines()) == 1
    with ResultStore.open(project.root / "store" / "results.sqlite", create=False) as store:
        (row,) = store.results(store.resolve_run_id("latest"))
    assert row.threshold_mha == 50.0
    case_file = tmp_path / "own.toml"
    case_file.write_text(H2_CASE + "threshold_mha = 1.0\n")
    (tmp_path / "sources.bib").write_text(BIB)
    code, out, err = run_cli("run", "--case", "scratch-h2", "--case-file", str(case_file), "--method",
                             "hf-bitstring", "-v")
    assert code == 1, err
    assert "threshold_mha = 50.0  [[tool.benchsuite] threshold_mha in" in err        # -v shows the sources
    with ResultStore.open(project.root / "store" / "results.sqlite", create=False) as store:
        (row,) = store.results(store.resolve_run_id("latest"))
    assert row.threshold_mha == 1.0


def test_command_line_beats_environment(project, run_cli, tmp_path, monkeypatch):
    project('db = "from-pyproject.sqlite"\n')
    monkeypatch.setenv("BENCHSUITE_DB", str(tmp_path / "from-env.sqlite"))
    code, _, err = run_cli("runs", "-v", "--db", str(tmp_path / "absent.sqlite"))
    assert code == 2 and "absent.sqlite" in err and "db = " + str(tmp_path / "absent.sqlite") in err
    code, _, err = run_cli("runs")
    assert code == 2 and "from-env.sqlite" in err


def test_every_argument_of_every_command_has_help():
    from benchsuite.cli import build_parser

    parser = build_parser()
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_Sub")
    missing = [f"{name} {action.dest}" for name, p in sub.choices.items() for action in p._actions
               if action.help is None]
    assert missing == []
