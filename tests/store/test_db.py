"""The results database: round trips, schema, migrations, run ids; and provenance."""

from __future__ import annotations

import dataclasses
import hashlib
import json
import re
import sqlite3
import subprocess
import sys
from datetime import datetime, timezone

import numpy as np
import pytest

from benchsuite.errors import InputError
from benchsuite.store import SCHEMA_VERSION, ResultRow, ResultStore, RunRecord, default_db_path, task_key
from benchsuite.store import provenance
from benchsuite.store.chain import TamperedRunError
from benchsuite.store.db import RESULT_CHAIN, RUN_CHAIN
from benchsuite.store.records import RESULT_COLUMNS, RUN_COLUMNS, to_db_values
from tests.store import sample_key, sample_row, sample_run

RUN = "r20261201-223015-3f9a"


@pytest.fixture
def store(tmp_path):
    with ResultStore.open(tmp_path / "db" / "results.sqlite") as s:
        s.begin_run(sample_run(RUN))
        yield s


def raw(store: ResultStore, sql: str, *args):
    """Read through a separate connection, not the store's own code."""
    with sqlite3.connect(store.path) as conn:
        return conn.execute(sql, args).fetchall()


# -- round trips ---------------------------------------------------------------------

def test_run_round_trip(store):
    assert store.get_run(RUN) == sample_run(RUN)
    assert [r.run_id for r in store.list_runs()] == [RUN]
    (git, options, seed, status), = raw(store, "SELECT git, options, seed, status FROM runs")
    assert json.loads(git) == {"commit": "ab" * 20, "dirty": True}
    assert json.loads(options) == {"uccsd-vqe": {"optimizer": "bfgs", "tol": 1e-8}}
    assert (seed, status) == (7, "running")


def test_result_rows_agree_with_what_was_written(store):
    rows = [sample_row(RUN, i) for i in range(12)]
    for row in rows:
        store.add_result(row)
    assert store.results(RUN) == sorted(rows, key=lambda r: r.task_key)
    stored = dict(raw(store, 'SELECT task_key, energy_ha FROM results'))
    assert stored == {r.task_key: r.energy_ha for r in rows}
    types = raw(store, "SELECT DISTINCT typeof(energy_ha), typeof(converged), typeof(seconds) FROM results "
                       "WHERE status = 'ok'")
    assert types == [("real", "integer", "real")]


def test_columns_cover_the_dataclasses_and_the_migrated_tables(store):
    for cls, columns, table, chain in ((RunRecord, RUN_COLUMNS, "runs", RUN_CHAIN),
                                       (ResultRow, RESULT_COLUMNS, "results", RESULT_CHAIN)):
        assert [f.name for f in dataclasses.fields(cls)] == [c.name for c in columns]
        info = raw(store, f"PRAGMA table_info({table})")
        assert [(name, bool(notnull) or bool(pk)) for _, name, _, notnull, _, pk in info] == \
               [(c.name, c.required) for c in columns] + [(name, False) for name in chain]


def test_non_finite_floats_become_null_and_numpy_values_plain(store):
    row = dataclasses.replace(sample_row(RUN, 0), energy_ha=float("nan"), one_norm_ha=np.float64(3.5),
                              n_terms=np.int64(27), converged=np.bool_(True),
                              metadata={"a": float("inf"), "b": np.arange(3), "c": (1, float("nan"))})
    store.add_result(row)
    back, = store.results(RUN)
    assert back.energy_ha is None and back.one_norm_ha == 3.5 and back.n_terms == 27 and back.converged is True
    assert back.metadata == {"a": None, "b": [0, 1, 2], "c": [1, None]}
    assert raw(store, "SELECT metadata FROM results") == [('{"a":null,"b":[0,1,2],"c":[1,null]}',)]


def test_unserialisable_metadata_is_stored_as_invalid(store):
    store.add_result(dataclasses.replace(sample_row(RUN, 0), metadata={"x": object()}))
    back, = store.results(RUN)
    assert (back.status, back.verdict, back.metadata) == ("invalid", "invalid", {})
    assert back.message.startswith("stored as invalid") and "metadata: TypeError" in back.message


def test_same_task_again_replaces_the_row(store):
    store.add_result(sample_row(RUN, 1))
    store.add_result(dataclasses.replace(sample_row(RUN, 1), message="second try"))
    assert [r.message for r in store.results(RUN)] == ["second try"]


