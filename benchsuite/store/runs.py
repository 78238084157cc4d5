"""Stored runs at a glance: one :class:`RunSummary` per run, newest first.

Run ids are resolved by :meth:`benchsuite.store.db.ResultStore.resolve_run_id`
(a full id, a unique prefix or ``latest``); every command that takes a run id
(``compare``, ``report``, ``table``, ``export``) goes through it.  Rendering is
in :mod:`benchsuite.report.runs`.  Pure: plain records in, plain records out.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field


@dataclass(frozen=True)
class RunSummary:
    """One stored run.

    ``counts`` are the stored gate decision's verdict counts (empty for a run
    that never finished); ``passed`` is None then.  ``commit`` is the solver's
    commit when the run came from the pytest plugin (``source`` ``pytest``), else
    the commit of the checkout the run was started in; ``dirty`` says whether
    that checkout had uncommitted changes.
    """

    run_id: str
    started_at: str
    finished_at: str | None
    status: str
    source: str
    suite: str | None
    methods: list[str]
    n_tasks: int
    counts: dict[str, int] = field(default_factory=dict)
    passed: bool | None = None
    commit: str | None = None
    dirty: bool | None = None

    def to_dict(self) -> dict:
        return asdict(self)


def _commit(run) -> tuple[str | None, bool | None]:
    solver = (run.summary or {}).get("solver") or {}
    if solver.get("commit"):
        return solver["commit"], solver.get("dirty")
    git = run.git or {}
    return git.get("commit"), git.get("dirty")


def summarize(run) -> RunSummary:
    """The summary of one :class:`~benchsuite.store.records.RunRecord`."""
    summary = run.summary or {}
    gate = summary.get("gate") or {}
    commit, dirty = _commit(run)
    return RunSummary(run_id=run.run_id, started_at=run.started_at, finished_at=run.finished_at,
                      status=run.status, source=summary.get("source", "run"), suite=run.suite,
                      methods=list(run.methods), n_tasks=int(gate.get("n_tasks", summary.get("tasks", 0)) or 0),
                      counts=dict(gate.get("counts") or summary.get("counts") or {}),
                      passed=gate.get("passed"), commit=commit, dirty=dirty)


def run_summaries(store, limit: int | None = None) -> list[RunSummary]:
    """Every stored run, newest first (by start time, then by storage order), at most ``limit``."""
    runs = list(reversed(store.list_runs()))
    if limit is not None:
        runs = runs[:max(0, int(limit))]
    return [summarize(r) for r in runs]
