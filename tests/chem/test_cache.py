"""The on-disk cache: hits are recorded, corrupt and mismatched entries are recomputed."""

from __future__ import annotations

import json

import numpy as np
import pytest

from benchsuite.chem.cache import DiskCache
from tests.conftest import H2_CASE


def _references(run_cli, path, cache_dir):
    code, out, err = run_cli("references", "scratch-h2", "--case-file", str(path), "--cache-dir",
                             str(cache_dir), "--format", "json")
    assert code == 0, err
    return json.loads(out)


def test_second_call_is_a_recorded_hit(scratch, run_cli, tmp_path):
    path = scratch(H2_CASE)
    first = _references(run_cli, path, tmp_path / "c")
    second = _references(run_cli, path, tmp_path / "c")
    assert first["cache"] == "miss"
    assert second["cache"] == "hit"
    assert second["ladder"] == first["ladder"]


@pytest.mark.parametrize("damage", ["truncate-json", "garbage-npz", "edit-meta-fields"])
def test_corrupt_or_mismatched_entry_is_recomputed(tmp_path, damage):
    cache = DiskCache(tmp_path)
    calls = []

    def compute():
        calls.append(1)
        return {"energy_ha": -1.0}, {"h1_ha": np.eye(3)}

    fields = {"geometry": [[0.0, 0.0, 0.0]], "basis": "sto-3g"}
    cache.get_or_compute("integrals", fields, compute)
    jpath = next(tmp_path.rglob("*.json"))
    npath = next(tmp_path.rglob("*.npz"))
    if damage == "truncate-json":
        jpath.write_text(jpath.read_text()[:25])
    elif damage == "garbage-npz":
        npath.write_bytes(b"PK\x03\x04 not really a zip file")
    else:  # an entry whose stored key fields disagree with the request (hash collision / hand edit)
        record = json.loads(jpath.read_text())
        record["fields"]["basis"] = "6-31g"
        jpath.write_text(json.dumps(record))
    meta, arrays, status = cache.get_or_compute("integrals", fields, compute)
    assert status == "recomputed"
    assert cache.stats.corrupt == 1 and len(calls) == 2
    assert np.array_equal(arrays["h1_ha"], np.eye(3))
    # and the repaired entry now serves a hit
    assert cache.get_or_compute("integrals", fields, compute)[2] == "hit"


def test_corrupted_ladder_file_recomputed_through_cli(scratch, run_cli, tmp_path):
    path = scratch(H2_CASE)
    first = _references(run_cli, path, tmp_path / "c")
    for entry in (tmp_path / "c").rglob("*.json"):
        entry.write_text("{ this is not json")
    again = _references(run_cli, path, tmp_path / "c")
    assert again["cache"] == "recomputed"
    assert again["ladder"][-1]["energy_ha"] == pytest.approx(first["ladder"][-1]["energy_ha"], abs=1e-10)


def test_key_covers_geometry_and_pyscf_version(scratch, run_cli, tmp_path):
    """A different geometry is a different entry, never a stale hit."""
    a = _references(run_cli, scratch(H2_CASE, "a.toml"), tmp_path / "c")
    b_path = scratch(H2_CASE.replace("0.7414", "0.80"), "b.toml")
    code, out, _ = run_cli("references", "scratch-h2", "--case-file", str(b_path), "--cache-dir",
                           str(tmp_path / "c"), "--format", "json")
    b = json.loads(out)
    assert b["cache"] == "miss"
    assert a["ladder"][0]["energy_ha"] != b["ladder"][0]["energy_ha"]
    from benchsuite.chem.space import cache_fields, prepare
    from benchsuite.registry import Registry
    case = Registry.load(case_files=[b_path], builtin=False).case("scratch-h2")
    prep = prepare(case)
    import pyscf
    assert cache_fields(case, prep.basis, prep.space, "rhf")["pyscf"] == pyscf.__version__