@pytest.mark.parametrize("change, match", [({"status": "crashed"}, "result status"),
                                           ({"verdict": "maybe"}, "verdict"),
                                           ({"space": None}, "NOT NULL"),
                                           ({"run_id": "r-nobody"}, "FOREIGN KEY")])
def test_bad_rows_are_refused_and_leave_nothing(store, change, match):
    with pytest.raises(ValueError, match=match):
        store.add_result(dataclasses.replace(sample_row(RUN, 0), **change))
    assert raw(store, "SELECT count(*) FROM results") == [(0,)]
    store.add_result(sample_row(RUN, 0))          # the store is still usable
    assert len(store.results(RUN)) == 1


def test_begin_run_twice_is_refused(store):
    with pytest.raises(ValueError, match="already exists"):
        store.begin_run(sample_run(RUN))


def test_finish_and_resume(store):
    store.finish_run(RUN, "interrupted", {"pass": 3, "fail": 1})
    run = store.get_run(RUN)
    assert (run.status, run.summary) == ("interrupted", {"pass": 3, "fail": 1})
    assert datetime.fromisoformat(run.finished_at).tzinfo is not None
    resumed = store.resume_run(RUN)
    assert (resumed.status, resumed.finished_at) == ("running", None)
    with pytest.raises(ValueError, match="run status"):
        store.finish_run(RUN, "done")


def test_missing_tasks_keeps_order_once_each_and_ignores_other_runs(store):
    store.begin_run(sample_run("r-other"))
    for i in (1, 3):
        store.add_result(sample_row(RUN, i))
    store.add_result(sample_row("r-other", 2))
    wanted = [sample_key(i) for i in (4, 3, 2, 1, 0, 2)]
    assert store.missing_tasks(RUN, wanted) == [sample_key(i) for i in (4, 2, 0)]
    assert store.stored_task_keys(RUN) == {sample_key(1), sample_key(3)}


# -- run ids ---------------------------------------------------------------------------

@pytest.fixture
def runs(store):
    """Four runs: two complete in suite smoke, one running (newest), one complete in suite full."""
    for run_id, t, suite in (("r20261202-080000-aaaa", "2026-12-02T08:00:00+00:00", "smoke"),
                             ("r20261202-090000-bbbb", "2026-12-02T09:00:00+00:00", "full"),
                             ("r20261203-090000-cccc", "2026-12-03T09:00:00+00:00", "smoke")):
        store.begin_run(sample_run(run_id, t, suite))
    for run_id in (RUN, "r20261202-080000-aaaa", "r20261202-090000-bbbb"):
        store.finish_run(run_id)
    return store


def test_resolve_full_id_prefix_and_latest(runs):
    assert runs.resolve_run_id(RUN) == RUN
    assert runs.resolve_run_id("r20261202-08") == "r20261202-080000-aaaa"
    assert runs.resolve_run_id("latest") == "r20261202-090000-bbbb"
    assert runs.resolve_run_id("latest", exclude="r20261202-090000-bbbb") == "r20261202-080000-aaaa"
    assert runs.resolve_run_id("latest", suite="smoke") == "r20261202-080000-aaaa"
    assert runs.resolve_run_id("latest", any_status=True) == "r20261203-090000-cccc"
    assert [r.run_id for r in runs.list_runs()][-1] == "r20261203-090000-cccc"


def test_ambiguous_and_unknown_ids_are_input_errors_naming_the_db(runs):
    with pytest.raises(InputError, match="matches 2 runs"):
        runs.resolve_run_id("r20261202")
    for call in (lambda: runs.resolve_run_id("r1999"), lambda: runs.get_run("r1999"),
                 lambda: runs.results("r1999"), lambda: runs.finish_run("r1999")):
        with pytest.raises(InputError) as err:
            call()
        assert str(runs.path) in str(err.value) and "'r1999'" in str(err.value)
    with pytest.raises(InputError, match="no complete run of suite 'nothing'"):
        runs.resolve_run_id("latest", suite="nothing")
    with pytest.raises(InputError, match="no run of suite 'nothing'"):
        runs.resolve_run_id("latest", suite="nothing", any_status=True)


