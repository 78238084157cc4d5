"""The run's summary on the terminal, rendered from its gate decision.

Chemistry first, plain text, fixed width, no colour:

1. a heading: the run, its task count and the accuracy it asks for (the threshold and its source);
2. one line per method: its tasks, how many lie within the threshold ("within 1 kcal/mol" when the
   threshold is chemical accuracy), the worst error in mHa (signed, any status) with its case and
   basis, and the mean absolute error over every task with an error;
3. ``worst error:`` the run's largest |error|, its verdict and task;
4. the tasks that did not pass, worst first, each led by its error in mHa and its size in units
   of the threshold, then its verdict and its task (:func:`benchsuite.report.naming.task_label`);
   the method's message, if any, on the next line;
5. unconverged results, converged-but-failing results, how stochastic fail claims were controlled, the baseline comparison;
6. a last line ``gate passed`` or ``gate failed: <reasons>``, exactly the stored decision.

Never counts verdicts to decide anything: the decision is ``gate`` (``GateDecision.to_dict()``).
Numbers use an ASCII minus so that logs stay greppable.  Units: mHa for errors and thresholds.
"""

from __future__ import annotations

from benchsuite.report.naming import basis_label, task_label
from benchsuite.report.tables import format_number
from benchsuite.scoring import DEFAULT_THRESHOLD_MHA, method_statistics

MAX_LISTED = 40
REGRESSION_KINDS = ("pass->not-pass", "error-grew", "new-error")


def fixed_table(headers: list[str], rows: list[list], aligns: str | None = None) -> str:
    """A plain fixed-width table (``rich``, no colour, no box): a header line, a rule of dashes, one
    line per row; ``aligns`` one of 'l'/'r' per column (default left); ``None`` cells are blank.
    Never wrapped or cut: a long cell widens its column."""
    from io import StringIO

    from rich import box
    from rich.console import Console
    from rich.table import Table

    aligns = aligns or "l" * len(headers)
    table = Table(box=box.Box("    \n    \n -  \n    \n    \n    \n    \n    \n", ascii=True), show_edge=False,
                  pad_edge=False, padding=(0, 1), collapse_padding=True, safe_box=True)
    for h, a in zip(headers, aligns):
        table.add_column(h, justify="right" if a == "r" else "left", no_wrap=True)
    for row in rows:
        table.add_row(*[("" if c is None else str(c)) for c in row])
    out = StringIO()
    Console(file=out, width=10_000, color_system=None, highlight=False, markup=False, emoji=False,
            legacy_windows=False).print(table)
    return "\n".join(line.rstrip() for line in out.getvalue().splitlines())


def _num(x, spec: str = ".4f") -> str:
    """A number for the terminal; one that prints as zero carries no sign (``+0.0000``, not ``-0.0000``)."""
    return "n/a" if x is None else format_number(x, spec)


def within_label(rows, threshold_mha: float) -> str:
    """``within 1 kcal/mol`` when every row is judged at chemical accuracy, else ``within threshold``."""
    if rows and all(abs(r.threshold_mha - DEFAULT_THRESHOLD_MHA) < 1e-9 for r in rows):
        return "within 1 kcal/mol"
    return "within threshold"


def _method_table(rows) -> str:
    by_method: dict[str, list] = {}
    for r in rows:
        by_method.setdefault(r.method, []).append(r)
    table = []
    for method, items in by_method.items():
        st = method_statistics(method, [r.error_mha for r in items], [r.verdict for r in items])
        scored = [r for r in items if r.error_mha is not None]
        worst = max(scored, key=lambda r: abs(r.error_mha)) if scored else None
        n_pass = sum(r.verdict == "pass" for r in items)
        table.append([method, len(items), f"{n_pass} / {len(items)}",
                      _num(worst and worst.error_mha, "+.4f"),
                      "" if worst is None else f"{worst.case} / {basis_label(worst.basis)}"
                      + ("" if worst.verdict == "pass" else f" ({worst.verdict})"),
                      _num(st.mae_mha)])
    return fixed_table(["method", "tasks", within_label(rows, 0.0), "worst error / mHa", "worst case",
                        "MAE / mHa"], table, "lrrrlr")


