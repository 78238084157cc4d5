"""Signs of life: a running task's progress records reach the run's display; the method tasks run
longest first; the display says how long the method phase took against its first prediction."""

from __future__ import annotations

import re

import pytest

from benchsuite.report import progress as progress_module

PLUGINS = "tests.methods.plugins"


@pytest.fixture
def fast_log(monkeypatch):
    monkeypatch.setattr(progress_module, "LOG_EVERY_S", 0.5)


def _running_lines(run_cli, tmp_path, plugin: str) -> tuple[list[str], str]:
    """Run the plugin on H2 (threshold wide enough that HF passes); its log's ``running`` lines and stderr."""
    code, out, err = run_cli("run", "--case", "h2", "--method", f"{PLUGINS}:{plugin}",
                             "--db", str(tmp_path / "r.sqlite"), "--threshold-mha", "50")
    assert code == 0, err
    running = [line for line in err.splitlines() if line.strip().startswith("running h2")]
    assert running, err
    return running, err


def test_live_records_reach_the_plain_log(run_cli, tmp_path, fast_log):
    running, err = _running_lines(run_cli, tmp_path, "ReportsProgress")
    # the plugin reports iteration k with E = E_HF + 1/k and |g| = 0.5/k, throttled to one record a second
    last = running[-1]
    found = re.search(r"sweeping, iteration (\d+), E (-?\d+\.\d+) Eh, \|g\| (\d\.\de-\d\d)", last)
    assert found, last
    k = int(found.group(1))
    assert k >= 2 and float(found.group(3)) == pytest.approx(0.5 / k, rel=0.05)
    assert re.search(r"method tasks took \d+:\d\d \(predicted \d+:\d\d\)", err)


def test_hostile_records_are_dropped_field_by_field(run_cli, tmp_path, fast_log):
    running, _ = _running_lines(run_cli, tmp_path, "ReportsHostileProgress")
    for line in running:
        assert "nan" not in line and "iteration" not in line and "|g|" not in line and "\a" not in line
        assert "x" * 61 not in line                        # the stage is cut to 60 characters


class _Recorder:
    """A progress display that records the order tasks start in and the plan's predictions."""

    def __init__(self, n_tasks):
        self.started, self.clock = [], None

    def method_phase(self, clock):
        self.clock = clock
        self.predicted = {k: clock.predicted_s(k) for k in clock.pending}

    def task_started(self, task):
        self.started.append(task.key)

    def reference_done(self, *a):
        pass

    def row_done(self, row):
        pass

    def close(self):
        pass


def test_method_tasks_start_longest_first(registry, tmp_path):
    from benchsuite.gate.request import RunRequest, start_run
    from benchsuite.gate.execute import Outputs
    from benchsuite.gate.plan import RunSettings

    rec = {}

    def factory(n):
        rec["p"] = _Recorder(n)
        return rec["p"]

    req = RunRequest(suite=None, cases=["h2", "lih", "heh-cation"], methods=["hf-bitstring", "uccsd-vqe"],
                     option_items=[], settings=RunSettings(), seed=0, resume=None, workers=1, scheduler=None,
                     db=str(tmp_path / "r.sqlite"), cache_dir=str(tmp_path / "cache"), baseline=None,
                     max_increase_mha=None, allow_new=False, outputs=Outputs(), command="test")
    start_run(req, factory)
    p = rec["p"]
    costs = [p.predicted[k] for k in p.started]
    assert len(p.started) == 6 and costs == sorted(costs, reverse=True)
    assert p.started[0].startswith("lih/") and "uccsd-vqe" in p.started[0]      # the biggest sector first


@pytest.mark.parametrize("method", ["uccsd-vqe", "adapt-vqe"])
def test_builtin_solvers_report_their_iterations(method, registry, ladder_cache):
    """In-process, with a listener: the records' energies never rise (best so far) and the last one
    is the energy the method returns; PySCF FCI (the ladder's primary rung) bounds them from below."""
    from benchsuite.methods import base
    from benchsuite.methods.discovery import resolve_method
    from benchsuite.methods.problem import build_problem

    prepared = build_problem(registry.case("lih"), cache=ladder_cache)
    obj, failure = resolve_method(method)
    records = []
    base.PROGRESS_LISTENERS.append(records.append)
    try:
        result = obj.run(prepared.problem, base.resolve_options(obj, {}))
    finally:
        base.PROGRESS_LISTENERS.remove(records.append)
    energies = [r["energy_ha"] for r in records]
    assert len(records) >= 3 and all("gradient_norm" in r and "iteration" in r for r in records)
    if method == "uccsd-vqe":
        assert energies == sorted(energies, reverse=True)
    assert min(energies) >= prepared.reference.energy_ha - 1e-9
    assert energies[-1] == pytest.approx(result.energy_ha, abs=2e-6)
