"""Rows with values no column can hold, hostile text in number fields, and captured worker output.

Defence in depth: the runner's contract normalises a method's result in the
worker, but whatever reaches the store must never make a run unfinishable
(``OverflowError``/``TypeError`` while storing) or crash ``report``/``table``.
"""

from __future__ import annotations

import dataclasses
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from benchsuite.store import ResultStore
from benchsuite.store.records import MAX_CAPTURED_CHARS
from tests.store import sample_row, sample_run

RUN = "r20261201-223015-badr"
ROOT = Path(__file__).resolve().parents[2]


class Opaque:
    def __repr__(self):
        return "<Opaque object>"


def _deep(n):
    out = []
    for _ in range(n):
        out = [out]
    return out


UNSTORABLE = {
    "iterations 10**20": {"iterations": 10**20},
    "iterations -10**30": {"iterations": -10**30},
    "a set in resources": {"resources": {"two_qubit_gates": {1, 2}}},
    "an object in resources": {"resources": {"circuit_depth": Opaque()}},
    "resources a list": {"resources": [1, 2]},
    "energy as text": {"energy_ha": "-1.137"},
    "text in n_qubits": {"n_qubits": "<script>alert(1)</script>"},
    "a float in n_terms": {"n_terms": 2.5},
    "bytes in seconds": {"seconds": b"1.0"},
    "converged as text": {"converged": "yes"},
    "object in parameters": {"parameters": [Opaque()]},
    "metadata nested 5000 deep": {"metadata": {"x": _deep(5000)}},
    "tags a string": {"tags": "closed-shell"},
}


@pytest.mark.parametrize("change", UNSTORABLE, ids=list(UNSTORABLE))
def test_an_unstorable_value_makes_the_row_invalid_not_the_run_unfinishable(tmp_path, change):
    with ResultStore.open(tmp_path / "r.sqlite") as store:
        store.begin_run(sample_run(RUN))
        store.add_result(dataclasses.replace(sample_row(RUN, 0), **UNSTORABLE[change]))
        store.add_result(sample_row(RUN, 1))                # the run goes on
        store.finish_run(RUN)
        bad, good = sorted(store.results(RUN), key=lambda r: r.task_key != sample_row(RUN, 0).task_key)
    field = next(iter(UNSTORABLE[change]))
    assert (bad.status, bad.verdict) == ("invalid", "invalid")
    assert bad.message.startswith("stored as invalid") and f"{field}: " in bad.message
    assert getattr(bad, field) in (None, {}, [], 0.0) and good == sample_row(RUN, 1)


HOSTILE_RESOURCES = {"two_qubit_gates": "<script>alert('x')</script>", "n_parameters": r"\input{/etc/passwd}",
                     "circuit_depth": 10**19, "shots": 1.5e300}


@pytest.fixture
def hostile_db(tmp_path):
    """A stored run whose resources hold text and huge numbers (valid JSON, so stored as they are)."""
    db = tmp_path / "r.sqlite"
    with ResultStore.open(db) as store:
        store.begin_run(sample_run(RUN))
        for i in range(3):
            row = dataclasses.replace(sample_row(RUN, i), resources=dict(HOSTILE_RESOURCES),
                                      captured_output=f"task {i} says <img src=x onerror=alert(1)>\n" + "x" * 10**6
                                      + "\n<img src=y onerror=alert(2)> the end")
            store.add_result(row)
        store.finish_run(RUN)
    return db


def test_captured_output_is_bounded_and_exported(hostile_db, run_cli):
    with ResultStore.open(hostile_db) as store:
        rows = store.results(RUN)
    assert all(len(r.captured_output) <= MAX_CAPTURED_CHARS and "earlier characters not kept]" in r.captured_output
               and r.captured_output.endswith("the end") for r in rows)
    code, out, err = run_cli("export", RUN, "--format", "json", "--db", str(hostile_db))
    assert code == 0, err
    exported = json.loads(out)["results"]
    assert [r["captured_output"] for r in exported] == [r.captured_output for r in rows]


def test_report_and_tables_survive_hostile_resources(hostile_db, run_cli, tmp_path):
    out = tmp_path / "report.html"
    code, stdout, stderr = run_cli("report", RUN, "--db", str(hostile_db), "--out", str(out))
    assert code == 0, stderr
    html = out.read_text()
    assert "<script>alert" not in html and "&lt;script&gt;alert" in html
    assert "<img src=" not in html and "task 0 says" not in html          # the report shows the end of it
    assert "&lt;img src=y onerror=alert(2)&gt; the end" in html
    assert "earlier characters: see `benchsuite export --format json`" in html and "x" * 3000 in html
    assert len(html) < 200_000
    assert "says" not in stdout and "says" not in stderr                  # never on the command's output
    expected = {"latex": r"\textbackslash{}input\{/etc/passwd\}", "markdown": r"\<script\>",
                "csv": str(10**19)}
    for fmt, escaped in expected.items():
        code, text, stderr = run_cli("table", RUN, "--db", str(hostile_db), "--format", fmt,
                                     "--columns", "case,parameters,two_qubit_gates,depth,shots")
        assert code == 0, stderr
        assert escaped in text and len(text.splitlines()) >= 3
        if fmt == "latex":
            assert r"\input{" not in text and "<script>" not in text
        if fmt == "markdown":                 # CSV holds the raw text, quoted by the csv module
            assert "<script>" not in text


@pytest.mark.slow
def test_a_run_stores_what_the_worker_printed_and_prints_none_of_it(tmp_path):
    db = tmp_path / "results.sqlite"
    env = {**os.environ, "PYTHONPATH": str(ROOT), "BENCHSUITE_CACHE": str(tmp_path / "cache")}
    done = subprocess.run([sys.executable, "-m", "benchsuite.cli", "run", "--case", "h2", "--method",
                           "tests.store.plugins:ChattySolver", "--db", str(db), "--workers", "1"],
                          cwd=tmp_path, env=env, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stdout + done.stderr
    assert "CHATTY" not in done.stdout + done.stderr
    with ResultStore.open(db) as store:
        (row,) = store.results(store.resolve_run_id("latest"))
    assert "CHATTY-STDOUT <b>bold</b> & more" in row.captured_output
    assert "CHATTY-STDERR warning: tolerance" in row.captured_output


def test_values_sqlite_would_change_are_stored_as_read_back(tmp_path):
    """-0.0 (SQLite returns 0.0), lone surrogates and NUL in text: stored, read back, chain intact."""
    with ResultStore.open(tmp_path / "r.sqlite") as store:
        store.begin_run(sample_run(RUN))
        store.add_result(dataclasses.replace(sample_row(RUN, 0), error_mha=-0.0, message="bad \udc80 byte\x00 nul",
                                             captured_output="\ud800 out"))
        (back,) = store.results(RUN)
    assert back.error_mha == 0.0 and back.status == "ok"
    assert back.message == "bad \ufffd byte\x00 nul" and back.captured_output == "\ufffd out"
