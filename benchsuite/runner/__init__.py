"""Running methods with fault isolation.

:func:`execute` runs one method on one problem in a worker process (the
``forkserver`` start method: workers are forked from a clean server that never
ran OpenMP code, so PySCF's threads cannot deadlock a child).  A method that
raises, kills its own process, overruns its time budget or memory limit,
returns NaN or a non-number, or breaks the result contract gets a status and
a message; it never stops the caller.

Each worker is contained (:mod:`benchsuite.runner.isolation`): its own
process group, killed as a whole on timeout, interrupt or when the run's
main process dies; an address-space limit (``max_memory_mb``, default
:data:`DEFAULT_MAX_MEMORY_MB` MiB); its stdout/stderr captured at the file
descriptor level into the task's ``captured_output`` (the last 16 kB), never
mixed into the command's own output.  A method task without a time budget
gets :data:`DEFAULT_TIMEOUT_S` seconds; pass ``math.inf`` for none.

What a worker sends back is JSON, checked in the worker and again in the
parent (:mod:`benchsuite.runner.contract`).  The worker also measures <N>,
<S_z> and <S^2> of the state the method returned
(:func:`benchsuite.methods.statecheck.check_state`, into
``metadata["state_check"]``, overwriting anything the method put there) and
reports only ``ok``/``error``/``timeout``/``invalid``; whether a completed
result is ``below-exact`` or ``wrong-state`` is decided in the parent by
:func:`benchsuite.scoring.result_status` (:func:`judged_fields` here for
:func:`execute`, :func:`benchsuite.gate.judge.task_row` for a grid).
"""

from __future__ import annotations

import math
import multiprocessing as mp
import os
import pickle
import signal
import time
import traceback
from dataclasses import asdict, dataclass, field, fields as dataclass_fields

from benchsuite.errors import Refused
from benchsuite.methods.base import PROGRESS_LISTENERS, MethodResult, QubitProblem, resolve_options
from benchsuite.runner import contract
from benchsuite.runner.contract import Breach, bounded_text, short_repr
from benchsuite.runner.cost import CostModel, TaskClock, TaskSize, longest_first
from benchsuite.runner.isolation import (DEFAULT_MAX_MEMORY_MB, DEFAULT_TIMEOUT_S, Capture, InterruptGuard,
                                         Isolation, RunInterrupted, budget, end_worker, enter_isolation,
                                         flush_c_output, kill_group, shutdown_forkserver)
from benchsuite.scoring import result_status

__all__ = ["DEFAULT_MAX_MEMORY_MB", "DEFAULT_TIMEOUT_S", "DaskPool", "DirectJob", "GridConfig", "Job", "JobDone",
           "LadderJob", "LocalPool", "MethodJob", "Outcome", "RunInterrupted", "Task", "execute", "judged_fields",
           "run_grid", "validate_result", "work"]

_PRELOAD = ["benchsuite.methods.builtin", "benchsuite.methods.ucc", "benchsuite.qubit.sector"]


@dataclass
class Outcome:
    """A finished task, as plain data (what the store, scoring and reports consume).

    ``captured_output`` is the end of what the worker wrote to its stdout and
    stderr (at most 16 kB, with a note when cut).
    """

    method: str
    status: str
    energy_ha: float | None = None
    stderr_ha: float | None = None
    converged: bool | None = None
    iterations: int | None = None
    seconds: float = 0.0
    message: str = ""
    parameters: list | None = None
    resources: dict = field(default_factory=dict)
    metadata: dict = field(default_factory=dict)
    captured_output: str = ""

    def to_dict(self) -> dict:
        return asdict(self)


_OUTCOME_FIELDS = {f.name for f in dataclass_fields(Outcome)} - {"method"}


def _context():
    ctx = mp.get_context("forkserver")
    try:
        ctx.set_forkserver_preload(_PRELOAD)
    except Exception:  # pragma: no cover - preload is an optimisation only
        pass
    return ctx


def timeout_fields(seconds: float, limit_s: float) -> dict:
    return {"status": "timeout", "seconds": seconds, "message": f"stopped after {limit_s:g} s (time budget)"}


