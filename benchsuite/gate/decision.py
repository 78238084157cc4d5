"""The gate decision: computed once per run, rendered by every output.

:func:`decide` reads the run's final rows (and the baseline comparison, if
any) and returns a :class:`GateDecision`: verdict counts, the failing tasks
worst first, the worst error of any status, unconverged results, how the
stochastic fail claims were controlled, regressions and configuration
changes, the reasons the gate failed and the exit code.  The terminal summary,
the JSON ``gate`` block, the JUnit XML and the HTML banner all render this one
object (its :meth:`GateDecision.to_dict` is stored in the run's summary, so
``benchsuite report`` shows exactly what the run decided).

Exit codes: 0 the gate passed; 1 it failed.  Pure: no PySCF, no OpenFermion.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

from benchsuite.scoring import PROCEDURE_NAMES, converged_but_failing, fail_level, is_failing

#: Order of "how bad" for verdicts without an error to rank by.
_SEVERITY = ("below-exact", "wrong-state", "invalid", "error", "timeout", "fail", "unconverged", "inconclusive")


@dataclass(frozen=True)
class TaskVerdict:
    """One task as the decision lists it."""

    task_key: str
    method: str
    case: str
    basis: str
    encoding: str
    verdict: str
    error_mha: float | None
    threshold_mha: float
    converged: bool | None
    message: str

    @property
    def label(self) -> str:
        return f"{self.method} on {self.case} ({self.basis})"


@dataclass
class GateDecision:
    """What the gate decided about a run (plain data; see :meth:`to_dict` / :meth:`from_dict`)."""

    run_id: str
    n_tasks: int
    n_scored: int
    counts: dict[str, int]
    failing: list[TaskVerdict]
    worst: TaskVerdict | None
    unconverged: list[TaskVerdict]
    allow_inconclusive: bool
    require_converged: bool
    stochastic: dict
    baseline: dict | None
    reasons: list[str] = field(default_factory=list)
    converged_failing: list[TaskVerdict] = field(default_factory=list)   # scoring.converged_but_failing

    @property
    def passed(self) -> bool:
        return not self.reasons

    @property
    def exit_code(self) -> int:
        return 0 if self.passed else 1

    def to_dict(self) -> dict:
        doc = asdict(self)
        doc["passed"], doc["exit_code"] = self.passed, self.exit_code
        return doc

    @classmethod
    def from_dict(cls, doc: dict) -> "GateDecision":
        def task(d):
            return None if d is None else TaskVerdict(**d)

        return cls(run_id=doc["run_id"], n_tasks=doc["n_tasks"], n_scored=doc["n_scored"],
                   counts=dict(doc["counts"]), failing=[task(d) for d in doc["failing"]],
                   worst=task(doc["worst"]), unconverged=[task(d) for d in doc["unconverged"]],
                   allow_inconclusive=doc["allow_inconclusive"], require_converged=doc["require_converged"],
                   stochastic=dict(doc["stochastic"]), baseline=doc.get("baseline"),
                   reasons=list(doc.get("reasons", [])),
                   converged_failing=[task(d) for d in doc.get("converged_failing", [])])


def _task(r) -> TaskVerdict:
    first_line = (r.message or "").strip().split("\n")[0]
    return TaskVerdict(r.task_key, r.method, r.case, r.basis, r.encoding, r.verdict, r.error_mha,
                       r.threshold_mha, r.converged, first_line[:300])


def badness(t: TaskVerdict) -> tuple:
    """Sort key, worst first: tasks with an error by |error| descending, then by verdict severity."""
    sev = _SEVERITY.index(t.verdict) if t.verdict in _SEVERITY else len(_SEVERITY)
    return (t.error_mha is None, -abs(t.error_mha or 0.0), sev, t.method, t.case, t.basis)


def decide(run_id: str, rows: list, settings, comparison=None) -> GateDecision:
    """The decision over ``rows`` (the run's final rows) and an optional baseline ``comparison``."""
    tasks = [_task(r) for r in rows]
    counts: dict[str, int] = {}
    for t in tasks:
        counts[t.verdict] = counts.get(t.verdict, 0) + 1
    failing = sorted((t for t in tasks if is_failing(t.verdict, settings.allow_inconclusive)), key=badness)
    scored = [t for t in tasks if t.error_mha is not None]
    reasons = []
    if not tasks:
        reasons.append("no task ran")
    if failing:
        reasons.append(f"{len(failing)} of {len(tasks)} task(s) not passing")
    baseline = None
    if comparison is not None:
        baseline = comparison.to_dict()
        reasons += comparison.problems()
    return GateDecision(
        run_id=run_id, n_tasks=len(tasks), n_scored=len(scored), counts=counts, failing=failing,
        worst=min(scored, key=badness) if scored else None,
        unconverged=[t for t in tasks if t.converged is False],
        converged_failing=sorted((t for t, r in zip(tasks, rows) if converged_but_failing(r)), key=badness),
        allow_inconclusive=settings.allow_inconclusive, require_converged=settings.require_converged,
        stochastic=_stochastic_summary(rows, settings), baseline=baseline, reasons=reasons)


def _stochastic_summary(rows, settings) -> dict:
    n = sum(1 for r in rows if r.status == "ok" and r.stderr_ha and r.reference_energy_ha is not None
            and not (settings.require_converged and r.converged is False))
    return {"procedure": settings.multiple_testing, "procedure_name": PROCEDURE_NAMES[settings.multiple_testing],
            "confidence": settings.confidence, "level": fail_level(settings.confidence), "n_tasks": n,
            "controls": "family-wise error rate" if settings.multiple_testing == "holm"
            else "false-discovery rate"}
