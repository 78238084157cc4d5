"""``benchsuite runs``: stored runs as a fixed-width table or JSON (rendering only).

Collected by :func:`benchsuite.store.runs.run_summaries`; newest first.  The
``verdicts`` column is the stored gate decision's counts (``pass 5, below-exact 1``);
``gate`` is ``passed``, ``failed`` or the run's status when it never finished.
"""

from __future__ import annotations

import json

from benchsuite.report.terminal import fixed_table

#: Verdicts listed first in the counts column, in this order; others follow alphabetically.
_ORDER = ("pass", "fail", "inconclusive", "unconverged", "below-exact", "wrong-state", "invalid", "error", "timeout")


def counts_text(counts: dict[str, int]) -> str:
    """``{"pass": 5, "below-exact": 1}`` -> ``"pass 5, below-exact 1"``."""
    keys = [k for k in _ORDER if k in counts] + sorted(k for k in counts if k not in _ORDER)
    return ", ".join(f"{k} {counts[k]}" for k in keys)


def _gate(s) -> str:
    if s.passed is None:
        return s.status
    return "passed" if s.passed else "failed"


def runs_table(summaries) -> str:
    """One line per run: id, start (UTC), source, suite, methods, tasks, verdicts, gate, commit."""
    rows = [[s.run_id, s.started_at.replace("T", " ")[:19], s.source, s.suite or "(cases)",
             ",".join(s.methods), s.n_tasks, counts_text(s.counts), _gate(s),
             "" if not s.commit else s.commit[:10] + ("+" if s.dirty else "")] for s in summaries]
    table = fixed_table(["run id", "started (UTC)", "source", "suite", "methods", "tasks", "verdicts", "gate",
                         "commit"], rows, "lllllrlll")
    return table + f"\n\n{len(rows)} run(s), newest first; '+' after a commit: uncommitted changes"


def runs_json(summaries) -> str:
    """A JSON list of the summaries (fields of :class:`~benchsuite.store.runs.RunSummary`)."""
    return json.dumps([s.to_dict() for s in summaries], indent=2, allow_nan=False)
