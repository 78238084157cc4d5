"""Plugins of the fictional Quarry Lane group for the gate's verdict-integrity tests.

``DriftingSolver`` stands for one solver across two releases: its energy is the
exact sector energy plus ``bias_mha``, and the *default* of that option is read
from ``QUARRY_DRIFT_DEFAULT_MHA`` when the module is imported -- so two runs
of the same method spec can differ only in an option default, as happens when a
new release changes one.
"""

from __future__ import annotations

import os

from benchsuite.methods.base import MethodResult, Option

DEFAULT_BIAS_MHA = float(os.environ.get("QUARRY_DRIFT_DEFAULT_MHA", "0.4"))


class DriftingSolver:
    name = "quarry-drift"
    description = "exact sector energy plus a configurable bias (mHa)"
    options = (Option("bias_mha", float, DEFAULT_BIAS_MHA, "added to the exact energy, in mHa"),)
    variational = True
    stochastic = False

    def run(self, problem, options):
        from benchsuite.qubit.sector import sector_eigen

        exact = sector_eigen(problem.hamiltonian).ground_ha
        return MethodResult(energy_ha=exact + options["bias_mha"] / 1000.0, iterations=1)


class StalledSolver(DriftingSolver):
    """Exact energy, but reports that its optimiser did not converge."""

    name = "quarry-stalled"
    options = ()

    def run(self, problem, options):
        from benchsuite.qubit.sector import sector_eigen

        return MethodResult(energy_ha=sector_eigen(problem.hamiltonian).ground_ha, converged=False)
