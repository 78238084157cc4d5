"""Store tests: sample runs and rows, deterministic so a child process and the test agree."""

from __future__ import annotations

from datetime import datetime, timedelta, timezone

from benchsuite.store.records import ResultRow, RunRecord, task_key

CASES = ("h2", "lih", "beh2", "h2o")
METHODS = ("hf", "exact", "uccsd-vqe")
T0 = datetime(2026, 12, 1, 22, 30, 15, tzinfo=timezone.utc)
STATUS_VERDICT = (("ok", "pass"), ("ok", "fail"), ("error", "error"), ("ok", "inconclusive"),
                  ("timeout", "timeout"))


def sample_run(run_id: str = "r20261201-223015-3f9a", started_at: str = "2026-12-01T22:30:15+00:00",
               suite: str | None = "smoke", **changes) -> RunRecord:
    """A run with every provenance field filled."""
    fields = dict(
        run_id=run_id, started_at=started_at, command="benchsuite run --suite smoke --seed 7", suite=suite,
        cases=["h2", "lih"], methods=list(METHODS), options={"uccsd-vqe": {"optimizer": "bfgs", "tol": 1e-8}},
        encoding="jordan-wigner", threshold_mha=1.5936, threshold_source="1 kcal/mol", seed=7,
        packages={"benchsuite": "0.1.0", "numpy": "2.4.6", "python": "3.11.7"},
        git={"commit": "ab" * 20, "dirty": True},
        plugin_git={"my-solver": {"package": "my-solver", "version": "1.2", "commit": None, "dirty": None}},
        machine={"hostname": "box", "cpu_count": 2, "memory_bytes": 8 * 2**30})
    fields.update(changes)
    return RunRecord(**fields)


def sample_key(i: int) -> str:
    case, method = CASES[i % len(CASES)], METHODS[(i // len(CASES)) % len(METHODS)]
    return task_key(case, "sto-3g", "jordan-wigner", method, {"layer": i})


def sample_row(run_id: str, i: int, metadata_size: int = 4) -> ResultRow:
    """Task ``i`` of a sample grid; ``metadata_size`` pads the row (bigger writes take longer)."""
    status, verdict = STATUS_VERDICT[i % len(STATUS_VERDICT)]
    ok = status == "ok"
    energy = -1.1372838 - 0.001 * i if ok else None
    return ResultRow(
        run_id=run_id, task_key=sample_key(i), case=CASES[i % len(CASES)], basis="sto-3g",
        encoding="jordan-wigner", method=METHODS[(i // len(CASES)) % len(METHODS)], options={"layer": i},
        status=status, verdict=verdict, energy_ha=energy, stderr_ha=1e-5 if i % 3 == 0 and ok else None,
        reference_method="fci", reference_energy_ha=-1.1372838 - 0.001 * i + 1e-4,
        error_mha=-0.1 if ok else None, threshold_mha=1.5936, converged=(i % 2 == 0) if ok else None,
        iterations=10 + i if ok else None, seconds=0.25 * i, message="" if ok else f"task {i} failed",
        n_qubits=4 + i % 8, n_terms=15 + i, one_norm_ha=2.5 + i / 7, qwc_groups=5,
        resources={"two_qubit_gates": 56 + i, "compilation": "cnot-staircase"},
        metadata={"trace": [0.1 * k for k in range(metadata_size)], "note": "ü"},
        parameters=[0.01 * i, -0.2] if ok else None,
        secondary={"rungs": {"ccsd(t)": {"energy_ha": -1.13, "status": "ok", "error_mha": 0.3 + i}},
                   "published": [{"method": "fci", "energy_ha": -1.137, "source": "ref2020"}]},
        space="full", tags=["closed-shell", f"t{i % 2}"], scan_parent="h2-scan" if i % 4 == 0 else None,
        scan_length=0.7 + 0.05 * i if i % 4 == 0 else None,
        scf={"method": "rhf", "converged": True, "stable": i % 5 != 0, "flags": ["near-degenerate"] * (i % 2)},
        finished_at=(T0 + timedelta(seconds=i)).isoformat(timespec="seconds"))
