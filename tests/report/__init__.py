"""Synthetic runs for the report and table tests.

Invented numbers, for testing only: energies are made up, but every verdict
is what :func:`benchsuite.scoring.verdict` says of them, so the report's
counts can be checked against the scoring code.
"""

from __future__ import annotations

from benchsuite.scoring import DEFAULT_THRESHOLD_MHA, THRESHOLD_SOURCE, verdict
from benchsuite.store.records import ResultRow, RunRecord, task_key

ENCODING = "jordan-wigner/interleaved"

#: A ladder in the stored shape; energies relative to ``fci``.
LADDER_OFFSETS_HA = {"hf": 0.0206, "mp2": 0.0074, "ccsd": 1e-8, "ccsd(t)": 1e-8, "fci": 0.0}


def make_run(run_id: str = "r20260101-000000-abcd", methods=("alpha", "beta", "gamma"), **kw) -> RunRecord:
    fields = dict(run_id=run_id, started_at="2026-01-01T00:00:00+00:00", command="benchsuite run --suite synthetic",
                  suite="synthetic", methods=list(methods), options={m: {} for m in methods}, encoding=ENCODING,
                  threshold_mha=DEFAULT_THRESHOLD_MHA, threshold_source=THRESHOLD_SOURCE, seed=0,
                  packages={"benchsuite": "0.1.0"}, git={"commit": "0" * 40, "dirty": False},
                  machine={"hostname": "test", "cpu_count": 2}, finished_at="2026-01-01T00:01:00+00:00",
                  status="complete")
    fields.update(kw)
    return RunRecord(**fields)


def make_row(run_id: str, case: str, method: str, error_mha: float | None, *, reference_ha: float = -1.1372759436,
             basis: str = "sto-3g", status: str = "ok", stderr_ha: float | None = None, message: str = "",
             tags=("closed-shell",), scan_parent: str | None = None, scan_length: float | None = None,
             resources: dict | None = None, published: list | None = None, seconds: float = 0.5) -> ResultRow:
    """One judged row whose method lies ``error_mha`` above the reference (None: no energy)."""
    energy = None if error_mha is None else reference_ha + error_mha / 1000.0
    judged = verdict(status, energy, reference_ha, DEFAULT_THRESHOLD_MHA, stderr_ha)
    rungs = {name: {"energy_ha": reference_ha + off, "status": "ok",
                    "error_mha": None if energy is None else 1000.0 * (energy - reference_ha - off)}
             for name, off in LADDER_OFFSETS_HA.items()}
    return ResultRow(run_id=run_id, task_key=task_key(case, basis, ENCODING, method, {}), case=case, basis=basis,
                     encoding=ENCODING, method=method, options={}, status=status, verdict=judged.verdict,
                     energy_ha=energy, stderr_ha=stderr_ha, reference_method="fci", reference_energy_ha=reference_ha,
                     error_mha=judged.error_mha, threshold_mha=DEFAULT_THRESHOLD_MHA, converged=status == "ok",
                     iterations=3, seconds=seconds, message=message or judged.message, n_qubits=4, n_terms=15,
                     one_norm_ha=1.9, qwc_groups=5, resources=resources or {"n_parameters": 3},
                     secondary={"rungs": rungs, "published": published or []}, space="all-electron (2e, 2o)",
                     tags=list(tags), scan_parent=scan_parent, scan_length=scan_length,
                     scf={"method": "rhf", "converged": True, "stable": True, "flags": []})


def synthetic_grid(n_cases: int = 30, methods=("alpha", "beta", "gamma"), scan_points: int = 10,
                   run_id: str = "r20260101-000000-abcd"):
    """(run, rows): ``n_cases`` cases (the first ``scan_points`` of them points of one scan) x methods.

    Errors span passing, failing and (for the last method, stochastic) inconclusive values.
    """
    run = make_run(run_id, methods)
    rows = []
    for i in range(n_cases):
        in_scan = i < scan_points
        case = f"fake-scan@{0.5 + 0.25 * i:g}" if in_scan else f"molecule-{i:02d}"
        tags = ("scan", "stretched") if in_scan else ("closed-shell", "equilibrium" if i % 2 else "cation")
        for k, method in enumerate(methods):
            error = (0.1 + 0.05 * i) * (1 + 10 * k) if k < 2 else 0.3 * (-1) ** i
            rows.append(make_row(run_id, case, method, error, reference_ha=-1.1 + 0.01 * i, tags=tags,
                                 stderr_ha=0.0004 if k == 2 else None,
                                 scan_parent="fake-scan" if in_scan else None,
                                 scan_length=0.5 + 0.25 * i if in_scan else None))
    return run, rows


def store_with(path, run, rows):
    """A results database at ``path`` holding ``run`` and ``rows``."""
    from benchsuite.store.db import ResultStore

    store = ResultStore.open(path)
    store.begin_run(run)
    for r in rows:
        store.add_result(r)
    return store
