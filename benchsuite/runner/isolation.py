"""What keeps one task's worker process contained, and what stops a whole run.

A worker calls :func:`enter_isolation` before it unpickles anything:

* it becomes the leader of a new session (``os.setsid``), so its pid is the
  process-group id of everything it starts; :func:`kill_group` ends them all;
* its stdout and stderr (file descriptors 1 and 2, so C-level writes too) go
  to a :class:`Capture`, an unnamed temporary file the parent opened, who
  keeps its last :data:`CAPTURE_TAIL_BYTES` (nothing to clean up, even
  after SIGKILL: the file has no name);
* its address space is limited to ``max_memory_mb`` (``RLIMIT_AS``): an
  allocation beyond it fails with ``MemoryError`` inside the worker;
* a watchdog process in the same group (forked before the method runs) kills
  the group when the worker ends, or when the guardian process (the run's main
  process) is gone, even by SIGKILL; it also keeps the capture file below
  :data:`CAPTURE_FILE_LIMIT_BYTES`.  On Linux the worker also asks for SIGKILL
  when its parent dies (``prctl(PR_SET_PDEATHSIG)``).

A plugin that deliberately starts a session of its own escapes the group kill;
nothing short of a container stops that.
"""

from __future__ import annotations

import ctypes
import fcntl
import os
import resource
import signal
import sys
import tempfile
import threading
import time
from dataclasses import dataclass

#: Time budget of one method task when none is given (seconds); ``math.inf`` means none.
DEFAULT_TIMEOUT_S = 3600.0
#: Address-space limit of one method worker (MiB) when none is given; ``math.inf`` means none.
DEFAULT_MAX_MEMORY_MB = 4096.0
#: How much of a worker's stdout+stderr is kept with its result (the end of it).
CAPTURE_TAIL_BYTES = 16 * 1024
#: Above this the capture file is emptied (its older part is lost, the disk is not filled).
CAPTURE_FILE_LIMIT_BYTES = 8 * 1024 * 1024
WATCH_INTERVAL_S = 0.2
_PR_SET_PDEATHSIG = 1


@dataclass(frozen=True)
class Isolation:
    """What a worker needs to contain itself: who guards it, where its output goes, its memory limit."""

    guardian_pid: int
    max_memory_mb: float | None = None


def budget(value: float | None, default: float) -> float | None:
    """A time or memory budget: ``None`` means the default, ``math.inf`` means unlimited (``None`` out)."""
    value = default if value is None else float(value)
    if value <= 0:
        raise ValueError(f"a budget must be positive, got {value!r}")
    return None if value == float("inf") else value


class Capture:
    """An unnamed temporary file (unlinked at once, append-only) for a worker's stdout and stderr."""

    def __init__(self):
        fd, path = tempfile.mkstemp(prefix="benchsuite-output-")
        os.unlink(path)
        fcntl.fcntl(fd, fcntl.F_SETFL, fcntl.fcntl(fd, fcntl.F_GETFL) | os.O_APPEND)
        self.fd = fd

    def sendable(self) -> "_SentFd":
        """The file as a multiprocessing argument (the fork server passes the descriptor itself)."""
        return _SentFd(self.fd)

    def tail(self) -> str:
        """The last :data:`CAPTURE_TAIL_BYTES`, with a note when more was written; closes the file."""
        try:
            size = os.fstat(self.fd).st_size
            data = os.pread(self.fd, CAPTURE_TAIL_BYTES, max(0, size - CAPTURE_TAIL_BYTES))
        except OSError:
            return ""
        finally:
            self.close()
        text = data.decode("utf-8", errors="replace")
        return f"[... {size - len(data)} earlier bytes not kept]\n{text}" if size > len(data) else text

    def close(self) -> None:
        if self.fd is not None:
            os.close(self.fd)
            self.fd = None


class _SentFd:
    def __init__(self, fd: int):
        self.fd = fd

    def __reduce__(self):
        from multiprocessing import reduction

        return _received_fd, (reduction.DupFd(self.fd),)


def _received_fd(dup) -> int:
    return dup.detach()


