"""Running methods with fault isolation.

:func:`execute` runs one method on one problem in a worker process (the
``forkserver`` start method: workers are forked from a clean server that never
ran OpenMP code, so PySCF's threads cannot deadlock a child).  A method that
raises, kills its own process, overruns its time budget, returns NaN or a
non-number, or breaks the result contract gets a status and a message; it
never stops the caller.  The timeout is enforced from outside: the worker is
killed, the work really stops.
"""

from __future__ import annotations

import multiprocessing as mp
import pickle
import signal
import time
import traceback
from dataclasses import asdict, dataclass, field

from benchsuite.methods.base import MethodResult, QubitProblem, Resources, resolve_options
from benchsuite.scoring import as_energy, run_status

_PRELOAD = ["benchsuite.methods.builtin", "benchsuite.methods.ucc", "benchsuite.qubit.sector"]


@dataclass
class Outcome:
    """A finished task, as plain data (what the store, scoring and reports consume)."""

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

    def to_dict(self) -> dict:
        return asdict(self)


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


def validate_result(result, method_name: str, exact_ha: float | None, variational: bool) -> dict:
    """Turn what a method returned into Outcome fields; contract breaches become ``invalid``."""
    if not isinstance(result, MethodResult):
        return {"status": "invalid",
                "message": f"{method_name} returned {type(result).__name__} {result!r:.80}, not a MethodResult"}
    energy = as_energy(result.energy_ha)
    if energy is None:
        return {"status": "invalid", "message": f"{method_name} returned energy_ha = {result.energy_ha!r:.60}, "
                                                "not a finite number"}
    stderr = None
    if result.stderr_ha is not None:
        stderr = as_energy(result.stderr_ha)
        if stderr is None or stderr < 0:
            return {"status": "invalid", "energy_ha": energy,
                    "message": f"{method_name} returned stderr_ha = {result.stderr_ha!r:.60}"}
    status, message = run_status(energy, exact_ha, variational)
    resources = result.resources.to_dict() if isinstance(result.resources, Resources) else {}
    params = None if result.parameters is None else [float(p) for p in result.parameters]
    return {"status": status, "message": message, "energy_ha": energy, "stderr_ha": stderr,
            "converged": bool(result.converged), "iterations": int(result.iterations or 0),
            "parameters": params, "resources": resources, "metadata": _plain(result.metadata)}


def _plain(obj):
    """Metadata reduced to JSON-safe values (numpy scalars and arrays become Python)."""
    import numpy as np

    if isinstance(obj, dict):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _plain(obj.tolist())
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, float) and obj != obj:
        return None
    if obj is None or isinstance(obj, (bool, int, float, str)):
        return obj
    return repr(obj)


def _run_here(method, problem: QubitProblem, options: dict, exact_ha, conn=None) -> dict:
    t0 = time.perf_counter()
    try:
        result = method.run(problem, options)
        fields = validate_result(result, method.name, exact_ha, bool(getattr(method, "variational", False)))
    except Exception as exc:
        tb = traceback.format_exc(limit=6)
        fields = {"status": "error", "message": f"{type(exc).__name__}: {exc}\n{tb}"}
    fields["seconds"] = time.perf_counter() - t0
    if conn is not None:
        conn.send(fields)
        conn.close()
    return fields


def _worker(payload: bytes, conn) -> None:
    method, problem, options, exact_ha = pickle.loads(payload)
    _run_here(method, problem, options, exact_ha, conn)


def execute(method, problem: QubitProblem, options: dict | None = None, timeout_s: float | None = None,
            exact_ha: float | None = None, isolate: bool = True) -> Outcome:
    """Run ``method`` on ``problem`` and classify what happened.

    ``options`` are validated here (an unknown option is an input error before
    any work).  ``exact_ha`` is the exact sector energy used for the
    ``below-exact`` check of variational methods.
    """
    opts = resolve_options(method, options or {})
    name = method.name
    if not isolate:
        return Outcome(method=name, **_run_here(method, problem, opts, exact_ha))
    try:
        payload = pickle.dumps((method, problem, opts, exact_ha))
    except Exception as exc:
        return Outcome(method=name, status="error",
                       message=f"method object cannot be sent to a worker process ({exc}); "
                               "define the class at module level")
    ctx = _context()
    receiver, sender = ctx.Pipe(duplex=False)
    proc = ctx.Process(target=_worker, args=(payload, sender), daemon=True)
    t0 = time.perf_counter()
    proc.start()
    sender.close()
    fields = None
    if receiver.poll(timeout_s):
        try:
            fields = receiver.recv()
        except EOFError:
            fields = None
    elapsed = time.perf_counter() - t0
    if fields is None and proc.is_alive() and timeout_s is not None and elapsed >= timeout_s:
        proc.kill()
        proc.join()
        return Outcome(method=name, **timeout_fields(elapsed, timeout_s))
    proc.join(5)
    if fields is None:
        if proc.is_alive():
            proc.kill()
        return Outcome(method=name, **died_fields(proc.exitcode, elapsed))
    return Outcome(method=name, **fields)


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


