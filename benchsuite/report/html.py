"""The one-file HTML report of a stored run.

Three stages, each testable on its own:

1. **collect** -- :func:`collect_report` reads the run record and its result
   rows from the store (and the bibliography from the registry) into plain
   dataclasses, :class:`ReportData`: the gate decision, the accuracy matrix
   (:mod:`benchsuite.report.matrix`), the scans, one table per method (worst
   first), the reference ladders, resources, provenance and bibliography.  :func:`build_report` does the same from records already
   in hand.
2. **compare** -- done while collecting, from stored numbers only: gate
   verdict and counts, :func:`benchsuite.scoring.method_statistics` per
   method, :func:`benchsuite.scoring.curve_statistics` per scan and method,
   each rung's deviation from the primary reference, every error on the
   accuracy scale (units of its threshold).
3. **render** -- :func:`render_html` turns a :class:`ReportData` into one
   self-contained page: jinja2 with autoescape, CSS and a small vanilla
   script inline, plots as inline SVG (:mod:`benchsuite.report.plots`), a
   Content-Security-Policy that forbids every fetch, no external URL anywhere
   outside the bibliography's plain text.

Tasks are named as :mod:`benchsuite.report.naming` names them (molecule
formula, case, basis as published, encoding, method).  Verdicts are always
spelled out (``PASS``, ``FAIL``, ...) with a glyph; colour only repeats what
the text says.  Sections with nothing to show (no scan, no baseline, no
resources) are left out.  Units: Eh for energies, mHa for
errors, thresholds and sigma, s for times.  No PySCF, no OpenFermion.
"""

from __future__ import annotations

import math
import os
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

from benchsuite.report.gate import is_failing
from benchsuite.report.matrix import (SCALE_EDGES, VERDICT_LABELS, AccuracyMatrix, build_matrix, geometry_label,
                                      length_unit, verdict_label)
from benchsuite.report.naming import basis_label, encoding_label, molecule_of, task_label
from benchsuite.report.tables import format_number, is_number, results_hash, row_citations
from benchsuite.scoring import VERDICTS, CurveStatistics, MethodStatistics, curve_statistics, method_statistics

TEMPLATE_DIR = Path(__file__).with_name("templates")

__all__ = ["VERDICT_LABELS", "verdict_label", "build_report", "collect_report", "render_html", "write_report"]
#: Rungs in ladder order; any other rung (UHF-based ones) follows, the primary last.
RUNG_ORDER = ("hf", "mp2", "ccsd", "ccsd(t)")
PRIMARY_RUNGS = ("fci", "casci")


# -- the collected data ------------------------------------------------------------------

@dataclass
class TaskRow:
    """One task as the method tables show it."""

    task_key: str
    case: str
    basis: str
    encoding: str
    space: str
    method: str
    n_qubits: int | None
    n_terms: int | None
    energy_ha: float | None
    reference_energy_ha: float | None
    reference_method: str | None
    error_mha: float | None
    sigma_mha: float | None
    threshold_mha: float
    verdict: str
    status: str
    seconds: float
    tags: list[str]
    message: str
    scan_parent: str | None = None
    scan_length: float | None = None
    sources: list[str] = field(default_factory=list)
    converged: bool | None = None
    captured_output: str = ""       # what the method's worker printed (bounded by the store), shown escaped
    anchor: str = ""                # the row's id (the accuracy matrix links to it)
    label: str = ""                 # task_label: "h2 / STO-3G / jordan-wigner · exact-sector"
    molecule_html: str = ""         # formula with charge and state as escaped HTML, "" without a registry
    geometry: str = ""              # "h2" or "h2-scan, r = 0.7 Å"
    basis_label: str = ""           # the basis as published
    encoding_label: str = ""

    @property
    def ratio(self) -> float | None:
        """|error| in units of the task's threshold."""
        if self.error_mha is None or not self.threshold_mha:
            return None
        return abs(self.error_mha) / self.threshold_mha


@dataclass
class MethodSummary:
    method: str
    counts: dict[str, int]
    stats: MethodStatistics
    n_failing: int
    stochastic: bool
    worst: tuple | None = None      # (case, basis, error_mha, verdict) of the largest |error|, any status