def died_fields(exit_code: int | None, seconds: float, detail: str = "") -> dict:
    """A worker that ended without a result: its signal (``os.abort`` -> SIGABRT) or exit code."""
    how = (f"signal {signal.Signals(-exit_code).name}" if exit_code is not None and exit_code < 0
           else f"exit code {exit_code}")
    return {"status": "error", "seconds": seconds,
            "message": f"worker process died ({how}) before returning a result" + (f": {detail}" if detail else "")}


def unsendable_fields(exc: Exception) -> dict:
    """The same answer from ``solve`` and ``run`` for a method object that does not pickle."""
    return {"status": "error", "message": f"method object cannot be sent to a worker process "
                                          f"({bounded_text(str(exc), 500)}); define the class at module level "
                                          "and keep unpicklable state (locks, open files) out of it"}


def validate_result(result, method_name: str, problem: QubitProblem | None = None) -> dict:
    """Turn what a method returned into Outcome fields; contract breaches become ``invalid``.

    Types, ranges and sizes are checked and normalised
    (:func:`benchsuite.runner.contract.result_fields`); with ``problem``, the returned state is
    checked (:func:`benchsuite.methods.statecheck.check_state`) into ``metadata["state_check"]``.
    The status is ``ok`` or ``invalid``: the energy is judged later, in the parent.
    """
    from benchsuite.methods.statecheck import StateError, check_state

    if not isinstance(result, MethodResult):
        return {"status": "invalid",
                "message": f"{method_name} returned {type(result).__name__} {short_repr(result)}, "
                           "not a MethodResult"}
    try:
        fields = contract.result_fields(result)
        if problem is not None:
            try:
                check = check_state(problem, result.state)
            except StateError as exc:
                raise Breach(f"state: {exc}") from None
            fields["metadata"] = {**fields["metadata"], "state_check": contract.metadata(check)}
    except Breach as exc:
        return {"status": "invalid", "message": f"{method_name} returned {exc}"}
    return {"status": "ok", "message": "", **fields}


def judged_fields(fields: dict, reference_ha: float | None, sector_ha: float | None,
                  variational: bool) -> dict:
    """``fields`` (already checked by the parent) with the status of a completed result decided:
    ``ok``, ``below-exact`` or ``wrong-state`` (:func:`benchsuite.scoring.result_status`)."""
    if fields.get("status") != "ok" or fields.get("energy_ha") is None:
        return fields
    if "measurement" in (fields.get("metadata") or {}):
        variational = False                # a shot estimate may dip below the exact energy
    check = (fields.get("metadata") or {}).get("state_check")
    status, message = result_status(fields["energy_ha"], reference_ha, sector_ha, variational,
                                    check if isinstance(check, dict) else None)
    return {**fields, "status": status, "message": message or fields.get("message", "")}


def exception_fields(exc: BaseException) -> dict:
    """An ``error`` for an exception a method raised: its type, bounded text and innermost frames."""
    if isinstance(exc, SystemExit):
        return {"status": "error", "message": f"the method called sys.exit({short_repr(exc.code)})"}
    try:
        text = bounded_text(str(exc), 8192)
    except Exception:
        text = "(its text could not be formed)"
    if isinstance(exc, Refused):
        return {"status": "error", "message": text}
    note = ""
    if isinstance(exc, MemoryError):
        note = "\n" + _memory_limit_note()
    frames = "".join(traceback.format_tb(exc.__traceback__)[-6:])
    return {"status": "error", "message": bounded_text(f"{type(exc).__name__}: {text}{note}\n{frames}")}


def _memory_limit_note() -> str:
    import resource

    soft, _ = resource.getrlimit(resource.RLIMIT_AS)
    if soft == resource.RLIM_INFINITY:
        return "(no memory limit was set)"
    return f"(the worker's memory limit is {soft / 2**20:g} MiB: max_memory_mb)"


def _run_here(method, problem: QubitProblem, options: dict, shots=None) -> dict:
    """Run the method, then (``shots``, a :class:`benchsuite.qubit.measurement.ShotPlan`) measure its state."""
    t0 = time.perf_counter()
    try:
        result = method.run(problem, options)
        if shots is not None and isinstance(result, MethodResult):
            from benchsuite.methods.builtin import measured

            result = measured(result, problem, shots)
        fields = validate_result(result, method.name, problem)
    except (Exception, SystemExit) as exc:
        fields = exception_fields(exc)
    fields["seconds"] = time.perf_counter() - t0
    return fields


