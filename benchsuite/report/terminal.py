"""The run's summary on the terminal, rendered from its gate decision.

Layout (plain text, fixed width, no colour): a heading line naming the run
and threshold; one line per method (tasks, scored tasks, passing, not
passing, worst |error|, MAE and RMSE over *every* task with an error,
whatever its verdict); the tasks that did not pass, worst first, each led by
its error in mHa; unconverged results; how stochastic fail claims were
controlled; the baseline comparison with its configuration changes; and a last
line with the decision.  Units: mHa for errors and thresholds.
"""

from __future__ import annotations

from benchsuite.scoring import is_failing, method_statistics

MAX_LISTED = 40


def fixed_table(headers: list[str], rows: list[list], aligns: str | None = None) -> str:
    """Plain fixed-width table; ``aligns`` one of 'l'/'r' per column (default left)."""
    cells = [[("" if c is None else str(c)) for c in row] for row in rows]
    widths = [max([len(h)] + [len(r[i]) for r in cells]) for i, h in enumerate(headers)]
    aligns = aligns or "l" * len(headers)

    def line(vals):
        return "  ".join(v.rjust(w) if a == "r" else v.ljust(w)
                         for v, w, a in zip(vals, widths, aligns)).rstrip()

    rule = "  ".join("-" * w for w in widths)
    return "\n".join([line(headers), rule] + [line(r) for r in cells])


def _num(x, spec: str = ".4f") -> str:
    return "n/a" if x is None else format(x, spec)


def _method_lines(rows, allow_inconclusive: bool) -> str:
    by_method: dict[str, list] = {}
    for r in rows:
        by_method.setdefault(r.method, []).append(r)
    table = []
    for method, items in by_method.items():
        st = method_statistics(method, [r.error_mha for r in items], [r.verdict for r in items])
        n_bad = sum(is_failing(r.verdict, allow_inconclusive) for r in items)
        table.append([method, st.n_tasks, st.n_scored, sum(r.verdict == "pass" for r in items), n_bad,
                      _num(st.max_abs_error_mha), _num(st.mae_mha), _num(st.rmse_mha)])
    return fixed_table(["method", "tasks", "scored", "pass", "not passing", "worst |error| (mHa)",
                        "MAE (mHa)", "RMSE (mHa)"], table, "lrrrrrrr")


def _task_line(t: dict) -> str:
    err = f"{t['error_mha']:+11.4f} mHa" if t["error_mha"] is not None else f"{'no error':>15s}"
    msg = f": {t['message']}" if t["message"] else ""
    return f"  {err}  {t['verdict']:<12s} {t['method']} on {t['case']} ({t['basis']}, {t['encoding']}){msg}"


def baseline_lines(b: dict) -> list[str]:
    lines = [f"baseline {b['base_id']}: {b['n_common']} common task(s), {b['regressions']} regression(s)"
             f" (|error| growth limit {b['max_increase_mha']:g} mHa)"]
    for c in b["changes"]:
        head = "regression" if c["kind"] in ("pass->not-pass", "error-grew", "new-error") else "note"
        lines.append(f"  {head:<10s} {c['kind']:<14s} {c['method']} on {c['case']} ({c['basis']}, "
                     f"{c['encoding']}): {c['before']} -> {c['after']} {c['detail']}".rstrip())
        if c["config"]:
            lines.append("             changed configuration: " + "; ".join(c["config"]))
    if b["config_changes"]:
        lines.append("  changed configuration of the run: " + "; ".join(b["config_changes"]))
    lines += [f"  problem: {p}" for p in b["problems"]]
    return lines


def render_summary(run, rows, gate: dict) -> str:
    """The terminal summary of ``run`` with final ``rows`` and its decision ``gate`` (a dict)."""
    lines = [f"run {run.run_id}: {gate['n_tasks']} task(s), {gate['n_scored']} with an error; "
             f"threshold {run.threshold_mha:.4f} mHa ({run.threshold_source})", _method_lines(rows, gate[
                 "allow_inconclusive"])]
    if gate["worst"] is not None:
        w = gate["worst"]
        lines.append(f"worst error: {w['error_mha']:+.4f} mHa, {w['verdict']}, {w['method']} on {w['case']} "
                     f"({w['basis']})")
    if gate["failing"]:
        lines.append(f"not passing, worst first ({len(gate['failing'])}):")
        lines += [_task_line(t) for t in gate["failing"][:MAX_LISTED]]
        if len(gate["failing"]) > MAX_LISTED:
            lines.append(f"  ... and {len(gate['failing']) - MAX_LISTED} more (see --json or the report)")
    if gate["unconverged"]:
        rule = "they fail the gate (--require-converged)" if gate["require_converged"] else "flagged only"
        lines.append(f"not converged ({len(gate['unconverged'])}, {rule}):")
        lines += [_task_line(t) for t in gate["unconverged"][:MAX_LISTED]]
    st = gate["stochastic"]
    if st["n_tasks"]:
        lines.append(f"stochastic fail claims: {st['procedure_name']} over {st['n_tasks']} task(s), "
                     f"{st['controls']} at {100 * st['level']:g} %")
    if gate["baseline"] is not None:
        lines += baseline_lines(gate["baseline"])
    decision = "passed" if gate["passed"] else "failed: " + "; ".join(gate["reasons"])
    lines.append(f"gate {decision}")
    return "\n".join(lines)
