"""The public API: selection, problem, references, verdicts as the gate gives them, runs."""

from __future__ import annotations

import inspect

import pytest

from benchsuite import api
from benchsuite.errors import InputError

#: 1 kcal/mol in mHa: 4.184 kJ/mol / 2625.4996 kJ/mol per hartree (CODATA 2018, Tiesinga et al.,
#: Rev. Mod. Phys. 93, 025010, 2021).
KCAL_MHA = 4.184 / 2625.4996394799 * 1000


def test_every_public_name_is_documented():
    for name in api.__all__:
        obj = getattr(api, name)
        if callable(obj):
            assert (inspect.getdoc(obj) or "").strip(), name
    assert "hartree" in api.__doc__ and "millihartree" in api.__doc__
    for name in api.__all__:                     # a name with a quantity in it says the unit
        obj = getattr(api, name)
        if callable(obj) and not isinstance(obj, type):
            params = [p for p in inspect.signature(obj).parameters if p.endswith(("_ha", "_mha", "_s"))]
            doc = inspect.getdoc(obj)
            for p in params:
                unit = {"_ha": ("Eh", "hartree"), "_mha": ("mHa",), "_s": ("second",)}[
                    next(k for k in ("_mha", "_ha", "_s") if p.endswith(k))]
                assert any(u in doc for u in unit), (name, p)


def test_selection():
    assert [e.case.name for e in api.load_suite("smoke")] == ["h2", "heh-cation", "lih", "hf", "h4-square",
                                                               "oh"]
    assert {e.basis.label for e in api.select(cases=["h2", "lih"], basis="sto-3g")} == {"sto-3g"}
    assert api.load_case("heh-cation").charge == 1
    with pytest.raises(InputError):
        api.select()
    with pytest.raises(InputError):
        api.load_suite("no-such-suite")


def test_references_of_h2(built):
    """H2 STO-3G at 0.7414 Å: FCI -1.1373 Eh (Szabo & Ostlund 1996, ch. 4 quote -1.1373 at 1.4 bohr;
    from memory for this geometry), HF above FCI, correlation a few tens of mHa."""
    refs = api.references(built("h2"))
    assert refs.primary_method == "fci" and refs.uncertainty_ha is None
    assert refs.primary_energy_ha == pytest.approx(-1.1373, abs=5e-4)
    assert 10 < 1000 * (refs.rungs["hf"] - refs.primary_energy_ha) < 40


def test_judge_thresholds_at_one_kcal_per_mol(built):
    prepared = built("h2")
    exact = prepared.reference.energy_ha
    inside = api.judge(prepared, exact + 0.99 * KCAL_MHA / 1000)
    outside = api.judge(prepared, exact + 1.01 * KCAL_MHA / 1000)
    assert (inside.verdict, outside.verdict) == ("pass", "fail")
    assert inside.threshold_mha == pytest.approx(KCAL_MHA, rel=1e-6)
    assert api.judge(prepared, exact + 0.003, threshold_mha=5.0).verdict == "pass"
    assert api.judge(prepared, exact - 0.010).verdict == "below-exact"
    assert api.judge(prepared, exact - 0.010, variational=False).verdict == "fail"
    assert api.judge(prepared, float("nan")).verdict == "invalid"
    assert api.judge(prepared, exact, converged=False, require_converged=True).verdict == "unconverged"


def test_judge_with_a_standard_error(built):
    """Two-sided 95 %: |e| + 1.96 sigma <= t passes; |e| - 1.96 sigma > t fails; between is inconclusive."""
    prepared = built("h2")
    exact = prepared.reference.energy_ha
    assert api.judge(prepared, exact + 0.0005, stderr_ha=0.0002).verdict == "pass"      # 0.5 + 0.39 < 1.59
    assert api.judge(prepared, exact + 0.0010, stderr_ha=0.0005).verdict == "inconclusive"  # 1.0 +- 0.98
    assert api.judge(prepared, exact + 0.0050, stderr_ha=0.0005).verdict == "fail"      # 5.0 - 0.98 > 1.59


def test_run_methods_and_the_gate_agree_with_judge(built, tmp_path, cache_dir):
    """A gate run's stored verdicts and errors are what api.judge says for the same energies."""
    db = tmp_path / "r.sqlite"
    frame = api.run_methods(["exact-sector", "hf-bitstring"], cases=["h2", "heh-cation"], db=db,
                            cache_dir=cache_dir)
    assert len(frame) == 4 and frame.attrs["passed"] is False          # HF misses FCI by ~20 mHa
    for row in frame.itertuples():
        j = api.judge(built(row.case), row.energy_ha, variational=True)
        assert (j.verdict, j.error_mha) == (row.verdict, pytest.approx(row.error_mha, abs=1e-9))
    stored = api.load_run(frame.attrs["run_id"][:10], db)
    assert stored.decision.n_tasks == 4 and not stored.decision.passed
    assert len(stored.dataframe()) == 4
    again = api.run_methods(["exact-sector", "hf-bitstring"], cases=["h2", "heh-cation"], db=db,
                            cache_dir=cache_dir, baseline="latest")
    assert [s.run_id for s in api.list_runs(db)] == [again.attrs["run_id"], frame.attrs["run_id"]]
    comparison = api.compare(frame.attrs["run_id"], "latest", db)
    assert comparison.n_common == 4 and not comparison.regressions
