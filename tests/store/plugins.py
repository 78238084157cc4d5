"""A plugin for the lock-contention test: it waits for the test's signal before answering.

``GatedSolver`` writes ``$GATE_DIR/started`` when it starts and returns the
exact sector energy once ``$GATE_DIR/go`` exists (at most 120 s), so the test
can take the database lock while a run is in flight.
"""

from __future__ import annotations

import os
import time
from pathlib import Path

from benchsuite.methods.base import MethodResult


class GatedSolver:
    name = "gated-exact"
    description = "exact sector energy, returned when the test says go"
    options = ()
    variational = True
    stochastic = False

    def run(self, problem, options):
        from benchsuite.qubit.sector import sector_eigen

        gate = Path(os.environ["GATE_DIR"])
        (gate / "started").touch()
        deadline = time.monotonic() + 120
        while not (gate / "go").exists() and time.monotonic() < deadline:
            time.sleep(0.05)
        return MethodResult(energy_ha=sector_eigen(problem.hamiltonian).ground_ha, iterations=1)


class ChattySolver(GatedSolver):
    """Exact energy, after printing a marked line (with HTML in it) to stdout and to stderr."""

    name = "chatty-exact"
    description = "exact sector energy, printing on both streams"

    def run(self, problem, options):
        import sys

        from benchsuite.qubit.sector import sector_eigen

        print("CHATTY-STDOUT <b>bold</b> & more", flush=True)
        print("CHATTY-STDERR warning: tolerance", file=sys.stderr, flush=True)
        return MethodResult(energy_ha=sector_eigen(problem.hamiltonian).ground_ha, iterations=1)
