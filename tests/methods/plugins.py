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


# -- the hostile-plugin zoo (tests/test_runner_hostile.py) ----------------------------------------

def _hf_energy(problem) -> float:
    return float(problem.hamiltonian.basis_state_energy(problem.hamiltonian.hf_state()))


class CallsExit(_Base):
    name = "lab-exit"

    def run(self, problem, options):
        import sys

        sys.exit(3)


class KillsItself(_Base):
    name = "lab-kill-self"

    def run(self, problem, options):
        import signal

        os.kill(os.getpid(), signal.SIGKILL)


class Segfaults(_Base):
    name = "lab-segfault"

    def run(self, problem, options):
        import ctypes

        ctypes.string_at(0)


class ForksSleepAndHangs(_Base):
    """Starts a `sleep` child (prints its pid), then hangs: a timeout must end both."""

    name = "lab-fork-hang"

    def run(self, problem, options):
        import subprocess

        child = subprocess.Popen(["sleep", "300"])
        print(f"child pid {child.pid}", flush=True)
        time.sleep(600)


class SleepsWithChild(_Base):
    """Starts a `sleep` child (prints its pid), waits, then answers like HartreeFockPlugin
    without ending the child (for cleanup and interrupt tests)."""

    name = "lab-slow-child"
    options = (Option("wait_s", float, 4.0, "seconds to wait before answering"),)

    def run(self, problem, options):
        import subprocess

        child = subprocess.Popen(["sleep", "60"])
        print(f"child pid {child.pid}", flush=True)
        time.sleep(options["wait_s"])
        return MethodResult(energy_ha=_hf_energy(problem), iterations=1)


class FloodsStdout(_Base):
    """4 MB on file descriptor 1 and a C-level printf, then a good answer."""

    name = "lab-flood"

    def run(self, problem, options):
        import ctypes

        chunk = b"x" * 65536
        for _ in range(64):
            os.write(1, chunk)
        ctypes.CDLL(None).printf(b"\nC-level line from printf\n")
        return MethodResult(energy_ha=_hf_energy(problem))


class HugeMessage(_Base):
    name = "lab-huge-message"

    def run(self, problem, options):
        raise RuntimeError("start of a long story " + "y" * 20_000_000)


class Unpicklable(_Base):
    name = "lab-unpicklable"

    def __init__(self):
        import threading

        self.lock = threading.Lock()

    def run(self, problem, options):
        return MethodResult(energy_ha=_hf_energy(problem))


class OverflowIterations(_Base):
    name = "lab-iterations"

    def run(self, problem, options):
        return MethodResult(energy_ha=_hf_energy(problem), iterations=10**20)


class StringEnergy(_Base):
    name = "lab-string-energy"

    def run(self, problem, options):
        return MethodResult(energy_ha="-1.137")


class BoolEnergy(_Base):
    name = "lab-bool-energy"

    def run(self, problem, options):
        return MethodResult(energy_ha=True)


class HugeIntEnergy(_Base):
    name = "lab-huge-int"

    def run(self, problem, options):
        return MethodResult(energy_ha=10**400)


class ImplausibleEnergy(_Base):
    name = "lab-implausible"

    def run(self, problem, options):
        return MethodResult(energy_ha=-3.0e7)


class NumpyEnergy(_Base):
    """A numpy float energy and numpy parameters: fine."""

    name = "lab-numpy"

    def run(self, problem, options):
        import numpy as np

        return MethodResult(energy_ha=np.float64(_hf_energy(problem)), iterations=np.int64(2),
                            parameters=np.zeros(3))


class SetInResources(_Base):
    name = "lab-set-resources"

    def run(self, problem, options):
        from benchsuite.methods.base import Resources

        return MethodResult(energy_ha=_hf_energy(problem), resources=Resources(shots={100, 200}))


class ObjectInResources(_Base):
    name = "lab-object-resources"

    def run(self, problem, options):
        from benchsuite.methods.base import Resources

        return MethodResult(energy_ha=_hf_energy(problem), resources=Resources(circuit_depth=object()))


class HugeMetadata(_Base):
    name = "lab-huge-metadata"

    def run(self, problem, options):
        return MethodResult(energy_ha=_hf_energy(problem), metadata={"log": "z" * 5_000_000})


class EatsMemory(_Base):
    """Asks for 64 GiB, far beyond any worker memory limit."""

    name = "lab-eats-memory"

    def run(self, problem, options):
        blob = bytearray(64 << 30)
        return MethodResult(energy_ha=float(len(blob)))


class WritesDatabase(_Base):
    """Tries to forge a table in the results database named by BENCHSUITE_DB, then answers."""

    name = "lab-writes-db"

    def run(self, problem, options):
        import sqlite3

        path = os.environ.get("BENCHSUITE_DB")
        if path:
            with sqlite3.connect(path) as con:
                con.execute("CREATE TABLE IF NOT EXISTS forged (note TEXT)")
        return MethodResult(energy_ha=_hf_energy(problem), metadata={"found_database": bool(path)})


