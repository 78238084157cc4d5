"""Judgement: a finished task becomes a stored row; the run's rows get their final verdicts.

Two stages, both pure functions of plain data:

* :func:`task_row` -- as each task finishes: its reference, error in mHa and
  per-task verdict (:func:`benchsuite.scoring.verdict`, a family of one);
* :func:`final_rows` -- once every task is stored: the same per-task verdict
  recomputed from the stored numbers, then the run's stochastic fail claims
  controlled over the run (:func:`benchsuite.scoring.stochastic_verdicts`).
  Resumed runs are finalised over all their rows, old and new.
"""

from __future__ import annotations

from dataclasses import replace

from benchsuite.scoring import Judgement, error_mha, review_note, stochastic_verdicts, verdict
from benchsuite.store.records import ResultRow, utc_now


def _secondary(ladder, energy_ha) -> dict:
    """Every other rung and published value, with the method's error against each (mHa)."""
    rungs = {}
    for r in ladder.rungs:
        err = None if r.energy_ha is None or energy_ha is None else error_mha(energy_ha, r.energy_ha)
        rungs[r.method] = {"energy_ha": r.energy_ha, "status": r.status, "error_mha": err}
    published = [{"method": p.method, "basis": p.basis, "energy_ha": p.energy_ha, "source": p.source,
                  "from_memory": p.from_memory,
                  "error_mha": None if energy_ha is None else error_mha(energy_ha, p.energy_ha)}
                 for p in ladder.published]
    return {"rungs": rungs, "published": published, "reference": _reference_record(ladder, energy_ha)}


def _reference_record(ladder, energy_ha) -> dict:
    """The primary reference's rung, uncertainty u (Eh; 0 for FCI/CASCI), DMRG variational energy
    and a review note (energy below an extrapolated reference by more than u)."""
    p = ladder.primary
    if p is None or p.status != "ok":
        return {}
    u = getattr(p, "uncertainty_ha", None)
    return {"method": p.method, "uncertainty_ha": u or 0.0, "variational_ha": getattr(p, "variational_ha", None),
            "review": review_note(energy_ha, p.energy_ha, u)}


def reference_uncertainty(row) -> float | None:
    """u of a stored row's primary reference (Eh), from its ``secondary`` record."""
    ref = (row.secondary or {}).get("reference") or {}
    return ref.get("uncertainty_ha") or None


def _scf_record(ladder) -> dict:
    if ladder is None:
        return {}
    return {"method": ladder.scf.method, "converged": ladder.scf.converged, "stable": ladder.scf.stable,
            "flags": list(ladder.scf.flags)}


def judge_fields(fields: dict, reference_ha: float | None, threshold_mha: float, settings,
                 uncertainty_ha: float | None = None) -> Judgement:
    """The per-task verdict of a finished task's ``fields`` (status, energy_ha, stderr_ha, converged)
    against the primary reference energy (Eh) and a threshold (mHa), judged with ``settings``
    (confidence, require_converged).  Shared by the gate and :func:`benchsuite.api.judge`."""
    return verdict(fields.get("status", "error"), fields.get("energy_ha"), reference_ha, threshold_mha,
                   fields.get("stderr_ha"), settings.confidence, fields.get("converged"), settings.require_converged,
                   uncertainty_ha)


def _decided(fields: dict, primary, method_obj) -> dict:
    """A completed result's status against the declared-spin reference and the (N, S_z) sector's
    lowest state (:func:`benchsuite.runner.judged_fields`, the same decision as ``execute``)."""
    from benchsuite.runner import judged_fields

    if primary is not None and getattr(primary, "uncertainty_ha", None) is not None:
        primary = None   # a DMRG reference is not exact: no below-exact / wrong-state from energies
    reference = None if primary is None else primary.energy_ha
    sector = None if primary is None else getattr(primary, "sector_lowest_ha", None)
    return judged_fields(fields, reference, sector, bool(getattr(method_obj, "variational", False)))


def task_row(run_id: str, task, fields: dict, ladder, plan) -> ResultRow:
    """A finished task (the worker's checked ``fields``) as a stored row with its status decided
    (``ok``, ``below-exact`` or ``wrong-state``) and its per-task verdict."""
    primary = None if ladder is None else ladder.primary
    ref_ok = primary is not None and primary.status == "ok"
    threshold = plan.threshold_for(task.case)
    fields = _decided(fields, primary if ref_ok else None, plan.methods.get(task.method, (None, None))[0])
    status = fields.get("status", "error")
    energy = fields.get("energy_ha")
    u = getattr(primary, "uncertainty_ha", None) if ref_ok else None
    judgement = judge_fields(fields, primary.energy_ha if ref_ok else None, threshold, plan.settings, u)
    problem = fields.get("problem", {})
    review = review_note(energy, primary.energy_ha, u) if ref_ok else ""
    return ResultRow(
        run_id=run_id, task_key=task.key, case=task.case.name, basis=task.basis.label,
        encoding=task.encoding.label, method=task.method, options=dict(task.options),
        status=status, verdict=judgement.verdict, energy_ha=energy, stderr_ha=fields.get("stderr_ha"),
        reference_method=primary.method if ref_ok else None,
        reference_energy_ha=primary.energy_ha if ref_ok else None,
        error_mha=judgement.error_mha, threshold_mha=threshold, converged=fields.get("converged"),
        iterations=fields.get("iterations"), seconds=float(fields.get("seconds", 0.0)),
        message="; ".join(m for m in (fields.get("message", "") or judgement.message, review) if m),
        n_qubits=problem.get("n_qubits"), n_terms=problem.get("n_terms"),
        one_norm_ha=problem.get("one_norm_ha"), qwc_groups=problem.get("qwc_groups"),
        resources=fields.get("resources", {}), metadata=fields.get("metadata", {}),
        parameters=fields.get("parameters"),
        secondary={} if ladder is None else _secondary(ladder, energy),
        space="" if ladder is None else ladder.space.label, tags=list(task.case.tags),
        scan_parent=task.case.scan_parent, scan_length=task.case.scan_length, scf=_scf_record(ladder),
        finished_at=utc_now())


def final_rows(rows: list[ResultRow], settings) -> list[ResultRow]:
    """The run's rows with final verdicts (stochastic fail claims controlled over the run).

    Only the verdict, and for a changed verdict the message, can differ from the input.
    """
    per_task = [verdict(r.status, r.energy_ha, r.reference_energy_ha, r.threshold_mha, r.stderr_ha,
                        settings.confidence, r.converged, settings.require_converged, reference_uncertainty(r))
                for r in rows]
    final = stochastic_verdicts(per_task, settings.confidence, settings.multiple_testing)
    out = []
    for row, j in zip(rows, final):
        if j.verdict != row.verdict:
            row = replace(row, verdict=j.verdict, message=j.message or row.message)
        out.append(row)
    return out