def execute(method, problem: QubitProblem, options: dict | None = None, timeout_s: float | None = None,
            exact_ha: float | None = None, isolate: bool = True, max_memory_mb: float | None = None,
            sector_ha: float | None = None, shots=None) -> Outcome:
    """Run ``method`` on ``problem`` and classify what happened.

    ``options`` are validated here (an unknown option is an input error before
    any work).  ``exact_ha`` is the declared-spin reference and ``sector_ha`` the
    lowest (N, S_z) energy of any spin (None: equal to ``exact_ha``), used for the
    ``below-exact``/``wrong-state`` checks (:func:`judged_fields`, in this process for
    both paths).  ``timeout_s`` and ``max_memory_mb``: ``None`` means
    :data:`DEFAULT_TIMEOUT_S` and :data:`DEFAULT_MAX_MEMORY_MB`, ``math.inf`` means no limit.
    ``shots`` (a :class:`benchsuite.qubit.measurement.ShotPlan`) measures the returned state.
    """
    opts = resolve_options(method, options or {})
    name = method.name
    variational = bool(getattr(method, "variational", False))
    if not isolate:
        fields = contract.checked_fields(_run_here(method, problem, opts, shots), needs_energy=True)
    else:
        try:
            job = Job.of(DirectJob(method, problem, opts, shots), budget(timeout_s, DEFAULT_TIMEOUT_S),
                         budget(max_memory_mb, DEFAULT_MAX_MEMORY_MB))
        except Exception as exc:
            return Outcome(method=name, **unsendable_fields(exc))
        with InterruptGuard() as guard:
            pool = LocalPool(1, guard)
            try:
                (done,) = pool.run([job])
            finally:
                pool.close()
        fields = done.fields
    fields = judged_fields(fields, exact_ha, sector_ha, variational)
    return Outcome(method=name, **{k: v for k, v in fields.items() if k in _OUTCOME_FIELDS})


# =============================================================================
# The case x method grid
# =============================================================================

@dataclass(frozen=True)
class Task:
    """One unit of work: a method on a (case, basis) in one encoding, with options."""

    case: object            # registry Case (a frozen dataclass, picklable)
    basis: object           # registry Basis
    encoding: object        # methods.problem.Encoding
    method: str             # the spec as given: built-in name, entry point or module:attr
    options: dict
    key: str
    shots: object = None    # qubit.measurement.ShotPlan: the measurement stage after the method, or None


@dataclass(frozen=True)
class LadderJob:
    """Compute (and cache) the reference ladder of one (case, basis) in a worker."""

    case: object            # registry Case
    basis: object           # registry Basis
    cache_dir: str | None
    max_determinants: int

    def run(self) -> dict:
        from benchsuite.chem.cache import DiskCache
        from benchsuite.chem.ladder import reference_ladder

        t0 = time.perf_counter()
        lad = reference_ladder(self.case, self.basis, cache=DiskCache(self.cache_dir),
                               max_determinants=self.max_determinants)
        primary = lad.primary
        return {"status": "ok", "seconds": time.perf_counter() - t0, "cache": lad.cache_status,
                "primary_status": None if primary is None else primary.status}


@dataclass(frozen=True)
class MethodJob:
    """Build a task's problem (from the cached references) and run its method on it in a worker.

    ``timeout_s`` is the method's time budget in seconds (handed to it as ``problem.time_budget_s``)."""

    task: Task
    method: object          # the method object from discovery
    cache_dir: str | None
    seed: int
    timeout_s: float | None
    max_determinants: int

    def run(self) -> dict:
        from benchsuite.chem.cache import DiskCache
        from benchsuite.methods.problem import build_problem
        from benchsuite.methods.export import problem_figures

        t = self.task
        prepared = build_problem(t.case, t.basis, t.encoding, cache=DiskCache(self.cache_dir), seed=self.seed,
                                 time_budget_s=self.timeout_s, max_determinants=self.max_determinants)
        fields = _run_here(self.method, prepared.problem, resolve_options(self.method, t.options), t.shots)
        fields["problem"] = problem_figures(prepared)
        return fields


@dataclass(frozen=True)
class DirectJob:
    """Run a method on a problem already built (:func:`execute`)."""

    method: object
    problem: QubitProblem
    options: dict
    shots: object = None

    def run(self) -> dict:
        return _run_here(self.method, self.problem, self.options, self.shots)


