"""A run as asked for: a fresh selection or ``--resume``, from request to decision.

:func:`start_run` is what ``benchsuite run`` and :func:`benchsuite.api.run_methods`
both call.  It checks the output paths, opens the store, rebuilds a resumed
run's plan from its stored record (never from the request), loads the registry
the plan names, resolves and verifies the baseline, then executes
(:func:`benchsuite.gate.execute.execute_plan`).  Every input error surfaces as an
:class:`~benchsuite.errors.InputError` before any reference is computed.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

from benchsuite.errors import InputError
from benchsuite.gate.execute import Execution, Outputs, execute_plan
from benchsuite.gate.plan import RunSettings, check_output_path, plan_run, stored_plan_arguments


@dataclass(frozen=True)
class RunRequest:
    """What to run.  ``resume`` (a run id or prefix) replaces selection, methods, options, settings and
    seed by the stored run's.  ``db`` / ``cache_dir`` None: ``$BENCHSUITE_DB`` / ``$BENCHSUITE_CACHE``
    or ``.benchsuite/``; ``workers`` None: the core count; ``baseline`` a run id, prefix or ``latest``;
    ``max_increase_mha`` None: 0.1 mHa.  ``registry`` is used as given for a fresh run when set."""

    suite: str | None = None
    cases: list[str] | None = None
    methods: list[str] = field(default_factory=list)
    option_items: list[str] = field(default_factory=list)
    settings: RunSettings = field(default_factory=RunSettings)
    seed: int = 0
    resume: str | None = None
    workers: int | None = None
    scheduler: str | None = None
    db: Path | None = None
    cache_dir: Path | None = None
    baseline: str | None = None
    max_increase_mha: float | None = None
    allow_new: bool = False
    outputs: Outputs = field(default_factory=Outputs)
    command: str = ""
    registry: object = None


def checked_outputs(json=None, junit=None, report=None) -> Outputs:
    """Output paths, each checked writable (InputError naming its flag)."""
    return Outputs(check_output_path(json, "--json"), check_output_path(junit, "--junit"),
                   check_output_path(report, "--report"))


def _registry(settings: RunSettings, given=None):
    from benchsuite.registry import Registry

    if given is not None:
        return given
    return Registry.load(case_dirs=[Path(p) for p in settings.cases],
                         case_files=[Path(p) for p in settings.case_file])


def _plan(req: RunRequest, store):
    """(plan, resumed run record or None, registry); a fresh run is planned before the store is opened
    (``store`` None), so bad input leaves no database behind."""
    if store is None:
        registry = _registry(req.settings, req.registry)
        plan = plan_run(registry, req.suite, req.cases, list(req.methods), list(req.option_items),
                        req.settings, req.seed, req.workers)
        return plan, None, registry
    resumed = store.resume_run(store.resolve_run_id(req.resume, any_status=True))
    args = stored_plan_arguments(resumed)
    registry = _registry(args["settings"])
    return plan_run(registry, workers=req.workers, **args), resumed, registry


def start_run(req: RunRequest, progress_factory=None):
    """Plan (or restore), execute, decide; returns ``(GateDecision, stored RunRecord, final rows)``.

    Raises :class:`~benchsuite.gate.execute.RunInterrupted` on SIGTERM/SIGINT (the run is stored as
    ``interrupted``) and :class:`InputError` for bad input before any work."""
    from benchsuite.chem.cache import default_cache_dir
    from benchsuite.store.db import ResultStore

    if req.max_increase_mha is not None and req.max_increase_mha < 0:
        raise InputError("must not be negative", field="--max-increase-mha")
    plan, resumed, registry = (None, None, None) if req.resume else _plan(req, None)
    with ResultStore.open(req.db, create=True) as store:
        if req.resume:
            plan, resumed, registry = _plan(req, store)
        exclude = resumed.run_id if resumed is not None else None
        baseline_id = store.resolve_run_id(req.baseline, exclude=exclude) if req.baseline else None
        if baseline_id is not None:
            store.results(baseline_id)      # an edited baseline is refused before anything is computed
        ex = Execution(workers=req.workers or os.cpu_count() or 1, scheduler=req.scheduler,
                       cache_dir=str(req.cache_dir or default_cache_dir()), baseline_id=baseline_id,
                       max_increase_mha=req.max_increase_mha, allow_new=req.allow_new)
        return execute_plan(store, plan, ex, req.outputs, resumed, req.command, progress_factory, registry)
