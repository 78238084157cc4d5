"""The plugin contract: discovery, option checking and fault isolation in real worker processes."""

from __future__ import annotations

import importlib.metadata
import json

import pytest

from benchsuite.methods import discovery
from benchsuite.methods.problem import build_problem
from benchsuite.runner import execute

PLUGINS = "tests.methods.plugins"


def _entry_points(*pairs):
    eps = [importlib.metadata.EntryPoint(name=n, value=v, group=discovery.ENTRY_POINT_GROUP) for n, v in pairs]

    def fake(group=None, **_):
        return [e for e in eps if group in (None, e.group)]

    return fake


@pytest.fixture
def h2_problem(registry, ladder_cache):
    return build_problem(registry.case("h2"), cache=ladder_cache)


def test_entry_point_and_module_attr_plugins_run(monkeypatch, run_cli):
    monkeypatch.setattr(discovery.importlib.metadata, "entry_points",
                        _entry_points(("lab-hf", f"{PLUGINS}:HartreeFockPlugin")))
    for spec in ("lab-hf", f"{PLUGINS}:make_hf_plugin"):
        code, out, err = run_cli("solve", "h2", "--method", spec, "--format", "json")
        assert code == 0, err
        rec = json.loads(out)
        assert rec["status"] == "ok"
        # the HF determinant energy: positive error against FCI, H2/STO-3G correlation ~ 20 mHa
        assert 15 < rec["error_mha"] < 25


@pytest.mark.parametrize("attr, status, words", [
    ("Raises", "error", "solver diverged in iteration 3"),
    ("ReturnsNaN", "invalid", "not a finite number"),
    ("ReturnsText", "invalid", "not a finite number"),
    ("ReturnsFloat", "invalid", "not a MethodResult"),
    ("Hangs", "timeout", "stopped after"),
    ("BelowExact", "below-exact", "below the exact sector energy"),
    ("Aborts", "error", "SIGABRT"),
])
def test_misbehaving_plugin_gets_its_status(h2_problem, attr, status, words):
    method, failure = discovery.resolve_method(f"{PLUGINS}:{attr}")
    assert failure is None
    ref = h2_problem.reference.energy_ha
    outcome = execute(method, h2_problem.problem, timeout_s=5.0, exact_ha=ref)
    assert outcome.status == status, outcome.message
    assert words in outcome.message


def test_bad_plugins_leave_the_others_untouched(h2_problem):
    ref = h2_problem.reference.energy_ha
    statuses = []
    for attr in ("Raises", "HartreeFockPlugin", "Aborts", "ReturnsNaN", "HartreeFockPlugin"):
        method, _ = discovery.resolve_method(f"{PLUGINS}:{attr}")
        statuses.append(execute(method, h2_problem.problem, timeout_s=5.0, exact_ha=ref))
    assert [o.status for o in statuses] == ["error", "ok", "error", "invalid", "ok"]
    assert statuses[1].energy_ha == statuses[4].energy_ha


def test_broken_plugins_reported_by_name(monkeypatch, run_cli):
    monkeypatch.setattr(discovery.importlib.metadata, "entry_points", _entry_points(
        ("lab-missing", "lab_no_such_package.solver:Solver"),
        ("lab-no-run", f"{PLUGINS}:NoRun"),
        ("lab-hf", f"{PLUGINS}:HartreeFockPlugin")))
    code, out, err = run_cli("methods", "--format", "json")
    assert code == 0
    doc = json.loads(out)
    names = [m["name"] for m in doc["methods"]]
    assert "lab-hf" in names and "uccsd-vqe" in names
    broken = {b["name"]: b["reason"] for b in doc["broken_plugins"]}
    assert "import failed" in broken["lab-missing"] and "ModuleNotFoundError" in broken["lab-missing"]
    assert "no run(problem, options)" in broken["lab-no-run"]
    code, out, err = run_cli("solve", "h2", "--method", "lab-missing", "--format", "json")
    assert code == 1 and json.loads(out)["status"] == "error"


@pytest.mark.parametrize("option, words", [
    ("no_such_option=1", "has no option 'no_such_option'"),
    ("max_iterations=lots", "option 'max_iterations' of method 'uccsd-vqe' must be int"),
])
def test_unknown_or_mistyped_option_is_rejected(run_cli, option, words, tmp_path):
    code, _, err = run_cli("solve", "h2", "--method", "uccsd-vqe", "--option", option,
                           "--cache-dir", str(tmp_path / "c"))
    assert code == 2 and words in err
    assert not (tmp_path / "c").exists()


def test_unknown_method_is_an_input_error(run_cli):
    code, _, err = run_cli("solve", "h2", "--method", "no-such-method")
    assert code == 2 and "unknown method 'no-such-method'" in err