@dataclass
class MethodTable:
    summary: MethodSummary
    rows: list[TaskRow]
    show_sigma: bool
    show_threshold: bool
    encodings: list[str] = field(default_factory=list)

    @property
    def show_encoding(self) -> bool:
        """One column per row only when the table mixes encodings; otherwise named above it."""
        return len(self.encodings) > 1


@dataclass
class ScanSeries:
    method: str
    lengths: list[float]
    energies: list[float]
    errors: list[float | None]
    sigmas_mha: list[float | None]
    verdicts: list[str]
    stats: CurveStatistics | None


@dataclass
class ScanData:
    name: str
    basis: str
    encoding: str
    reference_method: str | None
    lengths: list[float]
    reference_energies: list[float]
    series: list[ScanSeries]
    threshold_mha: float
    svg: str = ""
    length_unit: str = "Å"
    basis_label: str = ""
    title: str = ""


@dataclass
class Rung:
    method: str
    energy_ha: float | None
    status: str
    delta_mha: float | None        # 1000 (E_rung - E_primary)


@dataclass
class Published:
    method: str
    basis: str
    energy_ha: float
    source: str
    from_memory: bool
    delta_mha: float | None         # 1000 (E_published - E_primary)


@dataclass
class Ladder:
    case: str
    basis: str
    space: str
    scf_method: str | None
    scf_converged: bool | None
    scf_stable: bool | None
    scf_flags: list[str]
    primary: str | None
    primary_energy_ha: float | None
    rungs: list[Rung]
    published: list[Published]

    def rung(self, name: str) -> Rung | None:
        return next((r for r in self.rungs if r.method == name), None)


@dataclass
class ResourceRow:
    case: str
    basis: str
    encoding: str
    method: str
    verdict: str
    tags: list[str]
    n_qubits: int | None
    n_terms: int | None
    one_norm_ha: float | None
    qwc_groups: int | None
    n_parameters: int | None
    two_qubit_gates: int | None
    circuit_depth: int | None
    shots: int | None


@dataclass
class Citation:
    key: str
    text: str
    locators: list[str]        # doi / url as plain text, never links
    raw: str
    uses: list[str]
    found: bool


@dataclass
class Provenance:
    run_id: str
    status: str
    started_at: str
    finished_at: str | None
    command: str
    suite: str | None
    cases: list[str]
    methods: list[str]
    options: dict
    encoding: str
    threshold_mha: float
    threshold_source: str
    seed: int
    packages: dict
    git: dict
    plugin_git: dict
    machine: dict
    results_hash: str


@dataclass
class ReportData:
    title: str
    run_id: str
    gate: dict                 # the run's gate decision (GateDecision.to_dict(), as stored)
    gate_passed: bool
    n_tasks: int
    n_failing: int
    counts: dict[str, int]
    threshold_mha: float
    threshold_source: str
    summaries: list[MethodSummary]
    tables: list[MethodTable]
    matrix: AccuracyMatrix
    scans: list[ScanData]
    ladders: list[Ladder]
    resources: list[ResourceRow]
    provenance: Provenance
    bibliography: list[Citation]
    tags: list[str]
    verdicts: list[str]
    ladder_rungs: list[str] = field(default_factory=list)
    scale_edges: tuple = SCALE_EDGES
    within_label: str = "within threshold"


# -- collect and compare -----------------------------------------------------------------

def collect_report(store, run_id: str, registry=None, title: str | None = None) -> ReportData:
    """Everything the report shows, from the stored run ``run_id`` (a full id)."""
    return build_report(store.get_run(run_id), store.results(run_id), registry, title, store.references(run_id))


def _scored(row) -> float | None:
    """Every task with an error counts in the statistics, whatever its verdict."""
    return row.error_mha


def _counts(verdicts) -> dict[str, int]:
    """Verdict -> count, in scoring's order, then any verdict scoring does not list yet."""
    verdicts = list(verdicts)
    order = list(VERDICTS) + [v for v in dict.fromkeys(verdicts) if v not in VERDICTS]
    return {v: verdicts.count(v) for v in order if v in verdicts}


def worst_first(row) -> tuple:
    """Table order: failing tasks first; then by |error| descending (as shown, to 1e-4 mHa), tasks
    without an error first; ties in chemical order (molecule, bond length, basis)."""
    return (not is_failing(row.verdict), row.error_mha is not None, -round(abs(row.error_mha or 0.0), 4),
            row.scan_parent or row.case, row.scan_length or 0.0, row.case, row.basis)


