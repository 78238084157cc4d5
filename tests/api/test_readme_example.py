"""The README's notebook-style API example runs as written."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

README = Path(__file__).resolve().parents[2] / "README.md"


def readme_example() -> str:
    """The ```python block right after the ``<!-- api-example -->`` marker."""
    match = re.search(r"<!-- api-example -->\n```python\n(.*?)\n```", README.read_text(), re.S)
    assert match, "README lost its api-example block"
    return match.group(1)


def test_readme_api_example_runs(tmp_path, monkeypatch, capsys, cache_dir):
    monkeypatch.chdir(tmp_path)
    monkeypatch.setenv("BENCHSUITE_DB", str(tmp_path / "results.sqlite"))
    monkeypatch.setenv("BENCHSUITE_CACHE", str(cache_dir))
    namespace: dict = {}
    exec(compile(readme_example(), str(README), "exec"), namespace)
    out = capsys.readouterr().out
    assert "verdict='pass'" in out and "\nfail\n" in out
    frame = namespace["frame"]
    assert sorted(zip(frame["case"], frame["method"], frame["verdict"])) == sorted([
        ("h2", "exact-sector", "pass"), ("h2", "hf-bitstring", "fail"),
        ("heh-cation", "exact-sector", "pass"), ("heh-cation", "hf-bitstring", "fail")])
    assert namespace["prepared"].problem.n_qubits < 12      # LiH STO-3G: 12 spin orbitals before tapering
    assert namespace["refs"].primary_energy_ha == pytest.approx(namespace["exact"], abs=1e-8)


def test_readme_shows_the_tallowick_test_file_as_it_is():
    shown = re.search(r"accuracy test\n\(`examples/tallowick/tests/test_accuracy.py`\):\n\n```python\n(.*?)```",
                      README.read_text(), re.S)
    assert shown, "README lost the plugin example"
    source = (README.parent / "examples" / "tallowick" / "tests" / "test_accuracy.py").read_text()
    assert source.split('"""\n\n', 1)[1] == shown.group(1)
    assert len(source.splitlines()) <= 10
