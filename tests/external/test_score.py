"""Scoring a results file: the gate's own verdicts, stored as a run, with no silent mismatch."""

from __future__ import annotations

import csv
import json

import pytest

from benchsuite import api
from benchsuite.constants import HARTREE_KCAL_MOL
from benchsuite.gate.external import UNVERIFIED, read_results_file

COLUMNS = ["case", "basis", "space", "encoding", "energy_ha", "stderr_ha", "method", "method_version", "device",
           "fingerprint", "variational", "lab_note"]
JW = "jordan-wigner/interleaved"


def _write_csv(path, rows, header=("# invented numbers for a test",)):
    with open(path, "w", newline="") as fh:
        fh.writelines(line + "\n" for line in header)
        writer = csv.DictWriter(fh, fieldnames=COLUMNS)
        writer.writeheader()
        writer.writerows(rows)
    return path


@pytest.fixture(scope="module")
def rows(built, token):
    """Good rows: a deterministic, a stochastic and an unverified one, and a below-exact variational one."""
    def row(case, offset_ha, method="lab-vqe", stderr="", fingerprint=True, variational="false"):
        p = built(case)
        return {"case": case, "basis": p.problem.basis, "space": p.problem.space, "encoding": JW,
                "energy_ha": repr(p.reference.energy_ha + offset_ha), "stderr_ha": stderr, "method": method,
                "method_version": "2.1", "device": "bench-qpu-3", "variational": variational,
                "fingerprint": token(case) if fingerprint else "", "lab_note": "invented"}
    return [row("h2", 0.0004), row("lih", 0.0009, stderr="0.0003"), row("heh-cation", 0.0002, fingerprint=False),
            row("h2", -0.01, method="lab-vqe-variational", variational="true")]


@pytest.fixture
def env(tmp_path, cache_dir, monkeypatch):
    monkeypatch.setenv("BENCHSUITE_CACHE", str(cache_dir))
    return tmp_path


def test_scored_run_then_report_and_table(run_cli, env, rows, built):
    path = _write_csv(env / "results.csv", rows)
    db, doc = env / "r.sqlite", env / "run.json"
    code, out, err = run_cli("score", str(path), "--db", str(db), "--json", str(doc))
    assert code == 1, err                                     # the variational row lies below exact
    assert "4 scored, 0 rejected, 1 unverified" in out
    assert f"{UNVERIFIED} (no fingerprint): row 3, lab-vqe on heh-cation (sto-3g)" in out
    run = api.load_run("latest", db)
    by_method_case = {(r.method, r.case): r for r in run.rows}
    assert by_method_case[("lab-vqe-variational", "h2")].verdict == "below-exact"
    for r in rows[:3]:                                        # the gate's own verdict for the same energy
        stored = by_method_case[(r["method"], r["case"])]
        expected = api.judge(built(r["case"]), float(r["energy_ha"]),
                             stderr_ha=float(r["stderr_ha"]) if r["stderr_ha"] else None, variational=False)
        assert (stored.verdict, stored.error_mha, stored.threshold_mha) == \
            (expected.verdict, pytest.approx(expected.error_mha), expected.threshold_mha)
    heh = by_method_case[("lab-vqe", "heh-cation")]
    assert heh.message.startswith(UNVERIFIED) and heh.metadata["problem_check"]["status"] == "unverified"
    assert by_method_case[("lab-vqe", "h2")].metadata["problem_check"]["status"] == "verified"
    assert heh.metadata["provenance"]["lab_note"] == "invented"
    assert run.record.summary["external"]["sha256"] == read_results_file(path).sha256
    assert run.record.plugin_git["lab-vqe"]["version"] == "2.1"
    json_heh = [r for r in json.loads(doc.read_text())["results"] if r["case"] == "heh-cation"]
    assert len(json_heh) == 1 and json_heh[0]["message"].startswith(UNVERIFIED)
    code, out, _ = run_cli("report", "latest", "--db", str(db), "--out", str(env / "r.html"))
    assert code == 0 and UNVERIFIED in (env / "r.html").read_text()
    code, out, _ = run_cli("table", "latest", "--db", str(db), "--format", "csv")
    assert code == 0 and "heh-cation" in out and "lab-vqe" in out
    code, out, _ = run_cli("export", "latest", "--db", str(db), "--format", "json", "--out", str(env / "e.json"))
    exported = [r for r in json.loads((env / "e.json").read_text())["results"] if r["case"] == "heh-cation"]
    assert code == 0 and exported[0]["metadata"]["problem_check"]["status"] == "unverified"


