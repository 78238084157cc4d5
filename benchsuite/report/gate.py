"""Machine-readable gate outputs: the run's JSON document and JUnit XML.

Both are built from plain records (RunRecord, ResultRow) and the run's gate
decision as a plain dict (``benchsuite.gate.decision.GateDecision.to_dict``),
never from live chemistry objects, so they always agree with the exit code.

JUnit: one ``<testsuite>`` per method, one ``<testcase>`` per task (name
:func:`benchsuite.report.naming.task_label`, ``h2 / STO-3G / jordan-wigner · exact-sector``, with the
encoding's ordering and reductions when the method ran under several); failing verdicts (:func:`benchsuite.scoring.is_failing`)
become ``<failure>``, error/timeout ``<error>``, an allowed inconclusive
``<skipped>``; the message carries both energies and the error in mHa.  A
``baseline`` suite holds one failing testcase per regression and per
comparison problem, and a ``gate`` suite one testcase that fails exactly when
the gate failed, with its reasons.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from dataclasses import asdict

from benchsuite.report.naming import task_label
from benchsuite.scoring import FAILING, converged_but_failing, is_failing

__all__ = ["FAILING", "is_failing", "task_document", "run_document", "failure_message", "junit_xml"]


def task_document(row) -> dict:
    """The ``solve --format json`` fields plus verdict and threshold; ``state_check`` holds <N>,
    <S_z>, <S^2> of the returned state (:mod:`benchsuite.methods.statecheck`)."""
    return {"case": row.case, "basis": row.basis, "space": row.space, "encoding": row.encoding,
            "n_qubits": row.n_qubits, "method": row.method, "options": row.options,
            "energy_ha": row.energy_ha, "stderr_ha": row.stderr_ha,
            "reference": {"method": row.reference_method, "energy_ha": row.reference_energy_ha,
                          "uncertainty_ha": _reference(row).get("uncertainty_ha"),
                          "review": _reference(row).get("review", "")},
            "error_mha": row.error_mha, "status": row.status, "verdict": row.verdict,
            "threshold_mha": row.threshold_mha, "converged": row.converged,
            "converged_but_failing": converged_but_failing(row), "iterations": row.iterations,
            "seconds": row.seconds, "resources": row.resources, "message": row.message,
            "secondary": row.secondary, "scf": row.scf, "tags": row.tags, "task_key": row.task_key,
            "state_check": (row.metadata or {}).get("state_check")}


def run_document(run, rows: list, gate: dict) -> dict:
    """``{"run", "gate", "counts", "results"}``; ``gate`` is the run's decision."""
    return {"run": asdict(run), "gate": gate, "counts": dict(gate["counts"]),
            "results": [task_document(r) for r in rows]}


def _reference(row) -> dict:
    """The stored primary-reference record (rung, uncertainty u in Eh, review note), or {}."""
    return (row.secondary or {}).get("reference") or {}


def _u_text(row) -> str:
    u = _reference(row).get("uncertainty_ha")
    return f" (u = {1000 * u:.4f} mHa)" if u else ""


def _fmt(x, spec):
    return "n/a" if x is None else format(x, spec)


def failure_message(row) -> str:
    return (f"{row.verdict}: E({row.method}) = {_fmt(row.energy_ha, '.10f')} Eh, "
            f"E({row.reference_method or 'reference'}) = {_fmt(row.reference_energy_ha, '.10f')} Eh{_u_text(row)}, "
            f"error = {_fmt(row.error_mha, '+.4f')} mHa (threshold {row.threshold_mha:.4f} mHa)"
            + (f", sigma = {1000 * row.stderr_ha:.4f} mHa" if row.stderr_ha else "")
            + ("; converged but failing: the method stopped on its own criterion"
               if converged_but_failing(row) else ""))


def junit_xml(run, rows: list, gate: dict) -> bytes:
    """JUnit XML of a run and its gate decision ``gate`` (a dict)."""
    allow = bool(gate.get("allow_inconclusive"))
    root = ET.Element("testsuites", name=f"benchsuite run {run.run_id}")
    by_method: dict[str, list] = {}
    for r in rows:
        by_method.setdefault(r.method, []).append(r)
    for method, items in by_method.items():
        suite = ET.SubElement(root, "testsuite", name=method, tests=str(len(items)))
        tally = {"failures": 0, "errors": 0, "skipped": 0}
        several = len({r.encoding for r in items}) > 1
        for r in items:
            name = task_label(r.case, r.basis, r.encoding, method, full_encoding=several)
            case = ET.SubElement(suite, "testcase", name=name, classname=method,
                                 time=f"{r.seconds:.3f}")
            _task_outcome(case, r, allow, tally)
        for key, n in tally.items():
            suite.set(key, str(n))
    if gate.get("baseline") is not None:
        _baseline_suite(root, gate["baseline"])
    _gate_suite(root, gate)
    return ET.tostring(root, encoding="utf-8", xml_declaration=True)


def _task_outcome(case, r, allow: bool, tally: dict) -> None:
    msg = failure_message(r)
    if r.verdict in ("error", "timeout"):
        tally["errors"] += 1
        ET.SubElement(case, "error", message=msg, type=r.verdict).text = r.message
    elif r.verdict == "inconclusive" and allow:
        tally["skipped"] += 1
        ET.SubElement(case, "skipped", message=msg)
    elif is_failing(r.verdict):
        tally["failures"] += 1
        ET.SubElement(case, "failure", message=msg, type=r.verdict).text = r.message
    else:
        ET.SubElement(case, "system-out").text = msg + ("" if r.converged is not False else " (not converged)")


def _baseline_suite(root, baseline: dict) -> None:
    suite = ET.SubElement(root, "testsuite", name=f"baseline {baseline['base_id']}")
    n = 0
    for c in baseline["changes"]:
        label = task_label(c["case"], c["basis"], c["encoding"], c["method"], full_encoding=True)
        case = ET.SubElement(suite, "testcase", name=label, classname="baseline")
        config = "; ".join(c["config"])
        text = f"{c['kind']}: {c['before']} -> {c['after']} {c['detail']}" + (
            f"; changed configuration: {config}" if config else "")
        if c["kind"] in ("pass->not-pass", "error-grew", "new-error"):
            n += 1
            ET.SubElement(case, "failure", message=text, type="regression")
        else:
            ET.SubElement(case, "system-out").text = text
    for problem in baseline["problems"]:
        if "regression" in problem:
            continue
        n += 1
        case = ET.SubElement(suite, "testcase", name=problem, classname="baseline")
        ET.SubElement(case, "failure", message=problem, type="comparison")
    suite.set("tests", str(len(suite)))
    suite.set("failures", str(n))


def _gate_suite(root, gate: dict) -> None:
    suite = ET.SubElement(root, "testsuite", name="gate", tests="1",
                          failures="0" if gate["passed"] else "1")
    case = ET.SubElement(suite, "testcase", name="gate decision", classname="gate")
    if gate["passed"]:
        ET.SubElement(case, "system-out").text = f"passed: {gate['n_tasks']} task(s)"
    else:
        ET.SubElement(case, "failure", message="; ".join(gate["reasons"]), type="gate")