@dataclass
class Job:
    """A job for a worker and how to contain it.

    ``work`` is what to do (a :class:`LadderJob`, :class:`MethodJob` or
    :class:`DirectJob`, kept in the parent), ``payload`` its pickle (sent to
    the worker).  ``timeout_s``/``max_memory_mb``: ``None`` means no limit
    (defaults are applied by the caller).  ``needs_energy``: an ``ok`` answer
    must carry an energy (method jobs; reference ladder jobs return none).
    """

    work: object
    payload: bytes
    timeout_s: float | None
    max_memory_mb: float | None = None
    needs_energy: bool = True

    @classmethod
    def of(cls, work, timeout_s: float | None, max_memory_mb: float | None = None,
           needs_energy: bool = True) -> "Job":
        """Package ``work``; raises whatever pickling raises (a method object that cannot be sent)."""
        return cls(work, pickle.dumps(work), timeout_s, max_memory_mb, needs_energy)


@dataclass
class JobDone:
    """A finished job and the checked fields its worker (or the pool, for a timeout or a death) gave."""

    job: Job
    fields: dict


def work(job) -> dict:
    """Run one job (a job object, or its pickle) in this process and return plain fields; never raises."""
    t0 = time.perf_counter()
    try:
        if isinstance(job, bytes):
            job = pickle.loads(job)
        if not isinstance(job, (LadderJob, MethodJob, DirectJob)):
            raise TypeError(f"not a job: {type(job).__name__}")
        return job.run()
    except (Exception, SystemExit) as exc:
        return {**exception_fields(exc), "seconds": time.perf_counter() - t0}


def _contained_work(payload: bytes, iso: Isolation, capture_fd: int | None) -> bytes:
    """In a fresh worker: contain it, run the job, answer in checked JSON."""
    enter_isolation(iso, capture_fd)
    fields = work(payload)
    flush_c_output()
    return contract.encode_fields(fields)


#: A worker forwards at most one progress record per this many seconds (the latest one).
PROGRESS_INTERVAL_S = 1.0


class _ProgressSender:
    """A progress listener in a worker: sends the method's records to the parent, throttled."""

    def __init__(self, conn):
        self.conn, self.last = conn, -math.inf

    def __call__(self, record: dict) -> None:
        now = time.monotonic()
        if now - self.last >= PROGRESS_INTERVAL_S:
            self.last = now
            self.conn.send_bytes(contract.encode_progress(record))


def _pool_child(payload: bytes, iso: Isolation, conn, capture_fd: int) -> None:
    PROGRESS_LISTENERS.append(_ProgressSender(conn))
    answer = _contained_work(payload, iso, capture_fd)
    PROGRESS_LISTENERS.clear()
    conn.send_bytes(answer)
    conn.close()


#: :meth:`LocalPool._receive`'s answer for a progress record: the job goes on.
_STILL_RUNNING = object()


@dataclass
class _Running:
    job: Job
    proc: object
    started: float
    capture: Capture


