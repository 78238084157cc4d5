"""Command-line values are checked before anything is computed: exit 2 naming the flag, no stray files;
an internal error is exit 3 with a crash note, never a bare traceback or the gate's exit code 1."""

from __future__ import annotations

import os

import pytest

from benchsuite import cli


@pytest.fixture
def clean(tmp_path, monkeypatch):
    monkeypatch.setenv("BENCHSUITE_DB", str(tmp_path / "results.sqlite"))
    monkeypatch.setenv("BENCHSUITE_CACHE", str(tmp_path / "cache"))
    monkeypatch.chdir(tmp_path)
    return tmp_path


def _run(capsys, *argv):
    try:
        code = cli.main(list(argv))
    except SystemExit as exc:              # argparse refuses a value: exit 2 with the flag named
        code = exc.code
    return code, capsys.readouterr().err


@pytest.mark.parametrize("flag, value", [
    ("--threshold-mha", "nan"), ("--threshold-mha", "inf"), ("--threshold-mha", "1e400"),
    ("--threshold-mha", "-1"), ("--timeout-s", "nan"), ("--timeout-s", "0"), ("--max-increase-mha", "nan"),
    ("--reference-timeout-s", "inf"), ("--seed", str(2**70)), ("--seed", "-1"), ("--workers", "0"),
    ("--confidence", "1.5"), ("--confidence", "nan"), ("--max-determinants", "0"),
])
def test_bad_run_values_exit_2_before_any_work(clean, capsys, flag, value):
    code, err = _run(capsys, "run", "--case", "h2", "--method", "exact-sector", flag, value)
    assert code == 2
    assert flag in err
    assert not list((clean / "cache").rglob("*.json")) and not (clean / "results.sqlite").exists()


def test_solve_timeout_nan_is_an_input_error(clean, capsys):
    code, err = _run(capsys, "solve", "h2", "--method", "exact-sector", "--timeout-s", "nan")
    assert code == 2 and "--timeout-s" in err


@pytest.mark.parametrize("flag", ["--json", "--junit", "--report"])
def test_unwritable_outputs_are_refused_up_front(clean, capsys, flag):
    code, err = _run(capsys, "run", "--case", "h2", "--method", "exact-sector", flag, str(clean))
    assert code == 2 and "is a directory" in err and flag in err
    assert not list((clean / "cache").rglob("*.json")) and not (clean / "results.sqlite").exists()
    assert [p.name for p in clean.iterdir() if p.name.endswith(".tmp")] == []


@pytest.mark.skipif(os.geteuid() == 0, reason="root can write anywhere")
def test_read_only_output_directory_is_refused(clean, capsys):
    ro = clean / "ro"
    ro.mkdir()
    ro.chmod(0o500)
    code, err = _run(capsys, "run", "--case", "h2", "--method", "exact-sector", "--json", str(ro / "x.json"))
    assert code == 2 and "not a writable directory" in err


def test_an_internal_error_exits_3_with_a_crash_note(clean, capsys, monkeypatch):
    def broken(args):
        raise RuntimeError("simulated defect")

    monkeypatch.setitem(cli.COMMANDS, "cases", (cli.COMMANDS["cases"][0], broken))
    code, err = _run(capsys, "cases")
    assert code == 3
    assert "internal error (RuntimeError: simulated defect)" in err
    note = err.strip().rsplit("traceback written to ", 1)[1]
    text = open(note, encoding="utf-8").read()
    assert "simulated defect" in text and "Traceback" in text
    os.unlink(note)
