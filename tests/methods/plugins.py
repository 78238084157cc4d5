"""Plugins of a fictional lab, each misbehaving in one way, for the fault-isolation tests."""

from __future__ import annotations

import math
import os
import time

from benchsuite.methods.base import MethodResult, Option


class _Base:
    description = "test plugin"
    options: tuple = ()
    variational = True
    stochastic = False


class HartreeFockPlugin(_Base):
    """A well-behaved plugin: the reference determinant's energy."""

    name = "lab-hf"
    options = (Option("shift_ha", float, 0.0, "added to the energy"),)

    def run(self, problem, options):
        e = problem.hamiltonian.basis_state_energy(problem.hamiltonian.hf_state())
        return MethodResult(energy_ha=float(e) + options["shift_ha"], iterations=1)


def make_hf_plugin():
    """A factory, the other accepted form of a plugin target."""
    return HartreeFockPlugin()


class Raises(_Base):
    name = "lab-raises"

    def run(self, problem, options):
        raise RuntimeError("solver diverged in iteration 3")


class ReturnsNaN(_Base):
    name = "lab-nan"

    def run(self, problem, options):
        return MethodResult(energy_ha=math.nan)


class ReturnsText(_Base):
    name = "lab-text"

    def run(self, problem, options):
        return MethodResult(energy_ha="-1.1 Ha")


class ReturnsFloat(_Base):
    """Returns a bare number instead of a MethodResult (a contract breach)."""

    name = "lab-bare-float"

    def run(self, problem, options):
        return -1.0


class Hangs(_Base):
    name = "lab-hangs"

    def run(self, problem, options):
        time.sleep(600)


class BelowExact(_Base):
    """Claims an energy 10 mHa below FCI: the classic lost-constant or wrong-sector symptom."""

    name = "lab-below"

    def run(self, problem, options):
        from benchsuite.qubit.sector import sector_eigen

        exact = sector_eigen(problem.hamiltonian).ground_ha
        return MethodResult(energy_ha=exact - 0.010)


class Aborts(_Base):
    name = "lab-aborts"

    def run(self, problem, options):
        os.abort()


class NoRun:
    name = "lab-no-run"
