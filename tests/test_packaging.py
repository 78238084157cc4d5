"""The wheel works on its own: built from this tree, installed into a fresh virtual environment, it finds
its registry (shipped inside the wheel) and runs from outside the checkout."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import sysconfig
import tomllib
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]


def test_package_list_covers_every_code_package():
    declared = set(tomllib.loads((REPO / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    on_disk = {".".join(p.parent.relative_to(REPO).parts) for p in (REPO / "benchsuite").rglob("__init__.py")}
    assert declared == on_disk | {"benchsuite.reference_data"}


def _run(cmd, **kw):
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=600, **kw)
    assert proc.returncode == 0, f"{cmd}\n{proc.stdout}\n{proc.stderr}"
    return proc


def test_wheel_in_a_fresh_environment(tmp_path):
    """pip wheel -> a new venv (dependencies borrowed read-only from this environment through a .pth
    line, so only benchsuite itself comes from the wheel) -> `benchsuite cases` and a smoke `solve`
    in a directory outside the checkout."""
    _run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(tmp_path / "dist"), str(REPO)])
    wheel = next((tmp_path / "dist").glob("benchsuite-*.whl"))
    venv = tmp_path / "venv"
    _run([sys.executable, "-m", "venv", str(venv)])
    py = venv / "bin" / "python"
    site = _run([str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"]).stdout.strip()
    Path(site, "borrowed-dependencies.pth").write_text(sysconfig.get_paths()["purelib"] + "\n")
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "BENCHSUITE_REFERENCE_DATA")}
    env["BENCHSUITE_CACHE"] = str(tmp_path / "cache")
    # without $PYTHONPATH: a checkout on it (with the egg-info the build left) would count as installed
    _run([str(py), "-m", "pip", "install", "-q", "--no-deps", str(wheel)], env=env)
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    where = _run([str(py), "-c", "import benchsuite, benchsuite.registry.registry as r; "
                  "print(benchsuite.__file__); print(r.builtin_data_dir())"], cwd=outside, env=env).stdout.split()
    assert all(p.startswith(site) for p in where), where           # code and data from the wheel
    cases = json.loads(_run([str(venv / "bin" / "benchsuite"), "cases", "--format", "json"], cwd=outside,
                            env=env).stdout)
    assert len(cases) >= 50 and {"h2", "heh-cation", "lih"} <= {c["name"] for c in cases}
    solved = json.loads(_run([str(venv / "bin" / "benchsuite"), "solve", "h2", "--method", "exact-sector",
                              "--format", "json"], cwd=outside, env=env).stdout)
    assert solved["status"] == "ok" and abs(solved["error_mha"]) < 1e-6
    if shutil.which("cc") or shutil.which("gcc"):     # setup.py compiled the determinant kernel into the wheel
        env["BENCHSUITE_KERNEL_DIR"] = str(tmp_path / "no-first-use-builds")
        note = _run([str(py), "-c", "from benchsuite.methods.determinant import kernel_note; "
                     "print(kernel_note())"], cwd=outside, env=env).stdout
        assert "installed _determinant_kernel" in note, note
        assert not (tmp_path / "no-first-use-builds").exists()
