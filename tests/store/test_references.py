"""The references table: one stored ladder per (run, case, basis), every result row pointing to its
own, the primary energy equal to PySCF's FCI run directly, an edited ladder caught."""

from __future__ import annotations

import sqlite3

import pytest

from benchsuite.store.db import ResultStore


@pytest.fixture(scope="module")
def stored_run(tmp_path_factory):
    from benchsuite import cli

    tmp = tmp_path_factory.mktemp("refs")
    db = tmp / "r.sqlite"
    code = cli.main(["run", "-q", "--case", "h2", "--case", "heh-cation", "--method", "hf-bitstring",
                     "--method", "exact-sector", "--db", str(db), "--cache-dir", str(tmp / "cache")])
    assert code in (0, 1)
    with ResultStore.open(db) as store:
        run_id = store.resolve_run_id("latest")
        return db, run_id, store.results(run_id), store.references(run_id)


def test_one_ladder_per_case_and_basis_and_every_row_points_to_one(stored_run):
    db, run_id, rows, refs = stored_run
    assert len(rows) == 4 and sorted((f.case, f.basis) for f in refs) == [("h2", "sto-3g"), ("heh-cation", "sto-3g")]
    with sqlite3.connect(db) as conn:
        orphans = conn.execute('SELECT COUNT(*) FROM results r LEFT JOIN reference_ladders f ON '
                               'f.run_id = r.run_id AND f."case" = r."case" AND f.basis = r.basis '
                               'WHERE r.run_id = ? AND f.run_id IS NULL', (run_id,)).fetchone()[0]
    assert orphans == 0
    by_pair = {(f.case, f.basis): f for f in refs}
    for row in rows:
        ref = by_pair[(row.case, row.basis)]
        assert (ref.primary_method, ref.primary_energy_ha) == (row.reference_method, row.reference_energy_ha)
        assert ref.uncertainty_ha == 0.0 and ref.space == row.space


def test_primary_energy_is_pyscf_fci_run_directly(stored_run, registry):
    """Independent route: PySCF RHF + determinant FCI on the case's own geometry (in bohr)."""
    from pyscf import fci, gto, scf

    case = registry.case("h2")
    mol = gto.M(atom=list(zip(case.symbols, case.coords_bohr().tolist())), unit="bohr", basis="sto-3g",
                charge=case.charge, verbose=0)
    e_fci = fci.FCI(scf.RHF(mol).run()).kernel()[0]
    ref = next(f for f in stored_run[3] if f.case == "h2")
    assert ref.primary_method == "fci" and ref.primary_energy_ha == pytest.approx(e_fci, abs=1e-8)
    hf_rung = next(g for g in ref.ladder["ladder"] if g["method"] == "hf")
    assert hf_rung["energy_ha"] == pytest.approx(scf.RHF(mol).run().e_tot, abs=1e-8)


def test_a_ladder_is_stored_once_and_an_edit_is_caught(stored_run, tmp_path):
    import shutil

    from benchsuite import cli

    db, run_id, _, refs = stored_run
    copy = tmp_path / "copy.sqlite"
    shutil.copy(db, copy)
    with ResultStore.open(copy) as store:
        store.add_reference(run_id, {**refs[0].ladder, "primary": "hf"})       # kept: the first one stays
        assert store.references(run_id)[0].primary_method == refs[0].primary_method
    with sqlite3.connect(copy) as conn:
        conn.execute("UPDATE reference_ladders SET ladder = json_set(ladder, '$.ladder[0].energy_ha', -9.0) "
                     "WHERE run_id = ? AND \"case\" = 'h2'", (run_id,))
    code = cli.main(["report", run_id, "--db", str(copy), "--out", str(tmp_path / "r.html")])
    assert code == 2 and not (tmp_path / "r.html").exists()