def _method_parts(run, rows, registry, anchors):
    method_order = list(dict.fromkeys(list(run.methods) + [r.method for r in rows]))
    by_method = {m: [r for r in rows if r.method == m] for m in method_order}
    by_method = {m: items for m, items in by_method.items() if items}
    summaries, tables = [], []
    for method, items in by_method.items():
        summary = MethodSummary(
            method=method, counts=_counts(r.verdict for r in items),
            stats=method_statistics(method, [_scored(r) for r in items], [r.verdict for r in items]),
            n_failing=sum(is_failing(r.verdict) for r in items),
            stochastic=any(r.stderr_ha is not None for r in items), worst=_worst(items))
        summaries.append(summary)
        tables.append(MethodTable(summary=summary,
                                  rows=[_task_row(r, registry, anchors[r.task_key])
                                        for r in sorted(items, key=worst_first)],
                                  show_sigma=summary.stochastic,
                                  show_threshold=any(abs(r.threshold_mha - run.threshold_mha) > 1e-12
                                                     for r in items),
                                  encodings=list(dict.fromkeys(r.encoding for r in items))))
    return list(by_method), summaries, tables


def build_report(run, rows, registry=None, title: str | None = None, references=()) -> ReportData:
    """:class:`ReportData` from a :class:`RunRecord`, its :class:`ResultRow` list and its stored
    reference ladders (:class:`~benchsuite.store.records.StoredReference`; a run stored before the
    references table has none, and its ladders are read from the rows' copies)."""
    from benchsuite.report.terminal import within_label

    rows = sorted(rows, key=lambda r: (r.method, r.scan_parent or r.case, r.scan_length or 0.0, r.case,
                                       r.basis, r.encoding, r.task_key))
    anchors = {r.task_key: f"task-{n}" for n, r in enumerate(rows)}
    methods, summaries, tables = _method_parts(run, rows, registry, anchors)
    gate = stored_gate(run, rows)
    counts = _counts(r.verdict for r in rows)
    return ReportData(
        title=title or default_title(run, methods), gate=gate,
        run_id=run.run_id, gate_passed=gate["passed"], n_tasks=len(rows), n_failing=len(gate["failing"]),
        counts=counts, threshold_mha=run.threshold_mha,
        threshold_source=run.threshold_source, summaries=summaries, tables=tables,
        matrix=build_matrix(rows, methods, anchors, gate, registry, VERDICTS),
        scans=_scans(rows, run.threshold_mha, registry),
        ladders=(ladders := _stored_ladders(references, rows) or _ladders(rows)),
        ladder_rungs=_ladder_columns(ladders),
        resources=[_resource_row(r) for r in sorted(rows, key=worst_first)],
        provenance=_provenance(run, rows), bibliography=_bibliography(rows, registry),
        tags=sorted({t for r in rows for t in r.tags}), verdicts=list(counts),
        within_label=within_label(rows, run.threshold_mha))


def default_title(run, methods: list[str]) -> str:
    """``exact-sector and tallowick on the smoke suite``: what was judged on what."""
    names = [m.rsplit(":", 1)[-1] if ":" in m else m for m in methods] or list(run.methods)
    who = names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1] if names else "no method"
    what = f"the {run.suite} suite" if run.suite else (
        ", ".join(run.cases) if 0 < len(run.cases) <= 4 else f"{len(run.cases)} cases")
    return f"{who} on {what}"


def stored_gate(run, rows) -> dict:
    """The run's gate decision as stored at the end of the run; for a run that has none (stored by an
    older version, or still running) a decision from the verdicts alone, saying so."""
    gate = (run.summary or {}).get("gate")
    if gate is not None:
        return gate
    failing = [{"verdict": r.verdict, "method": r.method, "case": r.case, "basis": r.basis,
                "error_mha": r.error_mha} for r in rows if is_failing(r.verdict)]
    reasons = ([] if rows else ["no task ran"]) + (
        [f"{len(failing)} of {len(rows)} task(s) not passing"] if failing else [])
    reasons.append("no gate decision was stored with this run (status "
                   f"{run.status}); judged from the stored verdicts only")
    return {"passed": False, "reasons": reasons, "failing": failing, "unconverged": [], "baseline": None,
            "stochastic": {"n_tasks": 0}, "worst": None, "n_tasks": len(rows), "counts": _counts(r.verdict for r in rows)}


