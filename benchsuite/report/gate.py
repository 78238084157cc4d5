"""Machine-readable gate outputs: the run's JSON document and JUnit XML.

Both are built from plain records (RunRecord, ResultRow), never from live
chemistry objects.  JUnit: one ``<testsuite>`` per method, one ``<testcase>``
per task (name ``case[basis]``); verdicts fail/below-exact/invalid become
``<failure>``, error/timeout ``<error>``, inconclusive ``<failure>`` unless
allowed (then ``<skipped>``); the message carries both energies and the
error in mHa.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from dataclasses import asdict

FAILING = ("fail", "inconclusive", "error", "timeout", "invalid", "below-exact")


def is_failing(verdict: str, allow_inconclusive: bool = False) -> bool:
    return verdict in FAILING and not (allow_inconclusive and verdict == "inconclusive")


def task_document(row) -> dict:
    """The ``solve --format json`` fields plus verdict and threshold."""
    return {"case": row.case, "basis": row.basis, "space": row.space, "encoding": row.encoding,
            "n_qubits": row.n_qubits, "method": row.method, "options": row.options,
            "energy_ha": row.energy_ha, "stderr_ha": row.stderr_ha,
            "reference": {"method": row.reference_method, "energy_ha": row.reference_energy_ha},
            "error_mha": row.error_mha, "status": row.status, "verdict": row.verdict,
            "threshold_mha": row.threshold_mha, "converged": row.converged, "iterations": row.iterations,
            "seconds": row.seconds, "resources": row.resources, "message": row.message,
            "secondary": row.secondary, "scf": row.scf, "tags": row.tags, "task_key": row.task_key}


def run_document(run, rows: list) -> dict:
    counts: dict[str, int] = {}
    for r in rows:
        counts[r.verdict] = counts.get(r.verdict, 0) + 1
    return {"run": asdict(run), "counts": counts, "results": [task_document(r) for r in rows]}


def _fmt(x, spec):
    return "n/a" if x is None else format(x, spec)


def failure_message(row) -> str:
    return (f"{row.verdict}: E({row.method}) = {_fmt(row.energy_ha, '.10f')} Eh, "
            f"E({row.reference_method or 'reference'}) = {_fmt(row.reference_energy_ha, '.10f')} Eh, "
            f"error = {_fmt(row.error_mha, '+.4f')} mHa (threshold {row.threshold_mha:.4f} mHa)"
            + (f", sigma = {1000 * row.stderr_ha:.4f} mHa" if row.stderr_ha else ""))


def junit_xml(run, rows: list, allow_inconclusive: bool = False) -> bytes:
    root = ET.Element("testsuites", name=f"benchsuite run {run.run_id}")
    by_method: dict[str, list] = {}
    for r in rows:
        by_method.setdefault(r.method, []).append(r)
    for method, items in by_method.items():
        suite = ET.SubElement(root, "testsuite", name=method, tests=str(len(items)))
        n_fail = n_err = n_skip = 0
        for r in items:
            case = ET.SubElement(suite, "testcase", name=f"{r.case}[{r.basis}]", classname=method,
                                 time=f"{r.seconds:.3f}")
            msg = failure_message(r)
            if r.verdict in ("error", "timeout"):
                n_err += 1
                ET.SubElement(case, "error", message=msg, type=r.verdict).text = r.message
            elif r.verdict == "inconclusive" and allow_inconclusive:
                n_skip += 1
                ET.SubElement(case, "skipped", message=msg)
            elif is_failing(r.verdict):
                n_fail += 1
                ET.SubElement(case, "failure", message=msg, type=r.verdict).text = r.message
            else:
                ET.SubElement(case, "system-out").text = msg
        suite.set("failures", str(n_fail))
        suite.set("errors", str(n_err))
        suite.set("skipped", str(n_skip))
    return ET.tostring(root, encoding="utf-8", xml_declaration=True)
