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