def _worst(items) -> tuple | None:
    scored = [r for r in items if r.error_mha is not None]
    if not scored:
        return None
    r = max(scored, key=lambda r: abs(r.error_mha))
    return (r.case, r.basis, r.error_mha, r.verdict)


def _task_row(r, registry, anchor: str) -> TaskRow:
    mol = molecule_of(r.case, registry)
    return TaskRow(task_key=r.task_key, case=r.case, basis=r.basis, encoding=r.encoding, space=r.space,
                   method=r.method, n_qubits=r.n_qubits, n_terms=r.n_terms, energy_ha=r.energy_ha,
                   reference_energy_ha=r.reference_energy_ha, reference_method=r.reference_method,
                   error_mha=r.error_mha, sigma_mha=None if r.stderr_ha is None else 1000.0 * r.stderr_ha,
                   threshold_mha=r.threshold_mha, verdict=r.verdict, status=r.status, seconds=r.seconds,
                   tags=list(r.tags), message=r.message.strip(), scan_parent=r.scan_parent,
                   scan_length=r.scan_length, sources=row_citations(r, registry), converged=r.converged,
                   captured_output=_output_tail(r.captured_output or ""), anchor=anchor,
                   label=task_label(r.case, r.basis, r.encoding, r.method, full_encoding=True),
                   molecule_html="" if mol is None else mol.html(), geometry=geometry_label(r, registry),
                   basis_label=basis_label(r.basis), encoding_label=encoding_label(r.encoding))


#: Characters of a task's worker output the report shows (its end); the JSON export has all that is stored.
REPORT_OUTPUT_CHARS = 4000


def _output_tail(text: str) -> str:
    if len(text) <= REPORT_OUTPUT_CHARS:
        return text
    return (f"[... {len(text) - REPORT_OUTPUT_CHARS:,} earlier characters: see `benchsuite export --format json`]\n"
            + text[-REPORT_OUTPUT_CHARS:])


def _scans(rows, threshold_mha: float, registry=None) -> list[ScanData]:
    groups: dict[tuple, list] = {}
    for r in rows:
        if r.scan_parent and r.scan_length is not None:
            groups.setdefault((r.scan_parent, r.basis, r.encoding), []).append(r)
    scans = []
    for (name, basis, enc), items in sorted(groups.items()):
        refs = {}
        for r in items:
            if r.reference_energy_ha is not None:
                refs.setdefault(r.scan_length, (r.reference_energy_ha, r.reference_method))
        lengths = sorted(refs)
        series = []
        for method in dict.fromkeys(r.method for r in items):
            pts = sorted((r for r in items if r.method == method and r.energy_ha is not None),
                         key=lambda r: r.scan_length)
            if not pts:
                continue
            series.append(ScanSeries(
                method=method, lengths=[r.scan_length for r in pts], energies=[r.energy_ha for r in pts],
                errors=[r.error_mha for r in pts],
                sigmas_mha=[None if r.stderr_ha is None else 1000.0 * r.stderr_ha for r in pts],
                verdicts=[r.verdict for r in pts],
                stats=curve_statistics(name, [_scored(r) for r in pts])))
        thresholds = {r.threshold_mha for r in items}
        scans.append(ScanData(
            name=name, basis=basis, encoding=enc,
            reference_method=next((refs[x][1] for x in lengths), None), lengths=lengths,
            reference_energies=[refs[x][0] for x in lengths], series=series,
            threshold_mha=thresholds.pop() if len(thresholds) == 1 else threshold_mha,
            length_unit=length_unit(items[0].case, registry), basis_label=basis_label(basis),
            title=getattr((registry.cases.get(name) if registry is not None else None), "title", "")))
    return scans


def _rung_sort_key(name: str) -> tuple:
    if name in RUNG_ORDER:
        return (0, RUNG_ORDER.index(name), name)
    return (2 if name in PRIMARY_RUNGS else 1, 0, name)


def _delta(energy, primary) -> float | None:
    return None if energy is None or primary is None else 1000.0 * (energy - primary)


