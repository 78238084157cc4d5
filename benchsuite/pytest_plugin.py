"""benchsuite as a pytest plugin: accuracy tests in a solver's own repository.

Registered through the ``pytest11`` entry point ``benchsuite`` (installing
benchsuite is enough).  Inert unless a test asks for its fixtures.

A test that takes ``bs_case`` (or ``bs_problem``) is parametrised over (case,
basis) entries with ids such as ``h2/sto-3g``: those of the marker
``@pytest.mark.benchsuite_cases("h2", "lih", basis=None)`` or
``@pytest.mark.benchsuite_cases(suite="core")`` when present, else of
``--bs-suite`` / ``--bs-case``, else of the ``smoke`` suite.

Fixtures:

* ``bs_case`` -- the :class:`~benchsuite.registry.registry.SuiteEntry` (``.case``, ``.basis``);
* ``bs_problem`` -- the :class:`~benchsuite.methods.problem.PreparedProblem` the gate would
  build (``.problem`` is the :class:`~benchsuite.methods.base.QubitProblem`, ``.problem.views``
  its other forms, ``.reference`` the primary rung);
* ``bs_accuracy`` -- ``bs_accuracy(result_or_energy_ha, method=..., ...)`` judges as the gate
  does (:func:`benchsuite.api.assess`), records the result and raises :class:`AccuracyError`
  (an ``AssertionError``) naming case, basis, energy, reference and its rung, error in mHa,
  threshold and its source and the verdict when the verdict fails the gate.

Every recorded result of a session is stored as ONE run in the results database
(``--bs-db``; source ``pytest``; provenance: the solver distribution's version and commit,
``--bs-solver``, and each row's pytest node id), so ``benchsuite runs``, ``compare``,
``report`` and ``table`` work on it.  The run's gate decision is computed once at the end
(:func:`benchsuite.gate.decision.decide`, with ``--bs-baseline``); if it fails -- a baseline
regression, say -- the session fails.  Under pytest-xdist only the controller writes the
database: each worker appends its rows to a spool file (synced as each test finishes) in a folder
the controller made, and the controller reads them all at the end.  A test that used pytest-benchmark's ``benchmark``
fixture (and ran with benchmarking enabled) gets its mean time per round as the row's
``seconds`` and the statistics in ``metadata["benchmark"]``.
"""

from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

import pytest

from benchsuite.defaults import DEFAULT_SUITE

MARKER = "benchsuite_cases"
_SPOOL_KEY = "benchsuite_spool"


class AccuracyError(AssertionError):
    """An accuracy assertion that failed: the verdict fails the gate."""


# -- options and configuration -------------------------------------------------------------

def pytest_addoption(parser) -> None:
    g = parser.getgroup("benchsuite", "benchsuite accuracy gate")
    g.addoption("--bs-suite", default=None, metavar="NAME", help=f"suite to parametrise over (default {DEFAULT_SUITE})")
    g.addoption("--bs-case", action="append", default=[], metavar="NAME",
                help="case (or scan, or shell pattern) to parametrise over, repeatable; instead of --bs-suite")
    g.addoption("--bs-basis", default=None, metavar="BASIS", help="run every case in this basis")
    g.addoption("--bs-threshold-mha", type=float, default=None, metavar="X",
                help="pass threshold in mHa (default: case, then suite, then 1 kcal/mol)")
    g.addoption("--bs-encoding", default="jordan-wigner", help="jordan-wigner | bravyi-kitaev | parity")
    g.addoption("--bs-ordering", default="interleaved", help="interleaved | blocked")
    g.addoption("--bs-db", default=None, metavar="FILE",
                help="results database (default $BENCHSUITE_DB or .benchsuite/results.sqlite)")
    g.addoption("--bs-baseline", default=None, metavar="RUN_ID",
                help="compare the session's run with this stored run (id, prefix or 'latest'); "
                     "a regression fails the session")
    g.addoption("--bs-max-increase-mha", type=float, default=None, metavar="X",
                help="|error| growth counted as a regression (default 0.1 mHa)")
    g.addoption("--bs-allow-new", action="store_true", help="results absent from the baseline do not fail")
    g.addoption("--bs-solver", default=None, metavar="DIST",
                help="distribution whose version and commit are recorded (default: the name in the "
                     "rootdir's pyproject.toml)")
    g.addoption("--bs-cache-dir", default=None, metavar="DIR", help="reference cache directory")
    g.addoption("--bs-no-store", action="store_true", help="judge but store nothing")