class LocalPool:
    """Up to ``workers`` forkserver processes, one per job, each killable on its own.

    A pool of long-lived workers (concurrent.futures) cannot stop one stuck task
    and breaks entirely when a worker dies; one process per job costs a fork
    from the preloaded server (milliseconds) and isolates every fault.  Every
    answer carries ``captured_output``.  ``guard`` (an active
    :class:`InterruptGuard`) is checked between polls: on SIGTERM/SIGINT the
    run raises :class:`RunInterrupted`; :meth:`close` kills what still runs.
    """

    def __init__(self, workers: int, guard: InterruptGuard | None = None, watcher=None):
        self.workers = max(1, int(workers))
        self.ctx = _context()
        self.guard = guard or InterruptGuard()
        self.running: dict = {}
        self.watcher = watcher       # hears job_started(job), job_progress(job, record), tick()

    def run(self, jobs: list[Job]):
        """Yield a :class:`JobDone` for each job as it finishes (in completion order)."""
        from multiprocessing.connection import wait

        pending = list(jobs)
        while pending or self.running:
            self.guard.check()
            while pending and len(self.running) < self.workers:
                self._start(pending.pop(0))
            for conn in wait(list(self.running), timeout=0.2):
                fields = self._receive(conn)
                if fields is not _STILL_RUNNING:
                    yield self._finish(conn, fields)
            now = time.perf_counter()
            for conn, w in list(self.running.items()):
                if w.job.timeout_s is not None and now - w.started > w.job.timeout_s:
                    yield self._finish(conn, timeout_fields(now - w.started, w.job.timeout_s))
            self._tell("tick")

    def _tell(self, event: str, *args) -> None:
        hear = getattr(self.watcher, event, None)
        if hear is not None:
            hear(*args)

    def _start(self, job: Job) -> None:
        capture = Capture()
        iso = Isolation(os.getpid(), job.max_memory_mb)
        receiver, sender = self.ctx.Pipe(duplex=False)
        proc = self.ctx.Process(target=_pool_child, args=(job.payload, iso, sender, capture.sendable()),
                                daemon=True)
        proc.start()
        sender.close()
        self.running[receiver] = _Running(job, proc, time.perf_counter(), capture)
        self._tell("job_started", job)

    def _receive(self, conn) -> dict | None:
        job = self.running[conn].job
        try:
            data = conn.recv_bytes(contract.MAX_PAYLOAD_BYTES)
        except (EOFError, ConnectionError):
            return None
        except OSError as exc:
            return {"status": "error", "message": f"worker result refused: {exc}"}
        if contract.is_progress(data):
            self._tell("job_progress", job, contract.decode_progress(data))
            return _STILL_RUNNING
        return contract.decode_fields(data, job.needs_energy)

    def _finish(self, conn, fields: dict | None):
        w = self.running.pop(conn)
        conn.close()
        if fields is None:
            w.proc.join(5)                 # its own exit code first, then the group
        end_worker(w.proc)
        elapsed = time.perf_counter() - w.started
        if fields is None:
            fields = died_fields(w.proc.exitcode, elapsed)
        fields.setdefault("seconds", elapsed)
        fields["captured_output"] = w.capture.tail()
        return JobDone(w.job, fields)

    def close(self) -> None:
        """Kill every running worker's process group, reap them, drop their captured output."""
        while self.running:
            conn, w = self.running.popitem()
            conn.close()
            end_worker(w.proc)
            w.capture.close()


def _subprocess_work(payload: bytes, timeout_s: float | None, max_memory_mb: float | None = None,
                     needs_energy: bool = True) -> dict:
    """Run a job in a fresh interpreter (for Dask workers, whose processes may not fork children)."""
    import subprocess
    import sys

    t0 = time.perf_counter()
    capture = Capture()
    stdin = pickle.dumps((payload, Isolation(os.getpid(), max_memory_mb), capture.fd))
    proc = subprocess.Popen([sys.executable, "-m", "benchsuite.runner"], stdin=subprocess.PIPE,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, pass_fds=(capture.fd,))
    try:
        out, err = proc.communicate(stdin, timeout=timeout_s)
        tail = " | ".join(err.decode(errors="replace").strip().splitlines()[-3:])   # before its capture began
        fields = (contract.decode_fields(out, needs_energy) if proc.returncode == 0 and out
                  else died_fields(proc.returncode, time.perf_counter() - t0, tail))
    except subprocess.TimeoutExpired:
        fields = timeout_fields(time.perf_counter() - t0, timeout_s)
    finally:
        kill_group(proc.pid)
        proc.kill()
        proc.wait()
    fields["captured_output"] = capture.tail()
    return fields


class DaskPool:
    """Jobs on a Dask distributed cluster; each job runs in a subprocess of a Dask worker so that
    its timeout really stops it and a crash cannot take the worker down.

    An interrupt cancels the futures not yet finished; a job already running on
    a Dask worker runs on until its own timeout (a Dask worker thread cannot be
    stopped from here).
    """

    def __init__(self, address: str, guard: InterruptGuard | None = None):
        from dask.distributed import Client

        self.client = Client(address, timeout="20s")
        self.guard = guard or InterruptGuard()
        self.futures: dict = {}
        self.watcher = None          # hears tick() only: a Dask job's start and progress are not seen here

    def run(self, jobs: list[Job]):
        from dask.distributed import TimeoutError as DaskTimeout
        from dask.distributed import wait

        futures = {self.client.submit(_subprocess_work, j.payload, j.timeout_s, j.max_memory_mb, j.needs_energy,
                                      pure=False, priority=len(jobs) - i): j     # in the given order
                   for i, j in enumerate(jobs)}
        self.futures = futures
        pending = set(futures)
        while pending:
            self.guard.check()
            try:
                done, pending = wait(pending, timeout=0.5, return_when="FIRST_COMPLETED")
            except (DaskTimeout, TimeoutError):
                continue
            for fut in done:
                yield JobDone(futures[fut], self._result(fut, futures[fut]))
            if self.watcher is not None:
                self.watcher.tick()

    @staticmethod
    def _result(fut, job: Job) -> dict:
        try:
            raw = fut.result()
        except Exception as exc:
            return {"status": "error", "seconds": 0.0,
                    "message": f"Dask task failed: {type(exc).__name__}: {bounded_text(str(exc), 2000)}"}
        return contract.checked_fields(raw, job.needs_energy)

    def close(self):
        unfinished = [f for f in self.futures if not f.done()]
        if unfinished:
            self.client.cancel(unfinished)
        self.client.close()


