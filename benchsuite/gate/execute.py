"""Execution of a planned run: the grid, the store, the final judgement, the outputs.

:func:`execute_plan` is the run from start to end: it records the run, runs
the grid (:func:`benchsuite.runner.run_grid`), stores each row as it finishes,
finalises the verdicts over the whole run, compares with a baseline, decides
once (:func:`benchsuite.gate.decision.decide`), stores the decision in the run
record and writes every requested output from it.

A SIGTERM or SIGINT during the grid stops the workers (the runner kills their
process groups), marks the run ``interrupted`` -- resumable with ``--resume`` --
and raises :class:`RunInterrupted` for the command line to turn into exit code
128 + signal.
"""

from __future__ import annotations

import json
import os
import signal
import tempfile
from dataclasses import dataclass
from pathlib import Path

from benchsuite.gate.decision import GateDecision, decide
from benchsuite.gate.judge import final_rows, task_row
from benchsuite.gate.plan import RunPlan


class RunInterrupted(Exception):
    """The run was stopped by a signal; the stored run is marked ``interrupted``."""

    def __init__(self, run_id: str, signum: int):
        self.run_id, self.signum = run_id, signum
        super().__init__(f"run {run_id} interrupted by {signal.Signals(signum).name}; "
                         f"finish it with: benchsuite run --resume {run_id}")

    @property
    def exit_code(self) -> int:
        return 128 + self.signum


@dataclass(frozen=True)
class Outputs:
    """Files a run writes at the end (paths already checked writable by the plan)."""

    json: Path | None = None
    junit: Path | None = None
    report: Path | None = None


@dataclass(frozen=True)
class Execution:
    """How the grid runs (not part of what the run *is*)."""

    workers: int = 1
    scheduler: str | None = None
    cache_dir: str | None = None
    baseline_id: str | None = None
    max_increase_mha: float | None = None
    allow_new: bool = False


def new_run_record(plan: RunPlan, run_id: str, command: str):
    from benchsuite.methods.discovery import builtin_names
    from benchsuite.store.provenance import git_state, machine_info, package_versions, plugin_provenance
    from benchsuite.store.records import RunRecord, utc_now

    s = plan.settings
    threshold_mha, threshold_source = s.run_threshold()
    return RunRecord(
        run_id=run_id, started_at=utc_now(), command=command, suite=plan.suite_name, cases=plan.case_names,
        methods=list(plan.methods), options={m: dict(o) for m, o in plan.options.items()},
        encoding=plan.encoding.label,
        threshold_mha=threshold_mha, threshold_source=threshold_source,
        seed=plan.seed, packages=package_versions(), git=git_state(Path.cwd()),
        plugin_git=plugin_provenance(list(plan.methods), builtin_names=builtin_names()),
        machine=machine_info(), summary={"settings": s.to_dict()})


def run_tasks(store, run_id: str, plan: RunPlan, tasks, ex: Execution, progress=None) -> None:
    """The grid; each finished task is judged and stored at once (crash-consistent)."""
    from benchsuite.runner import DEFAULT_MAX_MEMORY_MB, GridConfig, run_grid
    from benchsuite.runner import RunInterrupted as GridInterrupted

    s = plan.settings
    cfg = GridConfig(workers=ex.workers, scheduler=ex.scheduler, timeout_s=s.timeout_s,
                     reference_timeout_s=s.reference_timeout_s, cache_dir=ex.cache_dir, seed=plan.seed,
                     max_determinants=s.max_determinants,
                     max_memory_mb=s.max_memory_mb if s.max_memory_mb is not None else DEFAULT_MAX_MEMORY_MB,
                     history_s=store.measured_seconds([t.key for t in tasks], exclude_run=run_id))

    stored_ladders: set = set()

    def on_result(task, fields, ladder):
        if ladder is not None and (ladder.case, ladder.basis) not in stored_ladders:
            store.add_reference(run_id, ladder.to_json())     # once per (case, basis); rows point to it
            stored_ladders.add((ladder.case, ladder.basis))
        row = task_row(run_id, task, fields, ladder, plan)
        row.captured_output = fields.get("captured_output") or ""      # the worker's output, for the record
        store.add_result(row)
        if progress is not None:
            progress.row_done(row)

    try:
        run_grid(tasks, plan.methods, cfg, on_result, progress)
    except GridInterrupted as exc:               # the runner has killed and reaped every worker group
        raise RunInterrupted(run_id, exc.signal_number) from None