def enter_isolation(iso: Isolation, capture_fd: int | None) -> None:
    """Called first in a worker: own session, captured output, watchdog, memory limit (see module doc)."""
    os.setsid()
    if capture_fd is not None:
        _redirect_output(capture_fd)
    _start_watchdog(iso.guardian_pid, trim_output=capture_fd is not None)
    _die_with_parent()
    if iso.max_memory_mb is not None:
        limit = int(iso.max_memory_mb * 1024 * 1024)
        _, hard = resource.getrlimit(resource.RLIMIT_AS)
        resource.setrlimit(resource.RLIMIT_AS, (limit if hard == resource.RLIM_INFINITY else min(limit, hard),
                                                hard))
    os.environ.pop("BENCHSUITE_DB", None)        # workers never touch the results database
    import faulthandler

    faulthandler.enable()                         # a crash leaves a traceback in the captured output


def _redirect_output(fd: int) -> None:
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (AttributeError, OSError, ValueError):
            pass
    os.dup2(fd, 1)
    os.dup2(fd, 2)
    if fd > 2:
        os.close(fd)


def flush_c_output() -> None:
    """Flush C stdio buffers (a worker ends with ``os._exit``, which would drop them)."""
    try:
        ctypes.CDLL(None).fflush(None)
    except (OSError, AttributeError):
        pass


def _die_with_parent() -> None:
    if sys.platform.startswith("linux"):
        try:
            ctypes.CDLL(None, use_errno=True).prctl(_PR_SET_PDEATHSIG, signal.SIGKILL)
        except (OSError, AttributeError):
            pass


def _start_watchdog(guardian_pid: int, trim_output: bool) -> None:
    worker_pid = os.getpid()
    if os.fork() != 0:
        return
    try:                                           # the watchdog: never returns
        signal.signal(signal.SIGINT, signal.SIG_IGN)
        while os.getppid() == worker_pid and process_alive(guardian_pid):
            time.sleep(WATCH_INTERVAL_S)
            try:
                if trim_output and os.fstat(1).st_size > CAPTURE_FILE_LIMIT_BYTES:
                    os.ftruncate(1, 0)
            except OSError:
                pass
        os.killpg(0, signal.SIGKILL)
    finally:
        os._exit(0)


def process_alive(pid: int) -> bool:
    """True while ``pid`` exists and is not a zombie."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            return fh.read().rsplit(b")", 1)[1].split()[0] != b"Z"
    except FileNotFoundError:
        return False
    except OSError:
        pass
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        pass
    return True


def kill_group(pid: int) -> None:
    """SIGKILL the process group led by ``pid`` (a worker and everything it started)."""
    try:
        os.killpg(pid, signal.SIGKILL)
    except (ProcessLookupError, PermissionError):
        pass


def end_worker(proc) -> None:
    """Kill a multiprocessing worker's whole group and reap the worker."""
    kill_group(proc.pid)
    if proc.is_alive():
        proc.kill()
    proc.join(5)


def shutdown_forkserver() -> None:
    """Stop multiprocessing's fork server and resource tracker (they restart on next use)."""
    from multiprocessing import forkserver, resource_tracker

    for helper in (forkserver._forkserver, resource_tracker._resource_tracker):
        try:
            helper._stop()
        except (AttributeError, OSError, ChildProcessError):
            pass


class RunInterrupted(SystemExit):
    """A run stopped by SIGTERM or SIGINT after its workers were killed.

    A :class:`SystemExit` so that, uncaught, the process exits with the
    conventional ``128 + signal`` (143 for SIGTERM, 130 for SIGINT) and no
    traceback; ``str(exc)`` is one line for the user.
    """

    def __init__(self, signal_number: int):
        super().__init__(128 + signal_number)
        self.signal_number = signal_number

    def __str__(self) -> str:
        return f"interrupted by {signal.Signals(self.signal_number).name}"


class InterruptGuard:
    """While active, SIGTERM and SIGINT only record the signal; :meth:`check` raises
    :class:`RunInterrupted` at a point where stopping is safe (never mid-write)."""

    SIGNALS = (signal.SIGTERM, signal.SIGINT)

    def __init__(self):
        self.signal_number: int | None = None
        self._previous: dict = {}

    def _record(self, signum, frame) -> None:
        self.signal_number = self.signal_number or signum

    def __enter__(self) -> "InterruptGuard":
        if threading.current_thread() is threading.main_thread():
            self._previous = {s: signal.signal(s, self._record) for s in self.SIGNALS}
        return self

    def __exit__(self, *exc) -> None:
        for s, handler in self._previous.items():
            signal.signal(s, handler)
        self._previous = {}

    def check(self) -> None:
        if self.signal_number is not None:
            raise RunInterrupted(self.signal_number)