def test_task_key_is_canonical():
    blob = '["h2","sto-3g","jordan-wigner","uccsd-vqe",{"layers":2,"tol":1e-08}]'
    expected = "h2/sto-3g/jordan-wigner/uccsd-vqe#" + hashlib.sha256(blob.encode()).hexdigest()[:12]
    assert task_key("h2", "sto-3g", "jordan-wigner", "uccsd-vqe", {"tol": 1e-8, "layers": 2}) == expected
    assert task_key("h2", "sto-3g", "jordan-wigner", "uccsd-vqe", {"layers": 2, "tol": 1e-8}) == expected
    assert task_key("h2", "sto-3g", "jordan-wigner", "uccsd-vqe", {"layers": 3, "tol": 1e-8}) != expected


# -- files, schema versions, migrations --------------------------------------------------

def test_open_makes_folders_and_uses_wal(tmp_path):
    path = tmp_path / "a" / "b" / "results.sqlite"
    with ResultStore.open(path) as s:
        assert s.schema_version == SCHEMA_VERSION
    with sqlite3.connect(path) as conn:
        assert conn.execute("PRAGMA journal_mode").fetchone() == ("wal",)
        assert [v for v, in conn.execute("SELECT version FROM schema_version")] == list(range(1, SCHEMA_VERSION + 1))


def test_missing_or_foreign_file_is_an_input_error(tmp_path):
    with pytest.raises(InputError, match="no results database"):
        ResultStore.open(tmp_path / "absent.sqlite", create=False)
    junk = tmp_path / "junk.sqlite"
    junk.write_text("this is not sqlite" * 100)
    with pytest.raises(InputError, match="not a usable results database"):
        ResultStore.open(junk)


def test_v1_database_is_migrated_with_its_data(tmp_path):
    path = tmp_path / "old.sqlite"
    with ResultStore.open(path, upto=1) as old:
        assert old.schema_version == 1
    v1 = [c for c in RESULT_COLUMNS if c.name != "captured_output"]
    with sqlite3.connect(path) as conn:         # rows as benchsuite 0.1 wrote them
        conn.execute(f"INSERT INTO runs ({', '.join(c.sql for c in RUN_COLUMNS)}) VALUES "
                     f"({', '.join('?' * len(RUN_COLUMNS))})", to_db_values(sample_run(RUN), RUN_COLUMNS))
        for i in (5, 2):
            conn.execute(f"INSERT INTO results ({', '.join(c.sql for c in v1)}) VALUES ({', '.join('?' * len(v1))})",
                         to_db_values(sample_row(RUN, i), v1))
    indexes = "SELECT name FROM sqlite_master WHERE type = 'index' AND name NOT LIKE 'sqlite_%' ORDER BY name"
    with sqlite3.connect(path) as conn:
        assert conn.execute(indexes).fetchall() == []
    with ResultStore.open(path) as new:
        assert new.schema_version == SCHEMA_VERSION == 4
        assert new.references(RUN) == []                # stored before the references table
        assert new.results(RUN) == sorted([sample_row(RUN, 5), sample_row(RUN, 2)], key=lambda r: r.task_key)
        assert new.get_run(RUN) == sample_run(RUN)
    with sqlite3.connect(path) as conn:
        assert conn.execute(indexes).fetchall() == [("results_by_seq",), ("results_by_task",), ("runs_by_status",)]
        # sealed in the order the rows finished, and an edit after the migration is caught
        assert conn.execute("SELECT task_key FROM results ORDER BY seq").fetchall() == \
               [(sample_key(2),), (sample_key(5),)]
        conn.execute("UPDATE results SET verdict = 'pass' WHERE task_key = ?", (sample_key(2),))
    with ResultStore.open(path) as new, pytest.raises(TamperedRunError, match=re.escape(sample_key(2))):
        new.results(RUN)


def test_newer_schema_is_refused(tmp_path):
    path = tmp_path / "new.sqlite"
    ResultStore.open(path).close()
    with sqlite3.connect(path) as conn:
        conn.execute("INSERT INTO schema_version VALUES (99, 'later', 'from the future')")
    with pytest.raises(InputError, match="schema version 99"):
        ResultStore.open(path)


def test_default_db_path(monkeypatch, tmp_path):
    monkeypatch.delenv("BENCHSUITE_DB", raising=False)
    assert default_db_path().as_posix() == ".benchsuite/results.sqlite"
    monkeypatch.setenv("BENCHSUITE_DB", str(tmp_path / "x.sqlite"))
    assert default_db_path() == tmp_path / "x.sqlite"


# -- provenance -------------------------------------------------------------------------

def git(repo, *args):
    return subprocess.run(["git", "-C", str(repo), "-c", "user.name=t", "-c", "user.email=t@t", *args],
                          check=True, capture_output=True, text=True).stdout.strip()