class ForgesPayload(_Base):
    """Replaces the runner's encoder inside its worker so that a text energy reaches the parent."""

    name = "lab-forges-payload"

    def run(self, problem, options):
        import json

        from benchsuite.runner import contract

        contract.encode_fields = lambda fields: json.dumps({"status": "ok", "energy_ha": "-99"}).encode()
        return MethodResult(energy_ha=_hf_energy(problem))


# -- states of the wrong spin (tests/methods/test_spin_state.py, tests/outside/test_spin_references.py) ---

class SectorLowest(_Base):
    """Returns the lowest eigenvalue of the (N, S_z) sector whatever its spin, and no state:
    right for a triplet-declared case, a state of another spin for a singlet whose triplet lies lower."""

    name = "lab-sector-lowest"

    def run(self, problem, options):
        from benchsuite.qubit.sector import sector_eigen

        return MethodResult(energy_ha=sector_eigen(problem.hamiltonian).ground_ha)


class TripletState(_Base):
    """Returns the lowest triplet of the (N, S_z = 0) sector with its energy and its state
    (a SectorState, or with ``dense`` the full statevector)."""

    name = "lab-triplet"
    options = (Option("dense", bool, False, "return the state as a dense vector"),)

    def run(self, problem, options):
        from benchsuite.methods.base import SectorState
        from benchsuite.qubit.sector import sector_eigen

        res = sector_eigen(problem.hamiltonian, multiplicity=3, keep_vectors=True)
        psi = SectorState(res.states, res.vectors[:, 0], problem.n_qubits)
        return MethodResult(energy_ha=res.ground_ha, state=psi.dense() if options["dense"] else psi)


class FakesStateCheck(TripletState):
    """The triplet again, with a forged metadata["state_check"] claiming a singlet."""

    name = "lab-fakes-check"

    def run(self, problem, options):
        result = super().run(problem, options)
        result.metadata["state_check"] = {"checked": True, "n_electrons": 2.0, "sz": 0.0, "s2": 0.0,
                                          "declared": {"n_electrons": 2.0, "sz": 0.0, "s2": 0.0}}
        return result


class BadState(_Base):
    """Returns a state vector of the wrong length."""

    name = "lab-bad-state"

    def run(self, problem, options):
        import numpy as np

        return MethodResult(energy_ha=_hf_energy(problem), state=np.ones(3))


class NoVariationalFlag:
    """Says nothing about being variational."""

    name = "lab-no-variational"
    description = "test plugin"
    options: tuple = ()
    stochastic = False

    def run(self, problem, options):
        return MethodResult(energy_ha=_hf_energy(problem))


class NoStochasticFlag:
    """Says nothing about being stochastic."""

    name = "lab-no-stochastic"
    description = "test plugin"
    options: tuple = ()
    variational = True

    def run(self, problem, options):
        return MethodResult(energy_ha=_hf_energy(problem))


class CheckedOptions(_Base):
    """Options with every kind of validation."""

    name = "lab-checked-options"
    options = (Option("layers", int, 2, "at least one, at most 8", minimum=1, maximum=8),
               Option("step", float, 0.1, "strictly positive", greater_than=0.0),
               Option("mode", str, "a", "one of a, b", choices=("a", "b")),
               Option("width", int, 4, "even", check=lambda v: None if v % 2 == 0 else "must be even"))

    def run(self, problem, options):
        return MethodResult(energy_ha=_hf_energy(problem))


class ReportsProgress(_Base):
    """A slow solver of the fictional lab that reports each iteration, then returns the HF energy."""

    name = "lab-reports-progress"
    options = (Option("seconds", float, 3.0, "how long to run"),)

    def run(self, problem, options):
        from benchsuite.methods.base import report_progress

        e = _hf_energy(problem)
        t0, it = time.perf_counter(), 0
        while time.perf_counter() - t0 < options["seconds"]:
            it += 1
            report_progress(iteration=it, energy_ha=e + 1.0 / it, gradient_norm=0.5 / it, stage="sweeping")
            time.sleep(0.1)
        return MethodResult(energy_ha=e, iterations=it, converged=True)


class ReportsHostileProgress(_Base):
    """Reports progress records that break every field's range; the display must drop those fields."""

    name = "lab-hostile-progress"

    def run(self, problem, options):
        from benchsuite.methods import base

        t0 = time.perf_counter()
        while time.perf_counter() - t0 < 3.0:
            base.report_progress(iteration=-4, energy_ha=math.nan, gradient_norm=-1.0, stage="x" * 5000)
            for listener in base.PROGRESS_LISTENERS:      # bypass the keyword interface
                listener({"iteration": True, "energy_ha": "-1.0", "stage": "bell\a"})
            time.sleep(0.1)
        return MethodResult(energy_ha=_hf_energy(problem), iterations=1)
