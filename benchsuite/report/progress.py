"""Progress of a run on the terminal: references, method tasks, what each running task is doing, ETA.

Writes to stderr so that stdout stays clean for machine-readable output.  Two forms:

* on a terminal, a live board drawn with ``rich`` (redrawn four times a second): a bar over the
  method tasks with their pass and not-pass counts and the ETA, and one line per running task
  with its seconds so far and its last progress record (iteration, energy, pool or parameter
  gradient norm), sent by the method through :func:`benchsuite.methods.base.report_progress`;
* elsewhere (CI logs, pipes), plain lines: one per finished reference ladder and method task,
  the method phase's predicted duration when it starts, and, for a task running longer than
  :data:`LOG_EVERY_S` seconds, a ``running`` line at most every :data:`LOG_EVERY_S` seconds.

The ETA covers the method tasks only (it is ``--:--`` during the reference phase): list
scheduling of the tasks still waiting and running on the run's workers, each predicted by the
runner's cost model (:mod:`benchsuite.runner.cost`), which learns from every task that finishes.
Numbers use an ASCII minus so that logs stay greppable.
"""

from __future__ import annotations

import sys
import time

from benchsuite.report.naming import task_label
from benchsuite.report.tables import format_number

#: A plain-log ``running`` line for a task at most this often, in seconds.
LOG_EVERY_S = 30.0


def clock_text(seconds: float | None) -> str:
    """``m:ss`` (or ``h:mm:ss`` from one hour); ``--:--`` when unknown."""
    if seconds is None:
        return "--:--"
    s = int(round(max(seconds, 0.0)))
    h, rest = divmod(s, 3600)
    return f"{h}:{rest // 60:02d}:{rest % 60:02d}" if h else f"{rest // 60}:{rest % 60:02d}"


def record_text(record: dict) -> str:
    """A progress record in a few words: ``iteration 57, E -107.625981 Eh, |g| 3.1e-03``."""
    parts = []
    if "stage" in record:
        parts.append(record["stage"])
    if "iteration" in record:
        parts.append(f"iteration {record['iteration']}")
    if "energy_ha" in record:
        parts.append(f"E {format_number(record['energy_ha'], '.6f')} Eh")
    if "gradient_norm" in record:
        parts.append(f"|g| {format_number(record['gradient_norm'], '.1e')}")
    return ", ".join(parts)


def _label(task) -> str:
    return task_label(task.case.name, task.basis.label, task.encoding.label, task.method)


class _Running:
    def __init__(self, label: str, now: float):
        self.label, self.started, self.record, self.logged = label, now, {}, now


class Progress:
    """The run's progress display (see the module docstring); ``n_tasks`` counts method tasks."""

    def __init__(self, n_tasks: int, stream=None, interactive: bool | None = None):
        self.stream = stream or sys.stderr
        self.interactive = self.stream.isatty() if interactive is None else interactive
        self.total, self.done, self.passing, self.failing = n_tasks, 0, 0, 0
        self.references = 0
        self.clock = None                   # the runner's TaskClock, from method_phase()
        self.running: dict[str, _Running] = {}
        self.live = self._start_board() if self.interactive else None

    # -- events -----------------------------------------------------------------------------

    def reference_done(self, case: str, basis: str, fields: dict) -> None:
        """One (case, basis) reference ladder finished (``fields``: its job's status and seconds)."""
        self.references += 1
        self._log(f"reference {task_label(case, basis)}: {fields.get('status')} "
                  f"({fields.get('seconds', 0.0):.1f} s)")

    def method_phase(self, clock) -> None:
        """The method tasks are about to start, in ``clock``'s order."""
        self.clock = clock
        self.phase_started, self.first_eta_s = time.monotonic(), clock.eta_s(time.monotonic())
        n = len(clock.pending)
        self._log(f"method tasks: {n} on {clock.workers} worker{'s' * (clock.workers != 1)}, "
                  f"predicted {clock_text(self.first_eta_s)} (longest first)")

    def task_started(self, task) -> None:
        now = time.monotonic()
        self.running[task.key] = _Running(_label(task), now)
        if self.clock is not None:
            self.clock.started(task.key, now)

    def task_progress(self, task, record: dict) -> None:
        if task.key in self.running and record:
            self.running[task.key].record = record

    def tick(self) -> None:
        """Called by the pool between polls: plain logs say which long task is still running."""
        if self.interactive:
            return
        now = time.monotonic()
        for r in self.running.values():
            if now - r.logged >= LOG_EVERY_S:
                r.logged = now
                detail = record_text(r.record)
                self._log(f"  running {r.label}: {now - r.started:.0f} s" + (f", {detail}" if detail else ""))

    def row_done(self, row) -> None:
        self.done += 1
        if row.verdict == "pass":
            self.passing += 1
        else:
            self.failing += 1
        started = self.running.pop(row.task_key, None)
        if self.clock is not None:       # the wall time the pool saw, else (Dask) the method's own
            self.clock.finished(row.task_key, row.seconds if started is None else time.monotonic() - started.started)
        err = "" if row.error_mha is None else f" {format_number(row.error_mha, '+.4f')} mHa"
        task = task_label(row.case, row.basis, row.encoding, row.method)
        self._log(f"{self._head()}  {task}: {row.verdict}{err} ({row.seconds:.1f} s)")

    def eta(self) -> str:
        """The method phase's remaining time, ``m:ss``; ``--:--`` before it starts."""
        if self.clock is None:
            return "--:--"
        return clock_text(self.clock.eta_s(time.monotonic()))

    def close(self) -> None:
        """Stop the board; say how long the method phase took against its first prediction."""
        if self.live is not None:
            self.live.stop()
            self.live = None
        if self.clock is not None and self.done:
            self._log(f"method tasks took {clock_text(time.monotonic() - self.phase_started)} "
                      f"(predicted {clock_text(self.first_eta_s)})")
        self.stream.flush()

    # -- drawing ----------------------------------------------------------------------------

    def _head(self) -> str:
        return f"[{self.done}/{self.total}] pass {self.passing}, not pass {self.failing}, ETA {self.eta()}"

    def _log(self, line: str) -> None:
        if self.live is not None:
            self.live.console.print(line, highlight=False, markup=False)
        else:
            self.stream.write(line + "\n")
            self.stream.flush()

    def _start_board(self):
        from rich.console import Console
        from rich.live import Live

        live = Live(_Board(self), console=Console(file=self.stream), refresh_per_second=4, transient=True)
        live.start()
        return live


class _Board:
    """The live view: the method tasks' bar and one line per running task (rich renderable)."""

    def __init__(self, progress: Progress):
        self.p = progress

    def __rich__(self):
        from rich.console import Group
        from rich.progress_bar import ProgressBar
        from rich.table import Table

        p, now = self.p, time.monotonic()
        head = Table.grid(padding=(0, 1))
        if p.clock is None:
            head.add_row(f"references: {p.references} done")
        else:
            head.add_row(ProgressBar(total=max(p.total, 1), completed=p.done, width=30),
                         f"{p.done}/{p.total} method tasks", f"pass {p.passing}", f"not pass {p.failing}",
                         f"ETA {p.eta()}")
        rows = Table.grid(padding=(0, 2))
        for r in sorted(p.running.values(), key=lambda r: r.started):
            rows.add_row(f"  {r.label}", f"{now - r.started:5.0f} s", record_text(r.record))
        return Group(head, rows)