def execute_plan(store, plan: RunPlan, ex: Execution, outputs: Outputs, resumed=None, command: str = "",
                 progress_factory=None, registry=None) -> tuple[GateDecision, object, list]:
    """Run (or finish) the plan; returns the decision, the stored run record and its final rows."""
    from benchsuite.store.provenance import new_run_id

    if resumed is None:
        run = new_run_record(plan, new_run_id(), command)
        store.begin_run(run)
        tasks = plan.tasks
    else:
        run = resumed
        tasks = stored_keys(plan.tasks, run.encoding)
        missing = set(store.missing_tasks(run.run_id, [t.key for t in tasks]))
        tasks = [t for t in tasks if t.key in missing]
    progress = progress_factory(len(tasks)) if progress_factory else None
    try:
        run_tasks(store, run.run_id, plan, tasks, ex, progress)
    except RunInterrupted:
        store.finish_run(run.run_id, "interrupted", {**run.summary})
        raise
    finally:
        if progress is not None:
            progress.close()
    rows = finalise(store, run.run_id, plan)
    decision = conclude(store, run, rows, plan.settings, ex)
    run = store.get_run(run.run_id)
    write_outputs(store, run, rows, decision, outputs, registry)
    return decision, run, rows


def stored_keys(tasks, stored_label: str) -> list:
    """The tasks keyed as the stored run keyed them: a run stored before the spin-parity option's
    rename used the old encoding label (``+2qr``) in its task keys; its resumed rows carry the
    current label but keep the run's keys, so no stored task is run twice."""
    from dataclasses import replace

    from benchsuite.store.records import task_key

    from benchsuite.qubit.encodings import current_label

    if not tasks or stored_label == tasks[0].encoding.label or current_label(stored_label) != tasks[0].encoding.label:
        return list(tasks)
    return [replace(t, key=task_key(t.case.name, t.basis.label, stored_label, t.method, t.options,
                                            None if t.shots is None else t.shots.as_dict()))
            for t in tasks]


def finalise(store, run_id: str, plan: RunPlan) -> list:
    """Final verdicts over every stored row of the run; rows whose verdict changed are stored again."""
    stored = store.results(run_id)
    final = final_rows(stored, plan.settings)
    for before, after in zip(stored, final):
        if after is not before:
            store.add_result(after)
    return final


def conclude(store, run, rows, settings, ex: Execution, extra_reasons: tuple[str, ...] = ()) -> GateDecision:
    """The run's one gate decision from its final ``rows`` and, with ``ex.baseline_id``, the baseline
    comparison; ``extra_reasons`` fail it too.  Stored with the run (status ``complete``)."""
    decision = decide(run.run_id, rows, settings, _comparison(store, ex, run.run_id, rows))
    decision.reasons.extend(extra_reasons)
    store.finish_run(run.run_id, "complete", {**run.summary, "counts": decision.counts,
                                             "tasks": decision.n_tasks, "failing": len(decision.failing),
                                             "gate": decision.to_dict()})
    return decision


def _comparison(store, ex: Execution, run_id: str, rows):
    if ex.baseline_id is None:
        return None
    from benchsuite.store.baseline import DEFAULT_MAX_INCREASE_MHA, compare_runs

    limit = DEFAULT_MAX_INCREASE_MHA if ex.max_increase_mha is None else ex.max_increase_mha
    return compare_runs(store.get_run(ex.baseline_id), store.results(ex.baseline_id), store.get_run(run_id),
                        rows, limit, ex.allow_new)


def write_outputs(store, run, rows, decision: GateDecision, outputs: Outputs, registry=None) -> None:
    from benchsuite.report.gate import junit_xml, run_document

    if outputs.json:
        write_atomic(outputs.json, json.dumps(run_document(run, rows, decision.to_dict()), indent=1,
                                              allow_nan=False).encode())
    if outputs.junit:
        write_atomic(outputs.junit, junit_xml(run, rows, decision.to_dict()))
    if outputs.report:
        from benchsuite.report.command import write_report

        write_report(store, run.run_id, outputs.report, registry)


def write_atomic(path: Path, blob: bytes) -> None:
    """Write ``blob`` to ``path`` through a temporary file in the same directory and a rename."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=path.name + ".", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(blob)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise

