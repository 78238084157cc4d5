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


def test_another_pyscf_version_is_a_miss(run_cli, scratch, tmp_path, monkeypatch):
    """An entry written under one PySCF release is never served to another (its numbers may differ)."""
    import pyscf

    path = scratch(H2_CASE, "a.toml")
    assert _references(run_cli, path, tmp_path / "c")["cache"] == "miss"
    assert _references(run_cli, path, tmp_path / "c")["cache"] == "hit"
    monkeypatch.setattr(pyscf, "__version__", pyscf.__version__ + ".post-test")
    assert _references(run_cli, path, tmp_path / "c")["cache"] == "miss"


# -- the corrupted-cache matrix --------------------------------------------------------

LADDER_META = {"rungs": [{"method": "hf", "energy_ha": -1.1167593073}, {"method": "fci", "energy_ha": -1.1372838}],
               "scf": {"method": "rhf", "converged": True}, "flags": []}


def _edit(key):
    """A damage that rewrites the parsed JSON entry (and leaves its checksum alone)."""
    def damage(jpath, npath):
        record = json.loads(jpath.read_text())
        jpath.write_text(json.dumps(key(record)))
    return damage


def _energy_edit(record):
    record["meta"]["rungs"][1]["energy_ha"] += 0.0005          # 0.5 mHa: the classic silent edit
    return record


def _drop(name):
    return lambda r: {k: v for k, v in r.items() if k != name}


def _set(name, value):
    return lambda r: {**r, name: value}


def _write(blob):
    return lambda jpath, npath: jpath.write_bytes(blob)


def _other_npz(jpath, npath):
    import io
    buf = io.BytesIO()
    np.savez(buf, h1_ha=2 * np.eye(3))
    npath.write_bytes(buf.getvalue())


DAMAGES = {
    "empty file": _write(b""),
    "garbage bytes": _write(b"\x00\xff\xfe garbage \x89PNG"),
    "not UTF-8": _write(b'{"meta": "\xe9\xe9"}'),
    "json null": _write(b"null"),
    "json list": _write(b"[1, 2, 3]"),
    "json number": _write(b"42"),
    "missing meta": _edit(_drop("meta")),
    "missing checksum": _edit(_drop("sha256")),
    "missing fields": _edit(_drop("fields")),
    "meta null": _edit(_set("meta", None)),
    "meta a list": _edit(_set("meta", [])),
    "fields a string": _edit(_set("fields", "x")),
    "checksum a number": _edit(_set("sha256", 7)),
    "npz digest a list": _edit(_set("npz_sha256", [])),
    "extra key": _edit(_set("served", True)),
    "older schema": _edit(_set("schema", 1)),
    "edited energy (0.5 mHa)": _edit(_energy_edit),
    "npz missing": lambda jpath, npath: npath.unlink(),
    "npz replaced by another valid npz": _other_npz,
}


def _cache_with_entry(tmp_path):
    cache, calls = DiskCache(tmp_path), []

    def compute():
        calls.append(1)
        return json.loads(json.dumps(LADDER_META)), {"h1_ha": np.eye(3)}

    fields = {"geometry": [[0.0, 0.0, 0.0]], "basis": "sto-3g"}
    cache.get_or_compute("ladder", fields, compute)
    return cache, calls, lambda: cache.get_or_compute("ladder", fields, compute)


@pytest.mark.parametrize("damage", DAMAGES, ids=list(DAMAGES))
def test_damaged_entry_is_recomputed_never_served(tmp_path, damage):
    cache, calls, get = _cache_with_entry(tmp_path)
    DAMAGES[damage](next(tmp_path.rglob("*.json")), next(tmp_path.rglob("*.npz")))
    meta, arrays, status = get()
    assert status == "recomputed" and len(calls) == 2 and cache.stats.corrupt == 1
    assert meta == LADDER_META and np.array_equal(arrays["h1_ha"], np.eye(3))
    assert get()[2] == "hit" and len(calls) == 2                 # the rewritten entry is whole again


@pytest.mark.parametrize("which", ["json", "npz"])
def test_every_flipped_bit_is_caught(tmp_path, which):
    """A single flipped bit anywhere in the file is never served as different content."""
    _, _, get = _cache_with_entry(tmp_path)
    path = next(tmp_path.rglob(f"*.{which}"))
    original = path.read_bytes()
    step = max(1, len(original) // 150)
    for pos in range(0, len(original), step):
        for bit in (0, 5):
            damaged = bytearray(original)
            damaged[pos] ^= 1 << bit
            path.write_bytes(bytes(damaged))
            meta, arrays, status = get()
            # "1e-05" -> "1E-05" is the same number: served, but equal; anything else is recomputed
            assert meta == LADDER_META and np.array_equal(arrays["h1_ha"], np.eye(3)), (pos, bit, status)
            assert status in ("recomputed", "hit")
            if status == "hit":
                assert json.loads(damaged) == json.loads(original) if which == "json" else True
            path.write_bytes(original)


def test_edited_fci_energy_is_recomputed_through_cli(scratch, run_cli, tmp_path):
    path = scratch(H2_CASE)
    first = _references(run_cli, path, tmp_path / "c")
    fci = first["ladder"][-1]["energy_ha"]
    for entry in (tmp_path / "c").rglob("*.json"):
        text = entry.read_text()
        if repr(fci) in text:
            entry.write_text(text.replace(repr(fci), repr(fci + 0.0005)))
    again = _references(run_cli, path, tmp_path / "c")
    assert again["cache"] == "recomputed"
    assert again["ladder"][-1]["energy_ha"] == pytest.approx(fci, abs=1e-10)