def _ladder_view(case: str, basis: str, space: str, scf: dict, primary: str | None, primary_energy_ha,
                 rungs: dict, published: list) -> Ladder:
    """The report's ladder: ``rungs`` maps a rung to ``{"energy_ha", "status"}``, ``published`` holds
    ``{"method", "basis", "energy_ha", "source", "from_memory"}``; deltas against the primary in mHa."""
    return Ladder(
        case=case, basis=basis, space=space, scf_method=scf.get("method"), scf_converged=scf.get("converged"),
        scf_stable=scf.get("stable"), scf_flags=list(scf.get("flags") or []), primary=primary,
        primary_energy_ha=primary_energy_ha,
        rungs=[Rung(name, v.get("energy_ha"), v.get("status", ""), _delta(v.get("energy_ha"), primary_energy_ha))
               for name, v in sorted(rungs.items(), key=lambda kv: _rung_sort_key(kv[0]))],
        published=[Published(p.get("method", ""), p.get("basis", basis), p["energy_ha"], p.get("source", ""),
                             bool(p.get("from_memory")), _delta(p["energy_ha"], primary_energy_ha))
                   for p in published or [] if p.get("energy_ha") is not None])


def _ladders(rows) -> list[Ladder]:
    """One ladder per (case, basis) from the first row that carries one (every method shares it)."""
    seen: dict[tuple, Ladder] = {}
    for r in sorted(rows, key=lambda r: (r.scan_parent or r.case, r.scan_length or 0.0, r.case, r.basis)):
        key = (r.case, r.basis)
        rungs = (r.secondary or {}).get("rungs") or {}
        if key in seen and (seen[key].rungs or not rungs):
            continue
        seen[key] = _ladder_view(r.case, r.basis, r.space, r.scf or {}, r.reference_method, r.reference_energy_ha,
                                 rungs, (r.secondary or {}).get("published"))
    return list(seen.values())


def _stored_ladders(references, rows) -> list[Ladder]:
    """The run's stored ladders (one per (case, basis) its rows point to), in scan order."""
    order = {(r.case, r.basis): (r.scan_parent or r.case, r.scan_length or 0.0) for r in rows}
    return [_ladder_view(ref.case, ref.basis, ref.space, ref.ladder.get("scf") or {}, ref.primary_method,
                         ref.primary_energy_ha, {g["method"]: g for g in ref.ladder.get("ladder") or []},
                         ref.ladder.get("published"))
            for ref in sorted((f for f in references if (f.case, f.basis) in order),
                              key=lambda f: (*order[(f.case, f.basis)], f.case, f.basis))]


def _ladder_columns(ladders) -> list[str]:
    """Rungs that are not the primary reference of their ladder, in ladder order."""
    names = {r.method for lad in ladders for r in lad.rungs if r.method != lad.primary}
    return sorted(names, key=_rung_sort_key)


def _resource_row(r) -> ResourceRow:
    res = r.resources or {}
    return ResourceRow(case=r.case, basis=r.basis, encoding=r.encoding, method=r.method, verdict=r.verdict,
                       tags=list(r.tags), n_qubits=r.n_qubits, n_terms=r.n_terms, one_norm_ha=r.one_norm_ha,
                       qwc_groups=r.qwc_groups, n_parameters=res.get("n_parameters"),
                       two_qubit_gates=res.get("two_qubit_gates"), circuit_depth=res.get("circuit_depth"),
                       shots=res.get("shots"))


def _provenance(run, rows) -> Provenance:
    return Provenance(run_id=run.run_id, status=run.status, started_at=run.started_at, finished_at=run.finished_at,
                      command=run.command, suite=run.suite, cases=list(run.cases), methods=list(run.methods),
                      options=dict(run.options), encoding=run.encoding, threshold_mha=run.threshold_mha,
                      threshold_source=run.threshold_source, seed=run.seed, packages=dict(run.packages),
                      git=dict(run.git or {}), plugin_git=dict(run.plugin_git or {}), machine=dict(run.machine or {}),
                      results_hash=results_hash(rows))


