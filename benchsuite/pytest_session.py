"""A pytest session's judged results as one stored run (used by :mod:`benchsuite.pytest_plugin`).

:func:`store_session_run` gives the rows one run id, stores the run record (source ``pytest``,
the solver's version and commit from :func:`solver_provenance`, the pytest node ids), finalises the
verdicts over the run (:func:`benchsuite.gate.judge.final_rows`), compares with the baseline and
stores the one gate decision (:func:`benchsuite.gate.decision.decide`), exactly as a
``benchsuite run`` does at its end.
"""

from __future__ import annotations

from pathlib import Path

from benchsuite.defaults import DEFAULT_SUITE


def solver_provenance(config) -> dict:
    """``{"package", "version", "commit", "dirty", "source"}`` of the solver under test: ``--bs-solver``,
    else the ``[project] name`` of the rootdir's pyproject.toml.  Version and git state are those of
    the code actually imported (its ``__version__`` and the checkout holding it), falling back to the
    installed distribution's record and then to the rootdir's checkout."""
    import tomllib

    from benchsuite.store.provenance import distribution_git_state, git_state

    name = config.getoption("bs_solver")
    pyproject = Path(config.rootpath) / "pyproject.toml"
    if name is None and pyproject.is_file():
        name = tomllib.loads(pyproject.read_text()).get("project", {}).get("name")
    module = None if name is None else name.replace("-", "_")
    found = distribution_git_state(name, module)
    version, where = _imported(module)
    if version is not None:
        found["version"] = version
    for folder in ([where] if where is not None else []) + [Path(config.rootpath)]:
        state = git_state(folder)
        if state["commit"] is not None:
            found.update(state, source=str(folder))
            break
    return found


def _imported(module: str | None) -> tuple[str | None, Path | None]:
    """``(__version__, folder)`` of the solver's top-level module as this session imports it."""
    import importlib

    if module is None:
        return None, None
    try:
        mod = importlib.import_module(module)
    except Exception:
        return None, None
    version = getattr(mod, "__version__", None)
    origin = getattr(mod, "__file__", None)
    return (None if version is None else str(version)), (None if origin is None else Path(origin).parent)


def _run_record(config, state, run_id: str, rows: list):
    from dataclasses import replace

    from benchsuite.gate.execute import new_run_record
    from benchsuite.gate.plan import RunPlan

    methods = sorted({r.method for r in rows})
    cases = sorted({r.case for r in rows})
    plan = RunPlan(None, state.suite, cases, [], {m: (None, None) for m in methods}, {m: {} for m in methods},
                   state.encoding, state.settings, [])
    run = new_run_record(plan, run_id, " ".join(["pytest"] + list(config.invocation_params.args)))
    solver = solver_provenance(config)
    nodes = sorted({r.metadata.get("pytest_node", "") for r in rows})
    suite = state.suite or (None if state.cases else DEFAULT_SUITE)
    return replace(run, started_at=state.started_at, suite=suite, plugin_git={m: solver for m in methods},
                   summary={**run.summary, "source": "pytest", "solver": solver,
                            "pytest": {"rootdir": str(config.rootpath), "nodes": nodes,
                                       "workers": getattr(config.option, "numprocesses", None)}})


def store_session_run(config, state):
    """Store the session's rows as one run, finalise the verdicts, compare with the baseline and
    decide once; returns ``(GateDecision, run_id)``."""
    from dataclasses import replace

    from benchsuite.gate.execute import Execution, conclude
    from benchsuite.gate.judge import final_rows
    from benchsuite.store.db import ResultStore
    from benchsuite.store.provenance import new_run_id

    run_id = new_run_id()
    rows = [replace(r, run_id=run_id) for _, r in sorted(state.rows.items())]
    run = _run_record(config, state, run_id, rows)
    ex = Execution(baseline_id=state.baseline_id, max_increase_mha=config.getoption("bs_max_increase_mha"),
                   allow_new=config.getoption("bs_allow_new"))
    with ResultStore.open(state.db) as store:
        store.begin_run(run)
        final = final_rows(rows, state.settings)
        for row in final:
            store.add_result(row)            # row by row: a busy store keeps them in the side file
        decision = conclude(store, run, final, state.settings, ex)
    return decision, run_id
