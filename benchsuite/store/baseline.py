"""Regressions between two runs: what got worse from a baseline to a new run.

A regression, per task present in both runs (matched by task key):

* ``pass -> not pass``: the verdict was ``pass`` and is now anything else;
* ``error grew``: |error| increased by more than ``max_increase_mha``;
* ``new error``: the status was ``ok`` and is now error, timeout, invalid or below-exact.

Tasks only in the new run are listed as ``new`` and tasks only in the baseline
as ``missing``; neither counts as a regression.
"""

from __future__ import annotations

from dataclasses import dataclass

DEFAULT_MAX_INCREASE_MHA = 0.1


@dataclass(frozen=True)
class Change:
    kind: str          # pass->fail, error-grew, new-error, new, missing
    task_key: str
    case: str
    basis: str
    method: str
    before: str
    after: str
    detail: str

    @property
    def is_regression(self) -> bool:
        return self.kind in ("pass->fail", "error-grew", "new-error")


def compare_rows(base: list, new: list, max_increase_mha: float = DEFAULT_MAX_INCREASE_MHA) -> list[Change]:
    """Changes from ``base`` to ``new`` (lists of ResultRow), regressions first."""
    before = {r.task_key: r for r in base}
    after = {r.task_key: r for r in new}
    changes = []
    for key, n in after.items():
        b = before.get(key)
        if b is None:
            changes.append(_change("new", n, "-", n.verdict, "task not in the baseline"))
            continue
        if b.status == "ok" and n.status != "ok":
            changes.append(_change("new-error", n, b.status, n.status, n.message.strip().split("\n")[0]))
        elif b.verdict == "pass" and n.verdict != "pass":
            changes.append(_change("pass->fail", n, b.verdict, n.verdict, _errors(b, n)))
        elif b.error_mha is not None and n.error_mha is not None and \
                abs(n.error_mha) - abs(b.error_mha) > max_increase_mha:
            changes.append(_change("error-grew", n, b.verdict, n.verdict, _errors(b, n)))
    for key, b in before.items():
        if key not in after:
            changes.append(_change("missing", b, b.verdict, "-", "task not in the new run"))
    changes.sort(key=lambda c: (not c.is_regression, c.kind, c.case, c.method))
    return changes


def _errors(b, n) -> str:
    return f"|error| {abs(b.error_mha):.4f} -> {abs(n.error_mha):.4f} mHa" \
        if b.error_mha is not None and n.error_mha is not None else ""


def _change(kind, row, before, after, detail) -> Change:
    return Change(kind, row.task_key, row.case, row.basis, row.method, before, after, detail)