@dataclass
class GridConfig:
    """How a grid runs: where, how many workers, time budgets, memory, cache, seed.

    ``timeout_s`` is each method task's time budget (``None``:
    :data:`DEFAULT_TIMEOUT_S`, ``math.inf``: none); ``max_memory_mb`` each
    method worker's address-space limit in MiB (``None``:
    :data:`DEFAULT_MAX_MEMORY_MB`, ``math.inf``: none).  Reference ladders get
    ``reference_timeout_s`` (``None``: none) and no memory limit.  ``history_s`` (task key ->
    seconds measured by an earlier run) feeds the cost model that orders method jobs
    longest-first (:mod:`benchsuite.runner.cost`).
    """

    workers: int = 1
    scheduler: str | None = None
    timeout_s: float | None = None
    reference_timeout_s: float | None = None
    cache_dir: object = None
    seed: int = 0
    max_determinants: int = 5_000_000
    max_memory_mb: float | None = DEFAULT_MAX_MEMORY_MB
    history_s: dict | None = None      # task key -> seconds an earlier stored run measured (cost model)


def _make_pool(cfg: GridConfig, guard: InterruptGuard):
    return DaskPool(cfg.scheduler, guard) if cfg.scheduler else LocalPool(cfg.workers, guard)


def run_grid(tasks: list[Task], methods: dict, cfg: GridConfig, on_result, progress=None) -> None:
    """References once per (case, basis), then every task; ``on_result(task, fields, ladder)``
    as each finishes (``ladder`` None when the reference ladder failed).

    ``methods`` maps a task's method spec to ``(method_object, failure)`` from discovery;
    a plugin that could not be loaded yields ``error`` fields for each of its tasks.
    ``progress`` (optional) hears ``reference_done(case_name, basis_label, fields)`` per ladder.

    SIGTERM or SIGINT during the grid kills every worker's process group,
    stops the fork server and raises :class:`RunInterrupted` (results already
    passed to ``on_result`` are complete; the rest are missing, for ``--resume``).
    """
    with InterruptGuard() as guard:
        pool = _make_pool(cfg, guard)
        try:
            _run_grid(tasks, methods, cfg, on_result, progress, pool)
            guard.check()
        finally:
            pool.close()
            if guard.signal_number is not None and isinstance(pool, LocalPool):
                shutdown_forkserver()


def _pair(case, basis) -> tuple[str, str]:
    """The (case name, basis label) a reference ladder belongs to."""
    return case.name, basis.label


def _run_ladders(tasks, cfg: GridConfig, progress, pool) -> tuple[dict, dict]:
    """Every distinct (case, basis) ladder computed once; returns ``(ladders, failures)`` keyed by
    :func:`_pair` (a failure maps to its message)."""
    from benchsuite.chem.cache import DiskCache
    from benchsuite.chem.ladder import reference_ladder

    pairs = {}
    for t in tasks:
        pairs.setdefault(_pair(t.case, t.basis), (t.case, t.basis))
    jobs = [Job.of(LadderJob(case, basis, cfg.cache_dir, cfg.max_determinants), cfg.reference_timeout_s,
                   needs_energy=False) for case, basis in pairs.values()]
    failed = {}
    for done in pool.run(jobs):
        lj = done.job.work
        if done.fields.get("status") != "ok":
            failed[_pair(lj.case, lj.basis)] = done.fields.get("message", "reference ladder failed")
        if progress:
            progress.reference_done(lj.case.name, lj.basis.label, done.fields)
    cache = DiskCache(cfg.cache_dir)
    ladders = {k: reference_ladder(case, basis, cache=cache, max_determinants=cfg.max_determinants)
               for k, (case, basis) in pairs.items() if k not in failed}
    return ladders, failed