def test_wrong_fingerprint_basis_and_unit_are_row_errors(run_cli, env, rows, token):
    bad_fp = {**rows[0], "fingerprint": token("lih")}
    bad_basis = {**rows[1], "basis": "cc-pvdz", "method": "other"}
    kcal = {**rows[0], "method": "in-kcal", "energy_ha": repr(float(rows[0]["energy_ha"]) * HARTREE_KCAL_MOL)}
    path = _write_csv(env / "bad.csv", [rows[0], bad_fp, bad_basis, kcal])
    db = env / "r.sqlite"
    code, out, _ = run_cli("score", str(path), "--db", str(db))
    assert code == 1
    assert "row 2, column fingerprint: differs from the registry's problem in: geometry" in out
    assert "orbitals" in out.split("row 2,")[1].split("\n")[0]
    assert "row 3, column basis: 'cc-pvdz' is not a basis of lih" in out
    assert "row 4, column energy_ha:" in out and "fits best as kcal/mol" in out
    run = api.load_run("latest", db)
    assert [(r.case, r.method) for r in run.rows] == [("h2", "lab-vqe")]   # nothing scored for the three
    assert not run.decision.passed and any("3 of 4 row(s)" in r for r in run.decision.reasons)


def test_duplicates_nan_and_empty_cells(run_cli, env, rows):
    nan = {**rows[1], "energy_ha": "nan", "method": "m-nan"}
    empty = {**rows[1], "method": ""}
    path = _write_csv(env / "dup.csv", [rows[0], rows[2], dict(rows[0]), nan, empty])
    code, out, _ = run_cli("score", str(path), "--db", str(env / "r.sqlite"))
    assert code == 1
    assert "row 1, column case/basis/space/encoding/method: the same task as row(s) 3" in out
    assert "row 3, column case/basis/space/encoding/method: the same task as row(s) 1" in out
    assert "row 4, column energy_ha: nan: not a finite number" in out
    assert "row 5, column method: empty" in out
    assert [r.case for r in api.load_run("latest", env / "r.sqlite").rows] == ["heh-cation"]


@pytest.mark.parametrize("text, cause", [
    ("case,basis,space,encoding,method\nh2,sto-3g,x,jordan-wigner,m\n", "missing required column(s) energy_ha"),
    ("case,basis,space,encoding,energy_kcal,method\nh2,sto-3g,x,jw,1,m\n", "found ['energy_kcal']"),
    ("case,case,basis,space,encoding,energy_ha,method\n", "appears twice"),
    ("case,basis,space,encoding,energy_ha,method\n", "no data rows"),
])
def test_malformed_files_exit_2_and_store_nothing(run_cli, env, text, cause):
    path = env / "bad.csv"
    path.write_text(text)
    code, _, err = run_cli("score", str(path), "--db", str(env / "r.sqlite"))
    assert code == 2 and cause in err
    assert not (env / "r.sqlite").exists()


def test_malformed_json_and_parquet(run_cli, env):
    for name, blob in (("x.json", b'{"rows": 3}'), ("y.json", b"[1, 2"), ("z.parquet", b"PAR1 not really")):
        (env / name).write_bytes(blob)
        code, _, err = run_cli("score", str(env / name), "--db", str(env / "r.sqlite"))
        assert code == 2, (name, err)
    assert not (env / "r.sqlite").exists()


def test_csv_json_and_parquet_score_alike(env, rows, cache_dir):
    import pandas as pd

    _write_csv(env / "a.csv", rows[:3])
    (env / "a.json").write_text(json.dumps({"provenance": {"lab": "invented"}, "rows": rows[:3]}))
    pd.DataFrame(rows[:3]).to_parquet(env / "a.parquet")
    outcomes = []
    for name in ("a.csv", "a.json", "a.parquet"):
        score = api.score_external(env / name, db=env / "r.sqlite", cache_dir=cache_dir)
        outcomes.append(sorted((r.case, r.verdict, round(r.error_mha, 9), r.message) for r in score.rows))
    assert outcomes[0] == outcomes[1] == outcomes[2]
    first, last = api.list_runs(env / "r.sqlite")[-1].run_id, api.list_runs(env / "r.sqlite")[0].run_id
    assert api.compare(first, last, db=env / "r.sqlite").passed       # baselines work on scored runs