@dataclass
class Job:
    """A payload for a worker and what to do with its answer."""

    job_id: str
    payload: bytes
    timeout_s: float | None


def ladder_job(case, basis, cache_dir, max_determinants: int) -> tuple:
    return ("ladder", case, basis, cache_dir, max_determinants)


def method_job(task: Task, method_obj, cache_dir, seed: int, timeout_s, max_determinants: int) -> tuple:
    return ("method", task, method_obj, cache_dir, seed, timeout_s, max_determinants)


def _ladder_work(case, basis, cache_dir, max_determinants) -> dict:
    from benchsuite.chem.cache import DiskCache
    from benchsuite.chem.ladder import reference_ladder

    t0 = time.perf_counter()
    lad = reference_ladder(case, basis, cache=DiskCache(cache_dir), max_determinants=max_determinants)
    primary = lad.primary
    return {"status": "ok", "seconds": time.perf_counter() - t0, "cache": lad.cache_status,
            "primary_status": None if primary is None else primary.status}


def _method_work(task: Task, method_obj, cache_dir, seed, timeout_s, max_determinants) -> dict:
    from benchsuite.chem.cache import DiskCache
    from benchsuite.methods.discovery import resolve_method
    from benchsuite.methods.problem import build_problem
    from benchsuite.qubit.metrics import qwc_groups

    if method_obj is None:
        method_obj, failure = resolve_method(task.method)
        if method_obj is None:
            return {"status": "error", "message": f"plugin unusable: {failure.reason}", "seconds": 0.0}
    prepared = build_problem(task.case, task.basis, task.encoding, cache=DiskCache(cache_dir), seed=seed,
                             time_budget_s=timeout_s, max_determinants=max_determinants)
    ref = prepared.reference
    opts = resolve_options(method_obj, task.options)
    fields = _run_here(method_obj, prepared.problem, opts, None if ref is None else ref.energy_ha)
    pauli = prepared.problem.hamiltonian.pauli
    groups = qwc_groups(pauli)
    fields["problem"] = {"n_qubits": prepared.problem.n_qubits,
                         "n_terms": int(((pauli.x != 0) | (pauli.z != 0)).sum()),
                         "one_norm_ha": float(pauli.one_norm()),
                         "qwc_groups": int(groups.max()) + 1 if groups.size else 0}
    return fields


def work(job: tuple) -> dict:
    """Run one job in this process and return plain fields; never raises."""
    t0 = time.perf_counter()
    try:
        if job[0] == "ladder":
            return _ladder_work(*job[1:])
        return _method_work(*job[1:])
    except Exception as exc:
        return {"status": "error", "message": f"{type(exc).__name__}: {exc}\n{traceback.format_exc(limit=6)}",
                "seconds": time.perf_counter() - t0}


def _pool_child(payload: bytes, conn) -> None:
    conn.send(work(pickle.loads(payload)))
    conn.close()


class LocalPool:
    """Up to ``workers`` forkserver processes, one per job, each killable on its own.

    A pool of long-lived workers (concurrent.futures) cannot stop one stuck task
    and breaks entirely when a worker dies; one process per job costs a fork
    from the preloaded server (milliseconds) and isolates every fault.
    """

    def __init__(self, workers: int):
        self.workers = max(1, int(workers))
        self.ctx = _context()
        self.running: dict = {}

    def run(self, jobs: list[Job]):
        """Yield ``(job_id, fields)`` as jobs finish (in completion order)."""
        from multiprocessing.connection import wait

        pending = list(jobs)
        while pending or self.running:
            while pending and len(self.running) < self.workers:
                job = pending.pop(0)
                receiver, sender = self.ctx.Pipe(duplex=False)
                proc = self.ctx.Process(target=_pool_child, args=(job.payload, sender), daemon=True)
                proc.start()
                sender.close()
                self.running[receiver] = (job, proc, time.perf_counter())
            ready = wait(list(self.running), timeout=0.2)
            for conn in ready:
                yield self._collect(conn)
            now = time.perf_counter()
            for conn, (job, proc, started) in list(self.running.items()):
                if job.timeout_s is not None and now - started > job.timeout_s:
                    proc.kill()
                    proc.join()
                    conn.close()
                    del self.running[conn]
                    yield job.job_id, timeout_fields(now - started, job.timeout_s)

    def _collect(self, conn):
        job, proc, started = self.running.pop(conn)
        try:
            fields = conn.recv()
        except (EOFError, OSError):
            fields = None
        conn.close()
        proc.join(5)
        if fields is None:
            fields = died_fields(proc.exitcode, time.perf_counter() - started)
        return job.job_id, fields


