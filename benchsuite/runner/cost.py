"""What a method task will cost, in seconds: scheduling order and the run's ETA.

A task's size is read from its orbital space and its reference ladder (both known once the ladders
are done, before any method runs): the spin-orbital count (``n_qubits`` before any reduction), the
dimension of the (N_alpha, N_beta) sector, the number of spin-orbital singles and doubles from the
reference (the UCCSD parameter count, a proxy for any ansatz's size) and ``multireference_ha`` =
|E(primary) - E(CCSD(T))|, how much CCSD(T) misses (it grows with static correlation, common
practice as a multireference diagnostic; iterative solvers need more operators and iterations
there).  The prior of a task's wall time in its worker is

    seconds = OVERHEAD_S + BUILD_S_PER_SO4 * n_so**4
              + scale_s * (dimension * n_excitations / 1e6) ** a * ((multireference_ha + 1e-4) / 1e-3) ** b

with ``(scale_s, a, b)`` per built-in method in :data:`PRIORS`, fitted (least squares in the logs,
then the scale set so that the predicted total equals the measured one) to ``run --suite all
--method uccsd-vqe --method adapt-vqe`` on the 2-core machine; a method without its own entry (a
plugin) uses :data:`GENERIC_PRIOR`.  :class:`CostModel` refines the prior as tasks finish: each
method's predictions are multiplied by the geometric mean of its observed/predicted ratios, shrunk
toward one (``log f = sum(log r) / (n + 1)``), so a plugin's cost is learnt from its first few
tasks.  A task that an earlier stored run measured (same task key) is predicted by that measurement
(plus the overhead and the build).

:func:`makespan_s` turns predictions into an ETA: the pending tasks in the order the pool will
start them, on ``workers`` workers that become free when their running tasks end (list
scheduling; the order is longest-first, :func:`longest_first`).  Pure arithmetic: no PySCF.
"""

from __future__ import annotations

import heapq
import math
from dataclasses import dataclass
from math import comb

#: Seconds every method task pays before its method runs: a fork, the problem build from cached
#: integrals, the state check and the problem figures (the hf-bitstring tasks of a smoke run).
OVERHEAD_S = 1.0
#: The Hamiltonian build's growth with the register, s per spin-orbital**4 (``hamiltonian n2-tz-wide``:
#: 120 spin-orbitals, about 40 s with the figures).
BUILD_S_PER_SO4 = 2e-7

#: (scale_s, a, b) per built-in method; see the module docstring.  uccsd-vqe and adapt-vqe: fitted to
#: the 114 tasks of ``run --suite all`` (2026-12-04, 2 workers); the others set by hand from smoke runs.
PRIORS = {
    "hf-bitstring": (0.0, 1.0, 0.0),
    "exact-sector": (0.3, 0.5, 0.0),
    "uccsd-vqe": (1.91, 0.25, 0.19),
    "upccgsd-vqe": (4.0, 0.25, 0.19),
    "adapt-vqe": (24.1, 0.42, 0.29),
}
GENERIC_PRIOR = (5.0, 0.5, 0.0)


@dataclass(frozen=True)
class TaskSize:
    """How big a task's problem is (spin-orbitals, sector dimension, reference singles + doubles)."""

    n_spin_orbitals: int
    sector_dimension: int
    n_excitations: int
    multireference_ha: float = 0.0       # |E(primary) - E(CCSD(T))|, 0 when either is missing

    @classmethod
    def of_space(cls, n_orbitals: int, n_alpha: int, n_beta: int, multireference_ha: float = 0.0) -> "TaskSize":
        va, vb = n_orbitals - n_alpha, n_orbitals - n_beta
        singles = n_alpha * va + n_beta * vb
        doubles = comb(n_alpha, 2) * comb(va, 2) + comb(n_beta, 2) * comb(vb, 2) + n_alpha * va * n_beta * vb
        return cls(2 * n_orbitals, comb(n_orbitals, n_alpha) * comb(n_orbitals, n_beta), singles + doubles,
                   abs(multireference_ha))

    @property
    def work(self) -> float:
        """Sector dimension times excitations, in millions (the prior's variable)."""
        return self.sector_dimension * max(self.n_excitations, 1) / 1e6


def refused(method: str, size: TaskSize) -> bool:
    """Whether a built-in state-holding method refuses this size at once (a wide register or a
    sector past :data:`benchsuite.methods.ucc.MAX_STATE_DETERMINANTS`): only the overhead and the
    problem build are spent."""
    from benchsuite.methods.ucc import MAX_STATE_DETERMINANTS
    from benchsuite.qubit.register import WORD_QUBITS

    holds_state = method in PRIORS and method != "hf-bitstring"
    return holds_state and (size.sector_dimension > MAX_STATE_DETERMINANTS or size.n_spin_orbitals > WORD_QUBITS)


