"""The built-in registry's content and the suite files."""

from __future__ import annotations

import json

import numpy as np
import pytest

from benchsuite.registry.case import parse_basis_label


def test_registry_size_and_coverage(registry):
    files = {c.path for c in registry.cases.values()}
    assert len(files) >= 25
    formulas = {"".join(sorted(c.symbols)) for c in registry.cases.values()}
    for needed in ("HH", "HHe", "HLi", "BeHH", "HHO", "HHHN", "CHHHH", "NN", "FH", "FF", "HO"):
        assert needed in formulas, needed
    assert any(c.multiplicity == 3 for c in registry.cases.values())
    assert any(c.multiplicity == 2 for c in registry.cases.values())
    assert any(c.charge > 0 for c in registry.cases.values())
    assert any(c.frozen_core for c in registry.cases.values())
    assert any(c.active_space and c.default_basis.label == "6-31g" for c in registry.cases.values())
    h2_scan = registry.scan_points("h2-scan")
    assert h2_scan[0].scan_length == 0.5 and h2_scan[-1].scan_length == 3.0


def test_every_citation_resolves(registry):
    for case in registry.cases.values():
        assert case.geometry_source in registry.bib
        for pub in case.published:
            assert pub.source in registry.bib


def test_suites(registry):
    assert {"smoke", "core", "stretched", "open-shell", "all"} <= set(registry.suites)
    smoke = registry.suite_entries("smoke")
    assert 1 <= len(smoke) <= 6
    beyond = [c for c in registry.cases.values() if "beyond-exact" in c.tags]
    assert len(registry.suite_entries("all")) == len(registry.cases) - len(beyond)
    assert all(e.case.is_open_shell for e in registry.suite_entries("open-shell"))
    stretched = {e.case.name for e in registry.suite_entries("stretched")}
    assert any(n.startswith("h6-") for n in stretched) and any(n.startswith("n2-stretch@") for n in stretched)


def test_scan_geometry_moves_only_the_named_atoms(registry):
    pts = registry.scan_points("h2-scan")
    for p in pts:
        xyz = p.coords_angstrom()
        assert np.linalg.norm(xyz[1] - xyz[0]) == pytest.approx(p.scan_length, abs=1e-12)
        assert np.allclose(xyz[0], pts[0].coords_angstrom()[0])


def test_per_element_basis_label_round_trip(registry):
    lih = registry.case("lih")
    table = [b for b in lih.bases if not isinstance(b.spec, str)]
    assert table, "lih carries a per-element basis"
    assert lih.basis(table[0].label) == table[0]
    assert lih.basis(table[0].label.upper()) == table[0]
    assert parse_basis_label("Li:6-31G, H:sto-3g").for_pyscf() == {"Li": "6-31g", "H": "sto-3g"}


def test_cases_command_json(run_cli):
    code, out, _ = run_cli("cases", "--suite", "smoke", "--format", "json")
    assert code == 0
    rows = json.loads(out)
    assert rows and all({"name", "charge", "multiplicity", "basis", "geometry_source"} <= set(r) for r in rows)


def test_beyond_exact_suites(registry):
    """`beyond-exact` holds every case tagged beyond-exact, each with its own DMRG schedule: hydrogen
    chains of 14-20 atoms (STO-3G, one orbital per atom, half filling: past the default determinant
    limit by counting alone), the N2/cc-pVDZ frozen-core curve and the Cr2 active space (their spaces
    are checked in tests/chem/test_ladder.py); `beyond-exact-smoke` stays one case."""
    from math import comb

    from benchsuite.chem.ladder import DEFAULT_MAX_DETERMINANTS

    tagged = {c.name for c in registry.cases.values() if "beyond-exact" in c.tags}
    suite = {e.case.name for e in registry.suite_entries("beyond-exact")}
    assert suite == tagged
    chains = {name for name in suite if set(registry.case(name).symbols) == {"H"}}
    assert len(chains) >= 6
    assert {"n2-dz-fc@2.118", "n2-dz-fc@4.2", "cr2-cas-12e20o"} <= suite
    for name in suite:
        case = registry.case(name)
        assert case.dmrg is not None, name
        # chains need local orbitals (common practice for 1-D systems); compact N2 runs canonical
        # (measured here: lower energy at M = 200 and 2.5x faster at 2.118 bohr)
        assert case.dmrg.orbitals == ("canonical" if name.startswith("n2-") else "split-localised"), name
        if name in chains:
            n = len(case.symbols)
            assert 14 <= n <= 20
            assert comb(n, n // 2) ** 2 > DEFAULT_MAX_DETERMINANTS
    assert any("transition-metal" in registry.case(name).tags for name in suite)
    assert len(registry.suite_entries("beyond-exact-smoke")) == 1