@pytest.fixture
def repo(tmp_path):
    """A git checkout with one commit: fakepkg/ (a module) and .gitignore."""
    root = tmp_path / "checkout"
    (root / "fakepkg").mkdir(parents=True)
    (root / "fakepkg" / "__init__.py").write_text("class Solver:\n    name = 'fake'\n")
    (root / ".gitignore").write_text("*.log\n")
    git(root, "init", "-q")
    git(root, "add", ".")
    git(root, "commit", "-q", "-m", "one")
    return root


def test_git_state_clean_dirty_and_outside(repo, tmp_path, monkeypatch):
    head = git(repo, "rev-parse", "HEAD")
    (repo / "ignored.log").write_text("x")
    assert provenance.git_state(repo / "fakepkg") == {"commit": head, "dirty": False}
    (repo / "new.py").write_text("x = 1\n")
    assert provenance.git_state(repo / "fakepkg" / "__init__.py") == {"commit": head, "dirty": True}
    outside = tmp_path / "plain"
    outside.mkdir()
    assert provenance.git_state(outside) == {"commit": None, "dirty": None}
    monkeypatch.setenv("PATH", str(outside))          # no git at all
    assert provenance.git_state(repo) == {"commit": None, "dirty": None}


def fake_distribution(site, repo, entry_point: bool):
    """An installed-looking ``fake-solver`` whose direct_url.json points at ``repo``."""
    info = site / "fake_solver-1.2.dist-info"
    info.mkdir(parents=True)
    (info / "METADATA").write_text("Metadata-Version: 2.1\nName: fake-solver\nVersion: 1.2\n")
    (info / "direct_url.json").write_text(json.dumps({"url": repo.as_uri(), "dir_info": {"editable": True}}))
    if entry_point:
        (info / "entry_points.txt").write_text("[benchsuite.methods]\nfake = fakepkg:Solver\n")


def test_distribution_and_plugin_git_state(repo, tmp_path, monkeypatch):
    import importlib

    fake_distribution(tmp_path / "site", repo, entry_point=True)
    monkeypatch.syspath_prepend(str(tmp_path / "site"))
    importlib.invalidate_caches()
    head = git(repo, "rev-parse", "HEAD")
    state = provenance.distribution_git_state("fake-solver")
    assert state == {"package": "fake-solver", "version": "1.2", "source": str(repo), "commit": head,
                     "dirty": False}
    assert provenance.plugin_provenance(["hf", "fake"], builtin_names=("hf",)) == {"fake": state}
    assert provenance.distribution_git_state("no-such-dist-anywhere")["version"] is None


def test_module_plugin_outside_site_packages_gets_its_checkout(repo, monkeypatch):
    monkeypatch.syspath_prepend(str(repo))
    got = provenance.plugin_provenance(["fakepkg:Solver"])["fakepkg:Solver"]
    assert (got["commit"], got["dirty"], got["source"]) == (git(repo, "rev-parse", "HEAD"), False,
                                                          str((repo / "fakepkg").resolve()))


def test_methods_group_matches_discovery():
    from benchsuite.methods.discovery import ENTRY_POINT_GROUP

    assert provenance.METHODS_GROUP == ENTRY_POINT_GROUP


def test_package_versions_machine_and_run_id():
    import benchsuite

    versions = provenance.package_versions(extra=("no-such-dist-anywhere",))
    assert versions["benchsuite"] == benchsuite.__version__ and versions["no-such-dist-anywhere"] is None
    assert versions["numpy"] == np.__version__ and re.fullmatch(r"3\.\d+\.\d+", versions["python"])
    machine = provenance.machine_info()
    assert machine["cpu_count"] >= machine["cpu_usable"] >= 1 and machine["hostname"]
    assert machine["memory_bytes"] is None or machine["memory_bytes"] > 2**20
    run_id = provenance.new_run_id(datetime(2026, 12, 1, 22, 30, 15, tzinfo=timezone.utc))
    assert re.fullmatch(r"r20261201-223015-[0-9a-f]{4}", run_id)


def test_store_imports_no_chemistry_packages():
    code = ("import sys, benchsuite.store, benchsuite.store.export, benchsuite.store.provenance as p; "
            "p.package_versions(); p.machine_info(); "
            "print(sorted(m for m in ('pyscf', 'openfermion', 'pandas') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
