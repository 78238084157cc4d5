"""Regressions between two runs: what got worse from a baseline to a new run.

Tasks are matched by what they *are* -- :func:`task_identity`: case, basis,
orbital space, encoding (with its reductions) and method -- never by the hash
of their options, so a changed option default cannot hide a regression.  What
changed around a task (its options, the method's version and source, package
versions) is reported beside the comparison as *changed configuration*.

A regression, per task present in both runs:

* ``pass->not-pass``: the verdict was ``pass`` and is now anything else;
* ``error-grew``: |error| increased by more than ``max_increase_mha``;
* ``new-error``: the status was ``ok`` and is now error, timeout, invalid, ...

Tasks only in the new run are ``new``, tasks only in the baseline ``missing``.
A comparison with no common task, with missing tasks, or with new tasks
(unless allowed) cannot vouch for the new run: :meth:`Comparison.problems`
names why and the gate fails.  Pure: plain records in, plain records out.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

DEFAULT_MAX_INCREASE_MHA = 0.1

REGRESSION_KINDS = ("pass->not-pass", "error-grew", "new-error")


def task_identity(row) -> tuple[str, str, str, str, str]:
    """``(case, basis, space, encoding, method)``: what a task is, whatever its configuration.

    The encoding label is read in its current form, so a baseline stored before the
    ``--drop-spin-parity-qubits`` rename (label ``parity+2qr/blocked``) still matches."""
    from benchsuite.qubit.encodings import current_label

    return (row.case, row.basis, row.space, current_label(row.encoding), row.method)


def identity_label(identity: tuple) -> str:
    case, basis, space, encoding, method = identity
    return f"{method} on {case} ({basis}, {space or 'space n/a'}, {encoding})"


@dataclass(frozen=True)
class Change:
    """One task's change from the baseline; ``config`` lists its configuration changes."""

    kind: str          # pass->not-pass, error-grew, new-error, new, missing, configuration
    case: str
    basis: str
    space: str
    encoding: str
    method: str
    before: str
    after: str
    detail: str
    error_before_mha: float | None = None
    error_after_mha: float | None = None
    config: tuple[str, ...] = ()

    @property
    def is_regression(self) -> bool:
        return self.kind in REGRESSION_KINDS

    @property
    def label(self) -> str:
        return identity_label((self.case, self.basis, self.space, self.encoding, self.method))


@dataclass(frozen=True)
class Comparison:
    """Everything a baseline check found, as plain data (see :meth:`to_dict`)."""

    base_id: str
    new_id: str
    max_increase_mha: float
    n_common: int
    changes: list[Change] = field(default_factory=list)
    config_changes: list[str] = field(default_factory=list)
    allow_new: bool = False

    @property
    def regressions(self) -> list[Change]:
        return [c for c in self.changes if c.is_regression]

    def _kind(self, kind: str) -> list[Change]:
        return [c for c in self.changes if c.kind == kind]

    def problems(self) -> list[str]:
        """Why this comparison fails the gate, as sentences (empty when it does not)."""
        out = []
        if self.n_common == 0:
            out.append(f"runs {self.base_id} and {self.new_id} share no task: nothing was compared")
        if self.regressions:
            out.append(f"{len(self.regressions)} regression(s) against baseline {self.base_id}")
        if missing := self._kind("missing"):
            out.append(f"{len(missing)} baseline task(s) missing from the new run")
        if (new := self._kind("new")) and not self.allow_new:
            out.append(f"{len(new)} task(s) not in the baseline (allow them with --allow-new)")
        return out

    @property
    def passed(self) -> bool:
        return not self.problems()

    def to_dict(self) -> dict:
        doc = asdict(self)
        doc["regressions"] = len(self.regressions)
        doc["problems"] = self.problems()
        return doc


def compare_runs(base_run, base_rows: list, new_run, new_rows: list,
                 max_increase_mha: float = DEFAULT_MAX_INCREASE_MHA, allow_new: bool = False) -> Comparison:
    """Compare two stored runs (``RunRecord`` and its ``ResultRow`` list each)."""
    before = _by_identity(base_rows)
    after = _by_identity(new_rows)
    changes = []
    for ident, n in after.items():
        b = before.get(ident)
        if b is None:
            changes.append(_change("new", n, "-", n.verdict, "task not in the baseline"))
            continue
        config = tuple(_task_config_changes(base_run, b, new_run, n))
        change = _task_change(b, n, max_increase_mha, config)
        if change is None and config:
            change = _change("configuration", n, b.verdict, n.verdict, "changed configuration", b, config)
        if change is not None:
            changes.append(change)
    for ident, b in before.items():
        if ident not in after:
            changes.append(_change("missing", b, b.verdict, "-", "task not in the new run"))
    changes.sort(key=lambda c: (not c.is_regression, c.kind, -abs(c.error_after_mha or 0.0), c.case, c.method))
    return Comparison(base_run.run_id, new_run.run_id, max_increase_mha, len(set(before) & set(after)),
                      changes, run_config_changes(base_run, new_run), allow_new)


def _by_identity(rows) -> dict:
    return {task_identity(r): r for r in rows}


def _task_change(b, n, max_increase_mha: float, config: tuple) -> Change | None:
    if b.status == "ok" and n.status != "ok":
        return _change("new-error", n, b.status, n.status, (n.message.strip().split("\n") or [""])[0], b, config)
    if b.verdict == "pass" and n.verdict != "pass":
        return _change("pass->not-pass", n, b.verdict, n.verdict, _errors(b, n), b, config)
    if b.error_mha is not None and n.error_mha is not None and \
            abs(n.error_mha) - abs(b.error_mha) > max_increase_mha:
        return _change("error-grew", n, b.verdict, n.verdict, _errors(b, n), b, config)
    return None


def _task_config_changes(base_run, b, new_run, n) -> list[str]:
    out = []
    for key in sorted(set(b.options) | set(n.options)):
        if b.options.get(key, "<unset>") != n.options.get(key, "<unset>"):
            out.append(f"option {key}: {b.options.get(key, '<unset>')!r} -> {n.options.get(key, '<unset>')!r}")
    pb, pn = (base_run.plugin_git or {}).get(b.method, {}), (new_run.plugin_git or {}).get(n.method, {})
    for key in ("package", "version", "commit", "dirty", "source"):
        if pb.get(key) != pn.get(key):
            out.append(f"method {key}: {pb.get(key)!r} -> {pn.get(key)!r}")
    return out


def run_config_changes(base_run, new_run) -> list[str]:
    """Run-wide configuration differences: package versions and the threshold."""
    out = []
    pb, pn = base_run.packages or {}, new_run.packages or {}
    for name in sorted(set(pb) | set(pn)):
        if pb.get(name) != pn.get(name):
            out.append(f"package {name}: {pb.get(name)} -> {pn.get(name)}")
    if base_run.threshold_mha != new_run.threshold_mha:
        out.append(f"threshold: {base_run.threshold_mha:.4f} -> {new_run.threshold_mha:.4f} mHa")
    return out


def _errors(b, n) -> str:
    return f"|error| {abs(b.error_mha):.4f} -> {abs(n.error_mha):.4f} mHa" \
        if b.error_mha is not None and n.error_mha is not None else ""


def _change(kind, row, before, after, detail, base_row=None, config=()) -> Change:
    return Change(kind, row.case, row.basis, row.space, row.encoding, row.method, before, after, detail,
                  None if base_row is None else base_row.error_mha,
                  row.error_mha if kind != "missing" else None, tuple(config))
