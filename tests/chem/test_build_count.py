"""How often PySCF builds a molecule for the smoke suite's references and problems.

Outside check: PySCF itself (``pyscf.gto.Mole.build`` is counted by wrapping it); the expected count
is the number of distinct (case geometry, basis) pairs of the suite, computed from the registry.
"""

from __future__ import annotations

from pyscf import gto

from benchsuite.chem import scf


def test_smoke_suite_builds_each_molecule_once(registry, ladder_cache, monkeypatch):
    from benchsuite.methods.problem import build_problem

    calls = []
    real_build = gto.Mole.build

    def counted(self, *args, **kwargs):
        calls.append(1)
        return real_build(self, *args, **kwargs)

    monkeypatch.setattr(gto.Mole, "build", counted)
    monkeypatch.setattr(scf, "_BUILT_MOLES", {})
    entries = [(e.case, e.basis) for e in registry.suite_entries("smoke", None)]
    for case, basis in entries:
        build_problem(case, basis.label, cache=ladder_cache)
    first = len(calls)
    for case, basis in entries:
        build_problem(case, basis.label, cache=ladder_cache)
    distinct = {(c.symbols, tuple(map(tuple, c.coords_bohr())), c.charge, c.spin, b.label) for c, b in entries}
    assert first == len(distinct), (first, len(distinct))          # once per geometry and basis (was 2x)
    assert len(calls) == first                                    # a second pass builds nothing new
