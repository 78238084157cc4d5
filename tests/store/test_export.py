"""Export of a stored run: DataFrame, CSV, Parquet, JSON."""

from __future__ import annotations

import io
import json
import math

import pandas as pd
import pytest

from benchsuite.errors import InputError
from benchsuite.store import ResultRow, ResultStore, export_run, render_export, results_dataframe
from tests.store import sample_row, sample_run

RUN = "r20261201-223015-3f9a"
N = 10


@pytest.fixture
def store(tmp_path):
    with ResultStore.open(tmp_path / "results.sqlite") as s:
        s.begin_run(sample_run(RUN))
        for i in range(N):
            s.add_result(sample_row(RUN, i))
        s.begin_run(sample_run("r-empty"))
        yield s


def rows_by_key():
    return {r.task_key: r for r in (sample_row(RUN, i) for i in range(N))}


def test_dataframe_has_one_flat_row_per_task(store):
    frame = results_dataframe(store, RUN)
    rows = rows_by_key()
    assert sorted(frame["task_key"]) == sorted(rows) and frame["task_key"].is_monotonic_increasing
    for _, got in frame.iterrows():
        want = rows[got["task_key"]]
        assert got["seconds"] == want.seconds and got["threshold_mha"] == want.threshold_mha
        assert (pd.isna(got["energy_ha"]) if want.energy_ha is None else got["energy_ha"] == want.energy_ha)
        assert got["ccsd(t)_error_mha"] == want.secondary["rungs"]["ccsd(t)"]["error_mha"]
        assert got["resources_two_qubit_gates"] == want.resources["two_qubit_gates"]
        assert got["scf_stable"] == want.scf["stable"] and got["tags"] == ",".join(want.tags)
        assert json.loads(got["options"]) == want.options
    assert str(frame["iterations"].dtype) == "Int64" and str(frame["converged"].dtype) == "boolean"
    assert frame["iterations"].isna().sum() == sum(r.iterations is None for r in rows.values()) > 0


def test_empty_run_gives_an_empty_frame_with_the_columns(store):
    frame = results_dataframe(store, "r-empty")
    assert len(frame) == 0 and {"energy_ha", "error_mha", "seconds", "verdict"} <= set(frame.columns)


def test_csv_round_trip(store):
    frame = results_dataframe(store, RUN)
    back = pd.read_csv(io.BytesIO(render_export(store, RUN, "csv")))
    assert list(back.columns) == list(frame.columns)
    assert list(back["task_key"]) == list(frame["task_key"])
    for column in ("energy_ha", "error_mha", "seconds", "one_norm_ha"):
        for a, b in zip(back[column], frame[column]):
            assert (pd.isna(a) and pd.isna(b)) or a == b        # floats written to full precision


def test_parquet_round_trip(store):
    pytest.importorskip("pyarrow")
    frame = results_dataframe(store, RUN)
    back = pd.read_parquet(io.BytesIO(render_export(store, RUN, "parquet")))
    pd.testing.assert_frame_equal(back, frame, check_dtype=False)
    assert str(back["iterations"].dtype) == "Int64"


def test_json_holds_the_run_and_the_rows_as_stored(store):
    doc = json.loads(render_export(store, RUN, "json"))
    assert doc["run"] == sample_run(RUN).to_json_dict()
    rows = rows_by_key()
    assert len(doc["results"]) == N
    for item in doc["results"]:
        assert ResultRow(**item) == rows[item["task_key"]]


def test_export_to_file_and_stdout(store, tmp_path, capsysbinary):
    out = export_run(store, RUN, "json", tmp_path / "deep" / "run.json")
    assert json.loads(out.read_text())["run"]["run_id"] == RUN
    assert export_run(store, RUN, "csv") is None
    lines = capsysbinary.readouterr().out.decode().splitlines()
    assert lines[0].startswith("run_id,task_key,") and len(lines) == N + 1


def test_bad_format_and_unknown_run_are_input_errors(store):
    with pytest.raises(InputError, match="unknown export format 'xlsx'") as err:
        render_export(store, RUN, "xlsx")
    assert err.value.field == "--format"
    for fmt in ("csv", "json"):
        with pytest.raises(InputError, match="no run 'r-nope'"):
            render_export(store, "r-nope", fmt)


def test_json_export_has_no_nan(store):
    store.add_result(ResultRow(**{**sample_row(RUN, 0).to_json_dict(), "metadata": {"x": math.nan},
                                  "one_norm_ha": math.inf}))
    text = render_export(store, RUN, "json").decode()
    assert "NaN" not in text and "Infinity" not in text
    json.loads(text)
