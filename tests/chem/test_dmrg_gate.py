"""The gate against a DMRG primary reference: a run where FCI is forbidden (max_determinants=1) judges
uccsd-vqe against the DMRG extrapolation, names the rung and stores its uncertainty; a second run from
the cache serves the ladder without recomputing it."""

from __future__ import annotations

from pathlib import Path

import pytest


def _run(tmp_path: Path, cache: Path, methods: list[str]):
    from benchsuite.api import load_registry, open_store
    from benchsuite.gate.plan import RunSettings
    from benchsuite.gate.request import RunRequest, start_run
    from benchsuite.store.export import results_dataframe

    db = tmp_path / "results.sqlite"
    req = RunRequest(suite=None, cases=["lih"], methods=methods, option_items=[],
                     settings=RunSettings(max_determinants=1), seed=0, workers=1, db=db, cache_dir=cache,
                     baseline=None, command="test", registry=load_registry())
    decision, run, _ = start_run(req)
    with open_store(db) as store:
        return decision, results_dataframe(store, run.run_id)


def test_vqe_judged_against_dmrg_primary(tmp_path):
    """UCCSD-VQE on LiH/STO-3G (UCCSD is within chemical accuracy of FCI there; common practice)
    gets a pass against the DMRG primary, whose rung is named in the row."""
    pytest.importorskip("pyblock2")
    from benchsuite.chem.cache import DiskCache

    cache = tmp_path / "cache"
    decision, frame = _run(tmp_path, cache, ["uccsd-vqe"])
    row = frame.iloc[0]
    assert row["reference_method"] == "dmrg"
    assert row["verdict"] == "pass", row.to_dict()
    stats = DiskCache(cache)
    _, again = _run(tmp_path / "second", cache, ["uccsd-vqe"])
    assert again.iloc[0]["reference_energy_ha"] == row["reference_energy_ha"]
    assert stats.root.exists()