def test_scan_rows_get_curve_statistics_and_plots(run_cli, env, built, token):
    points = ["h2-scan@0.5", "h2-scan@1", "h2-scan@2", "h2-scan@3"]
    offsets_ha = [0.0002, 0.0005, 0.0011, 0.0003]
    scan_rows = []
    for name, off in zip(points, offsets_ha):
        p = built(name, "sto-3g")
        scan_rows.append({"case": name, "basis": "sto-3g", "space": p.problem.space, "encoding": JW,
                          "energy_ha": repr(p.reference.energy_ha + off), "method": "scan-solver",
                          "fingerprint": token(name, "sto-3g")})
    _write_csv(env / "scan.csv", scan_rows)
    code, out, _ = run_cli("score", str(env / "scan.csv"), "--db", str(env / "r.sqlite"),
                           "--report", str(env / "scan.html"))
    assert code == 0
    expected = 1000 * (max(offsets_ha) - min(offsets_ha))   # non-parallelity = max(error) - min(error)
    assert f"scan h2-scan (sto-3g, {JW}) scan-solver: 4 point(s), max |error| 1.1000 mHa, " \
           f"non-parallelity {expected:.4f} mHa" in out
    html = (env / "scan.html").read_text()
    assert "h2-scan" in html and "<svg" in html


def test_stored_rows_form_the_verified_chain(env, rows, cache_dir):
    """Rows stored in one transaction (ResultStore.add_results) read back through the hash-chain check,
    and a second batch cannot replace a stored row."""
    from dataclasses import replace

    _write_csv(env / "a.csv", rows[:3])
    score = api.score_external(env / "a.csv", db=env / "r.sqlite", cache_dir=cache_dir)
    with api.open_store(env / "r.sqlite") as store:
        stored = store.results(score.run.run_id)                  # verifies the chain and the record
        assert [r.task_key for r in stored] == sorted(r.task_key for r in score.rows)
        assert store.chain(score.run.run_id)["rows"] == 3
        with pytest.raises(ValueError, match="already stored"):
            store.add_results([replace(stored[0], energy_ha=0.0)])


def test_a_file_of_rejected_rows_stores_nothing(run_cli, env, rows):
    path = _write_csv(env / "none.csv", [{**rows[0], "case": "no-such-case"}, {**rows[1], "energy_ha": "x"}])
    code, _, err = run_cli("score", str(path), "--db", str(env / "r.sqlite"))
    assert code == 2 and "no row could be scored" in err and "row 1, column case: unknown case" in err
    assert "row 2, column energy_ha: 'x' is not a number" in err
    assert not (env / "r.sqlite").exists()


def test_plausibility_names_the_unit_that_fits(built):
    """The window [E_FCI - 1 Eh, E_HF + 1 Eh] with CODATA 2018 conversions (Tiesinga et al., Rev. Mod.
    Phys. 93, 025010, 2021): an H2 energy in mHa, kcal/mol or eV, or its correlation energy, is caught."""
    from benchsuite.constants import HARTREE_EV
    from benchsuite.gate.external import plausibility

    ladder = built("h2").ladder
    e_fci, e_hf = ladder.primary.energy_ha, ladder.rung("hf").energy_ha
    assert plausibility(e_fci + 0.5, ladder) is None and plausibility(e_fci - 0.9, ladder) is None
    for given, unit in ((1000 * e_fci, "mHa"), (HARTREE_KCAL_MOL * e_fci, "kcal/mol"),
                        (HARTREE_EV * e_fci, "eV"), (e_fci - e_hf, "a correlation energy")):
        cause = plausibility(given, ladder)
        assert cause is not None and f"fits best as {unit}" in cause, (given, cause)


def test_hostile_cells_never_crash(built, cache):
    """Arbitrary cell values give a checked row or a RowError naming a column, never an exception."""
    from hypothesis import HealthCheck, given, settings
    from hypothesis import strategies as st

    from benchsuite.gate.external import Problems, RowError, check_row

    registry, problems = api.load_registry(), Problems(cache)
    good = {"case": "h2", "basis": "sto-3g", "space": built("h2").problem.space, "encoding": JW,
            "energy_ha": repr(built("h2").reference.energy_ha), "method": "m"}
    cell = st.one_of(st.none(), st.text(max_size=12), st.floats(allow_nan=True, allow_infinity=True),
                     st.integers(-10**30, 10**30), st.booleans())

    @settings(max_examples=150, deadline=None, suppress_health_check=list(HealthCheck))
    @given(st.dictionaries(st.sampled_from(list(good) + ["stderr_ha", "shots", "converged", "variational",
                                                        "fingerprint", "seconds", "extra"]), cell, max_size=6))
    def check(changes):
        row, error = check_row(1, {**good, **changes}, registry, problems)
        assert (row is None) != (error is None)
        if error is not None:
            assert isinstance(error, RowError) and error.column and error.cause

    check()