@dataclass
class SessionState:
    """What the plugin knows about the session (one per process)."""

    settings: object
    encoding: object
    suite: str | None
    cases: list[str]
    threshold_mha: float | None
    db: Path
    cache_dir: str | None
    baseline_id: str | None
    started_at: str
    rows: dict = field(default_factory=dict)        # task_key -> ResultRow (the controller's)
    run_id: str | None = None
    decision: object = None
    error: str | None = None


_STATE = pytest.StashKey[SessionState]()
_ITEM_ROWS = pytest.StashKey[list]()
_ITEM_START = pytest.StashKey[float]()
_SPOOL = pytest.StashKey[Path]()
_STARTED = pytest.StashKey[str]()


def is_worker(config) -> bool:
    """An xdist worker (it has ``workerinput``); only the controller writes the store."""
    return hasattr(config, "workerinput")


def pytest_configure(config) -> None:
    config.addinivalue_line("markers", f"{MARKER}(*cases, suite=None, basis=None): the (case, basis) "
                                       "entries a benchsuite accuracy test runs over")


def _state(config) -> SessionState:
    """The session's settings, made (and checked: UsageError) on first use."""
    if _STATE not in config.stash:
        config.stash[_STATE] = _make_state(config)
    return config.stash[_STATE]


def _make_state(config) -> SessionState:
    from benchsuite.errors import InputError
    from benchsuite.gate.plan import RunSettings
    from benchsuite.methods.problem import Encoding
    from benchsuite.store.db import default_db_path
    from benchsuite.store.records import utc_now

    opt = config.getoption
    try:
        enc = Encoding(opt("bs_encoding"), opt("bs_ordering")).check()
    except InputError as exc:
        raise pytest.UsageError(f"benchsuite: {exc}") from None
    threshold = opt("bs_threshold_mha")
    if threshold is not None and not threshold > 0:
        raise pytest.UsageError("benchsuite: --bs-threshold-mha must be positive")
    settings = RunSettings(basis=opt("bs_basis"), threshold_mha=threshold, encoding=asdict(enc))
    return SessionState(settings=settings, encoding=enc, suite=opt("bs_suite"), cases=list(opt("bs_case")),
                        threshold_mha=threshold, db=Path(opt("bs_db") or default_db_path()),
                        cache_dir=opt("bs_cache_dir"), baseline_id=None,
                        started_at=config.stash.get(_STARTED, None) or utc_now())


def pytest_sessionstart(session) -> None:
    """Check ``--bs-suite`` / ``--bs-case`` and, on the controller, resolve ``--bs-baseline`` before any
    test runs: a bad name or id is a usage error."""
    config = session.config
    from benchsuite.store.records import utc_now

    config.stash[_STARTED] = utc_now()
    opt = config.getoption
    if not (opt("bs_suite") or opt("bs_case") or opt("bs_db") or opt("bs_baseline")):
        return                                     # inert in sessions that do not use benchsuite
    from benchsuite import api
    from benchsuite.errors import InputError
    from benchsuite.store.db import ResultStore

    state = _state(config)
    if state.suite or state.cases:
        try:
            api.select(state.suite, state.cases or None, state.settings.basis)
        except InputError as exc:
            raise pytest.UsageError(f"benchsuite: {exc}") from None
    if is_worker(config):
        return
    from benchsuite.gate.plan import check_output_path

    try:
        check_output_path(state.db, "--bs-db")
    except InputError as exc:
        raise pytest.UsageError(f"benchsuite: {exc}") from None
    spec = config.getoption("bs_baseline")
    if spec is None:
        return
    try:
        with ResultStore.open(state.db, create=False) as store:
            state.baseline_id = store.resolve_run_id(spec)
    except InputError as exc:
        raise pytest.UsageError(f"benchsuite: --bs-baseline: {exc}") from None


# -- parametrisation and fixtures ----------------------------------------------------------

def case_id(entry) -> str:
    """The test id of a (case, basis) entry: ``case/basis``, e.g. ``h2/sto-3g``."""
    return f"{entry.case.name}/{entry.basis.label}"


def _selection(marker, state: SessionState) -> tuple[str | None, list[str], str | None]:
    """``(suite, case names, basis)`` of a test: its marker's, else the command line's, else the
    default suite.  The suite (None for named cases) also supplies a threshold."""
    if marker is not None:
        suite, names = marker.kwargs.get("suite"), list(marker.args)
        basis = marker.kwargs.get("basis") or state.settings.basis
    else:
        suite, names, basis = state.suite, list(state.cases), state.settings.basis
    if not suite and not names:
        suite = DEFAULT_SUITE
    return suite, names, basis


def _entries(metafunc) -> list:
    from benchsuite import api
    from benchsuite.errors import InputError

    suite, names, basis = _selection(metafunc.definition.get_closest_marker(MARKER), _state(metafunc.config))
    try:
        return api.select(suite, names or None, basis)
    except InputError as exc:
        raise pytest.UsageError(f"benchsuite: {metafunc.definition.nodeid}: {exc}") from None