def prior_s(method: str, size: TaskSize) -> float:
    """The prior cost of ``method`` on a problem of ``size``, in seconds."""
    fixed = OVERHEAD_S + BUILD_S_PER_SO4 * size.n_spin_orbitals ** 4
    if refused(method, size):
        return fixed
    scale_s, a, b = PRIORS.get(method, GENERIC_PRIOR)
    return fixed + scale_s * size.work ** a * ((size.multireference_ha + 1e-4) / 1e-3) ** b


class CostModel:
    """Predicted seconds per task: measured history first, else the refined prior.

    ``limit_s`` (a task's time budget, s) bounds every prediction.
    ``history`` maps a task key to the seconds an earlier stored run measured for it (the method's
    own seconds, as stored); predictions are of a task's wall time in its worker (plus
    :data:`OVERHEAD_S`).
    """

    def __init__(self, history: dict[str, float] | None = None, limit_s: float | None = None):
        self.history = dict(history or {})
        self.limit_s = limit_s            # a task's time budget: no prediction exceeds it (plus overhead)
        self._log_ratios: dict[str, list[float]] = {}

    def factor(self, method: str) -> float:
        """The learnt multiplier of ``method``'s prior (1 before any of its tasks finished)."""
        logs = self._log_ratios.get(method, [])
        return math.exp(sum(logs) / (len(logs) + 1))

    def predict_s(self, key: str, method: str, size: TaskSize) -> float:
        if key in self.history:
            guess = OVERHEAD_S + BUILD_S_PER_SO4 * size.n_spin_orbitals ** 4 + self.history[key]
        else:
            guess = prior_s(method, size) * self.factor(method)
        return guess if self.limit_s is None else min(guess, self.limit_s + OVERHEAD_S)

    def observe(self, key: str, method: str, size: TaskSize, seconds: float) -> None:
        """A finished task's measured seconds refine its method's factor (not for history tasks)."""
        if key in self.history or not (seconds > 0 and math.isfinite(seconds)):
            return
        self._log_ratios.setdefault(method, []).append(math.log(seconds / prior_s(method, size)))


def longest_first(items: list, cost_s) -> list:
    """``items`` sorted by ``cost_s(item)``, largest first (stable for equal costs)."""
    return sorted(items, key=lambda it: -cost_s(it))


def makespan_s(pending_s: list[float], running_left_s: list[float], workers: int) -> float:
    """Seconds until the last task ends: ``running_left_s`` occupy workers now, ``pending_s`` start in
    order, each on the first worker to become free."""
    free = sorted(list(running_left_s)[:workers] + [0.0] * max(0, workers - len(running_left_s)))
    heapq.heapify(free)
    end = max(free, default=0.0)
    for cost in pending_s:
        start = heapq.heappop(free)
        heapq.heappush(free, start + cost)
        end = max(end, start + cost)
    return end


class TaskClock:
    """The method phase's clock: which tasks wait, run and finished, and the ETA from a :class:`CostModel`.

    Times are ``time.monotonic()`` seconds passed in by the caller.  A running task that has
    outlived its prediction is given ``max(0.1 * elapsed, 1 s)`` more (it is running late, not done).
    """

    def __init__(self, model: CostModel, workers: int):
        self.model, self.workers = model, max(1, int(workers))
        self.sizes: dict[str, tuple[str, TaskSize]] = {}
        self.pending: list[str] = []
        self.running: dict[str, float] = {}

    def plan(self, entries: list[tuple[str, str, TaskSize]]) -> None:
        """``(key, method, size)`` of every task to run, in the order the pool starts them."""
        for key, method, size in entries:
            self.sizes[key] = (method, size)
            self.pending.append(key)

    def predicted_s(self, key: str) -> float:
        method, size = self.sizes[key]
        return self.model.predict_s(key, method, size)

    def started(self, key: str, now: float) -> None:
        if key in self.sizes and key not in self.running:
            self.pending = [k for k in self.pending if k != key]
            self.running[key] = now

    def finished(self, key: str, seconds: float | None) -> None:
        if key not in self.sizes:
            return
        self.pending = [k for k in self.pending if k != key]
        self.running.pop(key, None)
        if seconds is not None:
            method, size = self.sizes[key]
            self.model.observe(key, method, size, seconds)

    def eta_s(self, now: float) -> float:
        left = []
        for key, t0 in self.running.items():
            elapsed = now - t0
            left.append(max(self.predicted_s(key) - elapsed, 0.1 * elapsed, 1.0))
        return makespan_s([self.predicted_s(k) for k in self.pending], left, self.workers)