def _subprocess_work(payload: bytes, timeout_s: float | None) -> dict:
    """Run a job in a fresh interpreter (for Dask workers, whose processes may not fork children)."""
    import subprocess
    import sys

    t0 = time.perf_counter()
    try:
        proc = subprocess.run([sys.executable, "-m", "benchsuite.runner"], input=payload, capture_output=True,
                              timeout=timeout_s)
    except subprocess.TimeoutExpired:
        return timeout_fields(time.perf_counter() - t0, timeout_s)
    if proc.returncode != 0 or not proc.stdout:
        tail = proc.stderr.decode(errors="replace").strip().splitlines()[-3:]
        return died_fields(proc.returncode, time.perf_counter() - t0, " | ".join(tail))
    return pickle.loads(proc.stdout)


class DaskPool:
    """Jobs on a Dask distributed cluster; each job runs in a subprocess of a Dask worker so that
    its timeout really stops it and a crash cannot take the worker down."""

    def __init__(self, address: str):
        from dask.distributed import Client

        self.client = Client(address, timeout="20s")

    def run(self, jobs: list[Job]):
        from dask.distributed import as_completed

        futures = {self.client.submit(_subprocess_work, j.payload, j.timeout_s, pure=False, key=j.job_id): j
                   for j in jobs}
        for fut in as_completed(futures):
            job = futures[fut]
            try:
                yield job.job_id, fut.result()
            except Exception as exc:
                yield job.job_id, {"status": "error", "seconds": 0.0,
                                   "message": f"Dask task failed: {type(exc).__name__}: {exc}"}

    def close(self):
        self.client.close()


@dataclass
class GridConfig:
    """How a grid runs: where, how many workers, time budgets, cache, seed."""

    workers: int = 1
    scheduler: str | None = None
    timeout_s: float | None = None
    reference_timeout_s: float | None = None
    cache_dir: object = None
    seed: int = 0
    max_determinants: int = 5_000_000


def _make_pool(cfg: GridConfig):
    return DaskPool(cfg.scheduler) if cfg.scheduler else LocalPool(cfg.workers)


def run_grid(tasks: list[Task], methods: dict, cfg: GridConfig, on_result, progress=None) -> None:
    """References once per (case, basis), then every task; ``on_result(task, fields, ladder)``
    as each finishes (``ladder`` None when the reference ladder failed).

    ``methods`` maps a task's method spec to ``(method_object, failure)`` from discovery;
    a plugin that could not be loaded yields ``error`` fields for each of its tasks.
    """
    from benchsuite.chem.cache import DiskCache
    from benchsuite.chem.ladder import reference_ladder

    pool = _make_pool(cfg)
    try:
        pairs = {}
        for t in tasks:
            pairs.setdefault((t.case.name, t.basis.label), (t.case, t.basis))
        jobs = [Job(f"ladder|{c}|{b}", pickle.dumps(ladder_job(case, basis, cfg.cache_dir, cfg.max_determinants)),
                    cfg.reference_timeout_s) for (c, b), (case, basis) in pairs.items()]
        failed = {}
        for job_id, fields in pool.run(jobs):
            if fields.get("status") != "ok":
                failed[tuple(job_id.split("|")[1:])] = fields.get("message", "reference ladder failed")
            if progress:
                _, case_name, basis_label = job_id.split("|")
                progress.reference_done(f"{case_name}[{basis_label}]", fields)
        cache = DiskCache(cfg.cache_dir)
        ladders = {k: reference_ladder(case, basis, cache=cache, max_determinants=cfg.max_determinants)
                   for k, (case, basis) in pairs.items() if k not in failed}
        by_key = {t.key: t for t in tasks}
        method_jobs = []
        for t in tasks:
            pair = (t.case.name, t.basis.label)
            obj, failure = methods[t.method]
            if pair in failed:
                on_result(t, {"status": "error", "message": "reference ladder failed: "
                              + failed[pair].strip().splitlines()[0]}, None)
            elif obj is None:
                on_result(t, {"status": "error", "message": f"plugin unusable: {failure.reason}"}, ladders[pair])
            else:
                payload = pickle.dumps(method_job(t, _sendable(obj), cfg.cache_dir, cfg.seed, cfg.timeout_s,
                                                  cfg.max_determinants))
                method_jobs.append(Job(t.key, payload, cfg.timeout_s))
        for key, fields in pool.run(method_jobs):
            task = by_key[key]
            on_result(task, fields, ladders[(task.case.name, task.basis.label)])
    finally:
        if isinstance(pool, DaskPool):
            pool.close()


def _sendable(method_obj):
    """The method object if it pickles (the worker then needs no discovery), else None."""
    try:
        pickle.dumps(method_obj)
        return method_obj
    except Exception:
        return None


def _stdin_main() -> None:
    import sys

    job = pickle.loads(sys.stdin.buffer.read())
    sys.stdout.buffer.write(pickle.dumps(work(job)))


if __name__ == "__main__":
    _stdin_main()