def _method_jobs(tasks, methods, cfg: GridConfig, ladders, failed, on_result) -> list[Job]:
    """The method jobs to run; tasks that cannot run (failed ladder, unusable plugin, unsendable
    method) are reported through ``on_result`` at once."""
    timeout_s = budget(cfg.timeout_s, DEFAULT_TIMEOUT_S)
    memory_mb = budget(cfg.max_memory_mb, DEFAULT_MAX_MEMORY_MB)
    jobs = []
    for t in tasks:
        pair = _pair(t.case, t.basis)
        obj, failure = methods[t.method]
        if pair in failed:
            on_result(t, {"status": "error", "message": "reference ladder failed: "
                          + failed[pair].strip().splitlines()[0]}, None)
        elif obj is None:
            on_result(t, {"status": "error", "message": f"plugin unusable: {failure.reason}"}, ladders[pair])
        else:
            try:
                jobs.append(Job.of(MethodJob(t, obj, cfg.cache_dir, cfg.seed, timeout_s, cfg.max_determinants),
                                   timeout_s, memory_mb))
            except Exception as exc:
                on_result(t, unsendable_fields(exc), ladders[pair])
    return jobs


def task_size(task: Task, ladders: dict) -> TaskSize:
    """The size of ``task``'s problem from its reference ladder: orbital space and |E(primary) - E(CCSD(T))|."""
    ladder = ladders[_pair(task.case, task.basis)]
    primary, cc = ladder.primary, ladder.rung("ccsd(t)")
    known = all(r is not None and r.status == "ok" and r.energy_ha is not None for r in (primary, cc))
    space = ladder.space
    return TaskSize.of_space(space.n_orbitals, space.n_alpha, space.n_beta,
                             primary.energy_ha - cc.energy_ha if known else 0.0)


def _scheduled(jobs: list[Job], ladders: dict, cfg: GridConfig, progress) -> list[Job]:
    """Method jobs longest-first by the cost model; ``progress`` hears the plan (``method_phase``)."""
    clock = TaskClock(CostModel(cfg.history_s, budget(cfg.timeout_s, DEFAULT_TIMEOUT_S)), cfg.workers)
    sized = {id(j): (j.work.task.key, _method_name(j.work), task_size(j.work.task, ladders)) for j in jobs}
    ordered = longest_first(jobs, lambda j: clock.model.predict_s(*sized[id(j)]))
    clock.plan([sized[id(j)] for j in ordered])
    if progress is not None and hasattr(progress, "method_phase"):
        progress.method_phase(clock)
    return ordered


def _method_name(job: "MethodJob") -> str:
    return getattr(job.method, "name", None) or job.task.method


def _run_grid(tasks, methods, cfg, on_result, progress, pool) -> None:
    ladders, failed = _run_ladders(tasks, cfg, progress, pool)
    jobs = _scheduled(_method_jobs(tasks, methods, cfg, ladders, failed, on_result), ladders, cfg, progress)
    pool.watcher = _TaskWatcher(progress)
    for done in pool.run(jobs):
        task = done.job.work.task
        on_result(task, done.fields, ladders[_pair(task.case, task.basis)])


class _TaskWatcher:
    """Passes a pool's start and progress events of method jobs to the run's progress display."""

    def __init__(self, progress):
        self.progress = progress

    def job_started(self, job: Job) -> None:
        if isinstance(job.work, MethodJob) and hasattr(self.progress, "task_started"):
            self.progress.task_started(job.work.task)

    def job_progress(self, job: Job, record: dict) -> None:
        if isinstance(job.work, MethodJob) and hasattr(self.progress, "task_progress"):
            self.progress.task_progress(job.work.task, record)

    def tick(self) -> None:
        if hasattr(self.progress, "tick"):
            self.progress.tick()


def _stdin_main() -> None:
    """The Dask path's worker: ``(payload, Isolation, capture fd)`` pickled on stdin, checked JSON on stdout."""
    import sys

    payload, iso, capture_fd = pickle.loads(sys.stdin.buffer.read())
    answer = os.dup(1)                     # the real stdout; fd 1 becomes the capture file
    data = _contained_work(payload, iso, capture_fd)
    with os.fdopen(answer, "wb") as out:
        out.write(data)