def _task_line(t: dict) -> str:
    """``  -164.1915 mHa  103.0 x thr  below-exact  heh-cation / STO-3G / jordan-wigner · tallowick``."""
    if t["error_mha"] is None:
        size = f"{'no energy':>14s}  {'':>11s}"
    else:
        ratio = abs(t["error_mha"]) / t["threshold_mha"] if t.get("threshold_mha") else None
        size = f"{_num(t['error_mha'], '+10.4f')} mHa  " + (f"{ratio:7.1f} x thr" if ratio is not None else " " * 11)
    line = f"  {size}  {t['verdict']:<12s} {task_label(t['case'], t['basis'], t['encoding'], t['method'])}"
    if t.get("message"):
        line += "\n" + " " * 16 + t["message"]
    return line


def baseline_lines(b: dict) -> list[str]:
    lines = [f"baseline {b['base_id']}: {b['n_common']} common task(s), {b['regressions']} regression(s)"
             f" (|error| growth limit {b['max_increase_mha']:g} mHa)"]
    for c in b["changes"]:
        head = "regression" if c["kind"] in REGRESSION_KINDS else "note"
        lines.append(f"  {head:<10s} {c['kind']:<14s} {task_label(c['case'], c['basis'], c['encoding'], c['method'])}"
                     f": {c['before']} -> {c['after']} {c['detail']}".rstrip())
        if c["config"]:
            lines.append("             changed configuration: " + "; ".join(c["config"]))
    if b["config_changes"]:
        lines.append("  changed configuration of the run: " + "; ".join(b["config_changes"]))
    lines += [f"  problem: {p}" for p in b["problems"]]
    return lines


def _listed(title: str, tasks: list[dict]) -> list[str]:
    lines = [title] + [_task_line(t) for t in tasks[:MAX_LISTED]]
    if len(tasks) > MAX_LISTED:
        lines.append(f"  ... and {len(tasks) - MAX_LISTED} more (see --json or the report)")
    return lines


def render_summary(run, rows, gate: dict) -> str:
    """The terminal summary of ``run`` with final ``rows`` and its decision ``gate`` (a dict)."""
    lines = [f"run {run.run_id} · {gate['n_tasks']} task(s), {gate['n_scored']} scored · "
             f"pass if |error| <= {run.threshold_mha:.4f} mHa ({run.threshold_source})", "",
             _method_table(rows), ""]
    if gate["worst"] is not None:
        w = gate["worst"]
        lines.append(f"worst error: {_num(w['error_mha'], '+.4f')} mHa ({w['verdict']}) "
                     f"{task_label(w['case'], w['basis'], w['encoding'], w['method'])}")
    if gate["failing"]:
        lines += _listed(f"not passing, worst first ({len(gate['failing'])}):", gate["failing"])
    if gate["unconverged"]:
        rule = "they fail the gate (--require-converged)" if gate["require_converged"] else "flagged only"
        lines += _listed(f"not converged ({len(gate['unconverged'])}, {rule}):", gate["unconverged"])
    if gate.get("converged_failing"):
        lines += _listed(f"converged but not passing ({len(gate['converged_failing'])}; the method stopped on its "
                         "own criterion, not a solver success):", gate["converged_failing"])
    st = gate["stochastic"]
    if st["n_tasks"]:
        lines.append(f"stochastic fail claims: {st['procedure_name']} over {st['n_tasks']} task(s), "
                     f"{st['controls']} at {100 * st['level']:g} %")
    if gate["baseline"] is not None:
        lines += baseline_lines(gate["baseline"])
    decision = "passed" if gate["passed"] else "failed: " + "; ".join(gate["reasons"])
    lines.append(f"gate {decision}")
    return "\n".join(lines)
