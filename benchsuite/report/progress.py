"""Progress of a run on the terminal: tasks done, passing, failing, ETA.

On a terminal one line is redrawn in place; otherwise (CI logs, pipes) each
finished task is printed on a line of its own.  Writes to stderr so that
stdout stays clean for machine-readable output.
"""

from __future__ import annotations

import sys
import time

from benchsuite.report.naming import task_label


class Progress:
    def __init__(self, n_tasks: int, stream=None, interactive: bool | None = None):
        self.stream = stream or sys.stderr
        self.interactive = self.stream.isatty() if interactive is None else interactive
        self.total, self.done, self.passing, self.failing = n_tasks, 0, 0, 0
        self.t0 = time.perf_counter()

    def reference_done(self, case: str, basis: str, fields: dict) -> None:
        """One (case, basis) reference ladder finished (``fields``: its job's status and seconds)."""
        self.t0 = time.perf_counter()          # the task phase starts after the last reference: ETA from here
        if not self.interactive:
            state = fields.get("status")
            self.stream.write(f"reference {task_label(case, basis)}: {state} ({fields.get('seconds', 0.0):.1f} s)\n")
            self.stream.flush()

    def eta(self) -> str:
        if not self.done:
            return "--:--"
        # tasks finished before the task phase began (failed references, unusable plugins) cost nothing
        rest = (time.perf_counter() - self.t0) / self.done * (self.total - self.done)
        return f"{int(rest // 60)}:{int(rest % 60):02d}"

    def row_done(self, row) -> None:
        self.done += 1
        if row.verdict == "pass":
            self.passing += 1
        else:
            self.failing += 1
        head = f"[{self.done}/{self.total}] pass {self.passing} fail {self.failing} ETA {self.eta()}"
        if self.interactive:
            self.stream.write("\r" + head.ljust(60))
        else:
            err = "" if row.error_mha is None else f" {row.error_mha:+.4f} mHa"
            task = task_label(row.case, row.basis, row.encoding, row.method)
            self.stream.write(f"{head}  {task}: {row.verdict}{err}\n")
        self.stream.flush()

    def close(self) -> None:
        if self.interactive:
            self.stream.write("\n")
        self.stream.flush()