def citation_text(entry) -> str:
    """'Authors, title, journal volume, pages (year).' from a bib entry's fields."""
    f = entry.fields
    parts = [f.get(k) for k in ("author", "title") if f.get(k)]
    where = " ".join(x for x in (f.get("journal") or f.get("booktitle") or f.get("publisher") or f.get("howpublished"),
                                 f.get("volume")) if x)
    if where:
        parts.append(where)
    if f.get("pages"):
        parts.append(f["pages"].replace("--", "–"))
    text = ", ".join(p.replace("{", "").replace("}", "") for p in parts)
    return f"{text} ({f.get('year', 'n.d.')})."


def _bibliography(rows, registry) -> list[Citation]:
    uses: dict[str, list[str]] = {}

    def cite(key, what):
        uses.setdefault(key, [])
        if what not in uses[key]:
            uses[key].append(what)

    for r in sorted(rows, key=lambda r: (r.scan_parent or r.case, r.scan_length or 0.0, r.case)):
        case = None if registry is None else registry.cases.get(r.case)
        if case is not None and case.geometry_source:
            cite(case.geometry_source, f"geometry of {r.case}")
        for p in (r.secondary or {}).get("published") or []:
            if p.get("source"):
                cite(p["source"], f"published {p.get('method', '?')} energy of "
                                  f"{task_label(r.case, p.get('basis', r.basis))}")
    out = []
    for key, what in uses.items():
        entry = None if registry is None else registry.bib.get(key)
        if entry is None:
            out.append(Citation(key, "(entry not found in the loaded sources.bib)", [], "", what, False))
            continue
        locators = [f"{k}: {entry.fields[k]}" for k in ("doi", "url") if entry.fields.get(k)]
        out.append(Citation(key, citation_text(entry), locators, entry.raw, what, True))
    return out


# -- render ------------------------------------------------------------------------------

def _environment():
    import jinja2

    env = jinja2.Environment(loader=jinja2.FileSystemLoader(str(TEMPLATE_DIR)), autoescape=True,
                             undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    env.filters["num"] = _num
    env.filters["dataval"] = lambda x: "" if x is None else repr(x) if isinstance(x, float) else str(x)
    env.filters["err"] = error_text
    env.filters["basis"] = basis_label
    env.filters["enc"] = encoding_label
    env.globals.update(VERDICT_LABELS=VERDICT_LABELS, verdict_label=verdict_label, is_failing=is_failing,
                       task_label=task_label, scale_text=scale_text)
    return env


def error_text(error_mha) -> str:
    """An error in mHa for a matrix cell: three decimals below 1 mHa, two below 100, one below 1000,
    none above; a real minus sign; an em dash without an error."""
    if error_mha is None:
        return "—"
    size = abs(error_mha)
    spec = "+.3f" if size < 1 else "+.2f" if size < 100 else "+.1f" if size < 1000 else "+.0f"
    return _num(error_mha, spec)


def scale_text(k: int) -> str:
    """The legend text of accuracy-scale bin ``k`` (|error| / threshold): ``≤ 0.1``, ``0.1–1``, ``> 100``."""
    edges = SCALE_EDGES
    if k == 0:
        return f"≤ {edges[0]:g}"
    if k >= len(edges):
        return f"> {edges[-1]:g}"
    return f"{edges[k - 1]:g}–{edges[k]:g}"


def _num(x, spec: str = ".6f", missing: str = "—") -> str:
    """A number for a cell (a real minus sign); anything that is not a number prints as its text
    (escaped by the template), so a string in a number field never breaks the report."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return missing
    if not is_number(x):
        return str(x)
    return format_number(x, spec).replace("-", "−")


def render_html(data: ReportData) -> str:
    """The page as one string; scans get their SVG here (never carried in from outside)."""
    from markupsafe import Markup

    from benchsuite.report.plots import scan_svg

    for n, scan in enumerate(data.scans):
        scan.svg = Markup(scan_svg(scan, salt=f"{data.run_id}-scan{n}"))
    return _environment().get_template("report.html.j2").render(d=data)


def write_report(store, run_id: str, out_path, registry=None, title: str | None = None) -> Path:
    """Collect, render and write the report atomically; returns the path written."""
    html = render_html(collect_report(store, run_id, registry, title))
    out = Path(out_path)
    out.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=out.parent, prefix=out.name + ".", suffix=".tmp")
    with os.fdopen(fd, "w", encoding="utf-8") as fh:
        fh.write(html)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)          # mkstemp makes 0600; a report is for sharing
    os.replace(tmp, out)
    return out
