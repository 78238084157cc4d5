"""Options are validated when they are resolved, before any reference exists; plugins that do not
say how they are to be judged, or whose entry point is misnamed, are listed as broken."""

from __future__ import annotations

import importlib.metadata
import json

import pytest

from benchsuite import cli
from benchsuite.errors import InputError
from benchsuite.methods import discovery
from benchsuite.methods.base import resolve_options
from benchsuite.methods.discovery import builtin_method, resolve_method
from tests.methods.plugins import CheckedOptions

PLUGINS = "tests.methods.plugins"


@pytest.mark.parametrize("given, words", [
    ({"layers": 0}, "option 'layers' of method 'lab-checked-options' must be >= 1, got 0"),
    ({"layers": "9"}, "must be <= 8, got 9"),
    ({"step": 0.0}, "option 'step' of method 'lab-checked-options' must be > 0.0, got 0.0"),
    ({"step": "nan"}, "must be finite"),
    ({"mode": "c"}, "must be one of ['a', 'b'], got 'c'"),
    ({"width": 3}, "option 'width' of method 'lab-checked-options' must be even, got 3"),
    ({"layers": 2.5}, "must be int"),
])
def test_bad_values_name_method_option_and_rule(given, words):
    with pytest.raises(InputError) as err:
        resolve_options(CheckedOptions(), given)
    assert words in str(err.value)
    assert err.value.field == f"lab-checked-options.{next(iter(given))}"


def test_bounds_are_inclusive_and_strings_are_converted():
    got = resolve_options(CheckedOptions(), {"layers": "8", "step": "1e-9", "width": "6", "mode": "b"})
    assert got == {"layers": 8, "step": 1e-9, "mode": "b", "width": 6}
    assert resolve_options(CheckedOptions(), {"layers": 1})["layers"] == 1


@pytest.mark.parametrize("method, given, words", [
    ("uccsd-vqe", {"max_iterations": 0}, "must be >= 1"),
    ("uccsd-vqe", {"gradient_tolerance": 0.0}, "must be > 0.0"),
    ("upccgsd-vqe", {"k": 0}, "must be >= 1"),
    ("upccgsd-vqe", {"starts": 0}, "must be >= 1"),
    ("adapt-vqe", {"gradient_threshold": -1e-3}, "must be > 0.0"),
    ("adapt-vqe", {"max_operators": -1}, "must be >= 0"),
    ("exact-sector", {"max_qubits": 0}, "must be >= 1"),
])
def test_builtin_ranges(method, given, words):
    with pytest.raises(InputError) as err:
        resolve_options(builtin_method(method), given)
    assert words in str(err.value) and method in str(err.value)


def test_methods_listing_shows_bounds(run_cli):
    code, out, _ = run_cli("methods", "--format", "json")
    opts = {o["name"]: o for m in json.loads(out)["methods"] if m["name"] == "uccsd-vqe" for o in m["options"]}
    assert opts["max_iterations"]["minimum"] == 1 and opts["gradient_tolerance"]["greater_than"] == 0.0


@pytest.mark.parametrize("method, option, words", [
    ("uccsd-vqe", "uccsd-vqe.max_iterations=0", "option 'max_iterations' of method 'uccsd-vqe' must be >= 1"),
    (f"{PLUGINS}:CheckedOptions", f"{PLUGINS}:CheckedOptions.layers=0",
     "option 'layers' of method 'lab-checked-options' must be >= 1"),
])
def test_run_with_max_iterations_zero_exits_2_before_any_reference(tmp_path, monkeypatch, capsys, method,
                                                                    option, words):
    monkeypatch.setenv("BENCHSUITE_DB", str(tmp_path / "results.sqlite"))
    monkeypatch.setenv("BENCHSUITE_CACHE", str(tmp_path / "cache"))
    monkeypatch.chdir(tmp_path)
    code = cli.main(["run", "--case", "h2", "lih", "--method", "exact-sector", "--method", method,
                     "--option", option])
    err = capsys.readouterr().err
    assert code == 2 and words in err
    cache = tmp_path / "cache"
    assert not cache.exists() or not any(cache.rglob("*")), "a reference was computed"
    assert not (tmp_path / "results.sqlite").exists()


def _entry_points(*pairs):
    eps = [importlib.metadata.EntryPoint(name=n, value=v, group=discovery.ENTRY_POINT_GROUP) for n, v in pairs]
    return lambda group=None, **_: [e for e in eps if group in (None, e.group)]


@pytest.mark.parametrize("attr", ["NoVariationalFlag", "NoStochasticFlag"])
def test_plugin_without_judging_flags_is_broken(attr):
    obj, failure = resolve_method(f"{PLUGINS}:{attr}")
    flag = "variational" if "Variational" in attr else "stochastic"
    assert obj is None and f"has no '{flag}' attribute" in failure.reason


def test_broken_plugins_listed_with_reasons(monkeypatch, run_cli):
    monkeypatch.setattr(discovery.importlib.metadata, "entry_points", _entry_points(
        ("lab-alias", f"{PLUGINS}:HartreeFockPlugin"),           # the object calls itself lab-hf
        ("lab-no-variational", f"{PLUGINS}:NoVariationalFlag"),
        ("lab-hf", f"{PLUGINS}:HartreeFockPlugin")))
    code, out, _ = run_cli("methods", "--format", "json")
    doc = json.loads(out)
    broken = {b["name"]: b["reason"] for b in doc["broken_plugins"]}
    assert "entry point is named 'lab-alias' but the method's 'name' is 'lab-hf'" in broken["lab-alias"]
    assert "has no 'variational' attribute" in broken["lab-no-variational"]
    assert "lab-hf" in [m["name"] for m in doc["methods"]] and "lab-alias" not in [m["name"] for m in doc["methods"]]
    code, out, _ = run_cli("methods")
    assert "BROKEN PLUGIN lab-alias" in out and "BROKEN PLUGIN lab-no-variational" in out


def test_broken_plugin_in_a_run_is_an_error_row(tmp_path, monkeypatch, run_cli):
    monkeypatch.setenv("BENCHSUITE_DB", str(tmp_path / "results.sqlite"))
    code, out, err = run_cli("run", "--case", "h2", "--method", f"{PLUGINS}:NoVariationalFlag",
                             "--json", str(tmp_path / "run.json"))
    rows = json.loads((tmp_path / "run.json").read_text())["results"]
    assert code == 1 and [r["verdict"] for r in rows] == ["error"]
    assert "has no 'variational' attribute" in rows[0]["message"]