def pytest_generate_tests(metafunc) -> None:
    if "bs_case" in metafunc.fixturenames:
        entries = _entries(metafunc)
        metafunc.parametrize("bs_case", entries, ids=[case_id(e) for e in entries])


@pytest.fixture
def bs_case(request):
    """The (case, basis) entry of this test (parametrised by the plugin)."""
    return request.param


@pytest.fixture
def bs_problem(request, bs_case):
    """The problem the gate would hand a method for this entry (references computed or cached)."""
    from benchsuite import api

    state = _state(request.config)
    enc = state.encoding
    return api.build_problem(bs_case.case, bs_case.basis.label, enc.name, enc.ordering, enc.taper,
                             enc.drop_spin_parity_qubits, cache_dir=state.cache_dir)


@pytest.fixture
def bs_accuracy(request, bs_case, bs_problem):
    """``check(result_or_energy_ha, method=None, *, stderr_ha=None, state=None, converged=None,
    variational=True, options=None)`` -> :class:`~benchsuite.api.Assessment`; raises
    :class:`AccuracyError` when the verdict fails the gate.  ``method`` names what is tested
    (default: the test function's name) and with ``case``, ``basis``, ``space`` and encoding
    identifies the result across runs (baselines)."""

    def check(result, method: str | None = None, **kw):
        __tracebackhide__ = True
        return assert_accurate(request, bs_case, bs_problem, result, method, **kw)

    return check


# -- judging and recording -----------------------------------------------------------------

def failure_message(row, threshold_source: str) -> str:
    """One paragraph: case, basis, energy, reference and its rung, error in mHa, threshold and its
    source, verdict word, and the gate's message when it has one."""
    def num(x, spec):
        return "n/a" if x is None else format(x, spec)

    ref = (f"{row.reference_method} {num(row.reference_energy_ha, '.10f')} Eh" if row.reference_method
           else "no reference")
    text = (f"{row.case} ({row.basis}): {row.method} energy {num(row.energy_ha, '.10f')} Eh vs {ref}: "
            f"error {num(row.error_mha, '+.4f')} mHa, threshold {row.threshold_mha:.4f} mHa ({threshold_source}): "
            f"verdict {row.verdict}")
    message = (row.message or "").strip().split("\n")[0]
    return text + (f" -- {message}" if message else "")


def assert_accurate(request, entry, problem, result, method: str | None = None, *, stderr_ha=None, state=None,
                    converged=None, variational: bool = True, options: dict | None = None):
    """Judge ``result`` (a MethodResult or an energy in Eh), record it, raise when it fails the gate."""
    __tracebackhide__ = True
    from benchsuite import api
    from benchsuite.scoring import is_failing

    st = _state(request.config)
    method = method or request.node.originalname
    suite = _selection(request.node.get_closest_marker(MARKER), st)[0]
    a = api.assess(problem, result, stderr_ha=stderr_ha, state=state, converged=converged,
                   variational=variational, threshold_mha=st.threshold_mha, suite=suite, method_name=method)
    row = _row(request, entry, problem, a, method, dict(options or {}), suite)
    request.node.stash.setdefault(_ITEM_ROWS, []).append(row)
    if is_failing(row.verdict):
        raise AccuracyError(failure_message(row, a.threshold_source))
    return a


def _row(request, entry, problem, a, method: str, options: dict, suite: str | None):
    from benchsuite import api
    from benchsuite.gate.judge import task_row
    from benchsuite.gate.plan import RunPlan
    from benchsuite.methods.export import problem_figures
    from benchsuite.runner import Task
    from benchsuite.store.records import task_key

    st = _state(request.config)
    enc = st.encoding
    suite_obj = api.load_registry().suites.get(suite) if suite else None
    plan = RunPlan(suite_obj, suite, [], [], {}, {method: options}, enc, st.settings, [])
    task = Task(entry.case, entry.basis, enc, method, options,
                task_key(entry.case.name, entry.basis.label, enc.label, method, options))
    started = request.node.stash.get(_ITEM_START, time.perf_counter())
    fields = {**a.fields, "seconds": time.perf_counter() - started, "problem": problem_figures(problem)}
    fields["metadata"] = {**fields.get("metadata", {}), "pytest_node": request.node.nodeid}
    return task_row("pending", task, fields, problem.ladder, plan)


