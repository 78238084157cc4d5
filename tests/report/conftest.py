"""A real, small stored run shared by the report tests (computed once per session).

``benchsuite run`` in a subprocess on h2 and heh-cation (STO-3G) with two
built-in methods and the demo plugin from ``examples/tallowick`` (by
``module:attr`` on PYTHONPATH, so it needs no install), into a private
database and cache.  About five seconds; ``scan_run`` adds LiH and six
points of the H2 curve (about twenty seconds).
"""

from __future__ import annotations

import os
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
PLUGIN = "tallowick.adapter:TallowickMethod"
METHODS = ("exact-sector", "hf-bitstring", PLUGIN)
CASES = ("h2", "heh-cation")


@dataclass(frozen=True)
class RealRun:
    db: Path
    run_id: str
    returncode: int
    output: str


#: Six points of the H2 curve (STO-3G), for the report's curve section and its screenshots.
SCAN_POINTS = tuple(f"h2-scan@{r}" for r in ("0.5", "0.7", "1", "1.4", "2", "3"))


def _run(work: Path, cases) -> RealRun:
    db = work / "results.sqlite"
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(
        [str(REPO / "examples" / "tallowick"), str(REPO)] + [p for p in [os.environ.get("PYTHONPATH")] if p]))
    cmd = [sys.executable, "-m", "benchsuite.cli", "run", "--case", *cases, "--db", str(db),
           "--cache-dir", str(work / "cache"), "--workers", "2"]
    for m in METHODS:
        cmd += ["--method", m]
    proc = subprocess.run(cmd, cwd=work, env=env, capture_output=True, text=True, timeout=300)
    output = proc.stdout + proc.stderr
    assert proc.returncode in (0, 1), output
    from benchsuite.store.db import ResultStore

    with ResultStore.open(db, create=False) as store:
        run_id = store.resolve_run_id("latest")
    return RealRun(db, run_id, proc.returncode, output)


@pytest.fixture(scope="session")
def real_run(tmp_path_factory) -> RealRun:
    return _run(tmp_path_factory.mktemp("real-run"), CASES)


@pytest.fixture(scope="session")
def scan_run(tmp_path_factory) -> RealRun:
    """The real run plus LiH and six points of the H2 curve: every section of the report has content."""
    return _run(tmp_path_factory.mktemp("scan-run"), CASES + ("lih",) + SCAN_POINTS)
