"""`benchsuite runs`: stored runs newest first, with ids the other commands accept."""

from __future__ import annotations

import json

import pytest

from benchsuite.gate.decision import decide
from benchsuite.gate.plan import RunSettings
from benchsuite.store import ResultStore
from tests.store import sample_row, sample_run

OLD, MID, NEW = "r20261201-080000-aaaa", "r20261202-080000-bbbb", "r20261203-080000-cccc"


@pytest.fixture
def db(tmp_path):
    """Three runs: a gate run (complete), a pytest run with the solver's commit (complete), one still running."""
    path = tmp_path / "results.sqlite"
    with ResultStore.open(path) as store:
        for run_id, t, summary in ((OLD, "2026-12-01T08:00:00+00:00", {}),
                                   (MID, "2026-12-02T08:00:00+00:00",
                                    {"source": "pytest", "solver": {"commit": "cd" * 20, "dirty": False}}),
                                   (NEW, "2026-12-03T08:00:00+00:00", {})):
            store.begin_run(sample_run(run_id, t, "smoke" if run_id != MID else None, summary=summary))
            rows = [sample_row(run_id, i) for i in range(5 if run_id != NEW else 2)]
            for row in rows:
                store.add_result(row)
            if run_id != NEW:
                decision = decide(run_id, rows, RunSettings())
                store.finish_run(run_id, "complete", {**summary, "gate": decision.to_dict()})
    return path


def test_table_newest_first_with_counts_and_commits(run_cli, db):
    code, out, _ = run_cli("runs", "--db", str(db))
    assert code == 0
    lines = [ln for ln in out.splitlines() if ln.startswith("r2026")]
    assert [ln.split()[0] for ln in lines] == [NEW, MID, OLD]
    assert "running" in lines[0]
    assert "pytest" in lines[1] and "cdcdcdcdcd" in lines[1] and "failed" in lines[1]
    assert "pass 1, fail 1, inconclusive 1, error 1, timeout 1" in lines[2] and "ababababab+" in lines[2]


def test_json_and_limit(run_cli, db):
    code, out, _ = run_cli("runs", "--db", str(db), "--format", "json", "--limit", "2")
    docs = json.loads(out)
    assert code == 0 and [d["run_id"] for d in docs] == [NEW, MID]
    assert docs[1]["source"] == "pytest" and docs[1]["n_tasks"] == 5 and docs[1]["passed"] is False
    assert docs[0]["status"] == "running" and docs[0]["passed"] is None and docs[0]["counts"] == {}


def test_listed_ids_work_as_prefixes_and_latest(run_cli, db, tmp_path):
    code, out, _ = run_cli("export", MID[:12], "--db", str(db), "--format", "json")
    assert code == 0 and json.loads(out)["run"]["run_id"] == MID
    code, out, _ = run_cli("compare", OLD[:12], "latest", "--db", str(db))   # latest complete run: MID
    assert out.startswith(f"baseline {OLD}: 5 common task(s)") and code == 0
    code, _, err = run_cli("runs", "--db", str(tmp_path / "none.sqlite"))
    assert code == 2 and "no results database" in err