def _benchmark_stats(item) -> dict | None:
    """pytest-benchmark's statistics of this test (seconds), if it used the fixture with timing on."""
    bench = getattr(item, "funcargs", {}).get("benchmark")
    stats = getattr(getattr(bench, "stats", None), "stats", None)
    if stats is None or not getattr(stats, "rounds", 0):
        return None
    return {"mean_s": float(stats.mean), "min_s": float(stats.min), "stddev_s": float(stats.stddev),
            "rounds": int(stats.rounds)}


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_call(item):
    item.stash[_ITEM_START] = time.perf_counter()
    yield
    rows = item.stash.get(_ITEM_ROWS, [])
    if not rows:
        return
    from dataclasses import replace

    bench = _benchmark_stats(item)
    if bench is not None:
        rows = [replace(r, seconds=bench["mean_s"], metadata={**r.metadata, "benchmark": bench}) for r in rows]
    _collect(item.config, rows)
    item.stash[_ITEM_ROWS] = []


def _collect(config, rows) -> None:
    """Rows finished by one test: kept by the controller; an xdist worker appends them to its spool file."""
    if is_worker(config):
        _spool_rows(config, rows)
        return
    state = _state(config)
    for r in rows:
        state.rows[r.task_key] = r


def _spool_rows(config, rows) -> None:
    """One JSON line per row in ``<spool>/<worker id>-<pid>.jsonl``, flushed and synced before the
    test is reported, so a worker that dies later loses nothing already finished."""
    import json
    import os

    path = Path(config.workerinput[_SPOOL_KEY]) / f"{config.workerinput.get('workerid', 'w')}-{os.getpid()}.jsonl"
    with open(path, "a", encoding="utf-8") as fh:
        for r in rows:
            fh.write(json.dumps(r.to_json_dict(), allow_nan=False) + "\n")
        fh.flush()
        os.fsync(fh.fileno())


@pytest.hookimpl(optionalhook=True)
def pytest_configure_node(node) -> None:
    """xdist controller, for each worker it starts: the spool folder the worker writes its rows to."""
    import tempfile

    config = node.config
    if _SPOOL not in config.stash:
        config.stash[_SPOOL] = Path(tempfile.mkdtemp(prefix="benchsuite-spool-"))
    node.workerinput[_SPOOL_KEY] = str(config.stash[_SPOOL])


def _read_spool(config) -> None:
    """The controller takes in every worker's rows (a torn last line of a killed worker is skipped)
    and removes the spool folder."""
    import json
    import shutil

    from benchsuite.store.records import ResultRow

    folder = config.stash.get(_SPOOL, None)
    if folder is None:
        return
    rows = []
    for path in sorted(folder.glob("*.jsonl")):
        for line in path.read_text(encoding="utf-8").splitlines():
            try:
                rows.append(ResultRow(**json.loads(line)))
            except (ValueError, TypeError):
                continue
    _collect(config, rows)
    shutil.rmtree(folder, ignore_errors=True)


# -- the session's run ---------------------------------------------------------------------

@pytest.hookimpl(tryfirst=True)
def pytest_sessionfinish(session, exitstatus) -> None:
    config = session.config
    if is_worker(config):
        return
    _read_spool(config)
    if _STATE not in config.stash or not config.stash[_STATE].rows or config.getoption("bs_no_store"):
        return
    import sqlite3

    from benchsuite.errors import InputError

    from benchsuite.pytest_session import store_session_run

    state = config.stash[_STATE]
    try:
        state.decision, state.run_id = store_session_run(config, state)
    except (InputError, OSError, sqlite3.Error, ValueError) as exc:
        state.error = f"the session's results were not stored: {exc}"
        session.exitstatus = pytest.ExitCode.USAGE_ERROR if isinstance(exc, InputError) \
            else pytest.ExitCode.INTERNAL_ERROR
        return
    if not state.decision.passed and session.exitstatus == 0:
        session.exitstatus = pytest.ExitCode.TESTS_FAILED


def pytest_terminal_summary(terminalreporter, exitstatus, config) -> None:
    state = config.stash.get(_STATE, None)
    tr = terminalreporter
    if getattr(state, "error", None):
        tr.write_sep("-", "benchsuite")
        tr.write_line(state.error)
    decision = getattr(state, "decision", None)
    if decision is None:
        return
    from benchsuite.report.terminal import baseline_lines

    tr.write_sep("-", "benchsuite")
    counts = ", ".join(f"{k} {v}" for k, v in sorted(decision.counts.items()))
    tr.write_line(f"run {state.run_id}: {decision.n_tasks} result(s) ({counts}) stored in {state.db}")
    if decision.baseline is not None:
        for line in baseline_lines(decision.baseline):
            tr.write_line(line)
    tr.write_line("gate " + ("passed" if decision.passed else "FAILED: " + "; ".join(decision.reasons)))
