"""The accuracy matrix that leads the HTML report: molecule × geometry rows, method × encoding columns.

Rows are grouped by molecule (formula, charge and multiplicity from the registry; without it, by
case or scan name), and inside a group by geometry: single geometries first, then the points of
each bond scan in order of bond length, each in every basis the run used.  Columns are the run's
methods, each split by encoding when the run used more than one.

Each cell holds one task's error in mHa on the *accuracy scale*: its signed size in units of the
task's threshold, binned at 0.1, 1, 3, 10, 30 and 100 thresholds (:data:`SCALE_EDGES`) on a
diverging scale -- warm above the reference, cool below it, pale inside the threshold -- plus the
verdict's glyph and label (:func:`verdict_label`), "not converged" when the method said so, and
the baseline comparison's regressions and configuration changes for that task.  Colour only
repeats what the text says.  Any verdict of :data:`benchsuite.scoring.VERDICTS` renders, known
or not (a verdict without a label of its own is spelled from its name).

Collect only (plain dataclasses); :mod:`benchsuite.report.html` renders.  No PySCF, no OpenFermion.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from benchsuite.report.naming import basis_label, encoding_label, encoding_parts, molecule_of, task_label
from benchsuite.scoring import converged_but_failing

#: Bin edges of the accuracy scale in units of the threshold (|error| / threshold).
SCALE_EDGES = (0.1, 1.0, 3.0, 10.0, 30.0, 100.0)

#: verdict -> (label, glyph); a verdict missing here is spelled from its name (:func:`verdict_label`).
VERDICT_LABELS = {
    "pass": ("PASS", "✓"), "fail": ("FAIL", "✗"), "below-exact": ("BELOW EXACT", "▼"),
    "wrong-state": ("WRONG STATE", "≠"), "inconclusive": ("INCONCLUSIVE", "?"), "error": ("ERROR", "!"),
    "timeout": ("TIMEOUT", "⌛"), "invalid": ("INVALID", "⊘"), "unconverged": ("NOT CONVERGED", "↻"),
}
REGRESSION_KINDS = ("pass->not-pass", "error-grew", "new-error")


def verdict_label(verdict: str) -> tuple[str, str]:
    """(label, glyph) of a verdict: ``("BELOW EXACT", "▼")``; an unknown one ``("NEW VERDICT", "•")``."""
    return VERDICT_LABELS.get(verdict, (str(verdict).replace("-", " ").upper(), "•"))


def scale_class(error_mha: float | None, threshold_mha: float) -> str:
    """CSS class of a cell on the accuracy scale: ``p0``..``p6`` above the reference, ``n0``..``n6``
    below it (bin k: |error| / threshold up to ``SCALE_EDGES[k]``, the last bin beyond 100), ``none``
    without an error."""
    if error_mha is None or not threshold_mha or threshold_mha <= 0:
        return "none"
    ratio = abs(error_mha) / threshold_mha
    k = next((i for i, edge in enumerate(SCALE_EDGES) if ratio <= edge), len(SCALE_EDGES))
    return ("n" if error_mha < 0 else "p") + str(k)


@dataclass
class MatrixColumn:
    method: str
    encoding: str
    encoding_name: str
    encoding_detail: str


@dataclass
class MatrixCell:
    anchor: str                  # id of the task's row in the method tables
    verdict: str
    label: str
    glyph: str
    error_mha: float | None
    ratio: float | None          # |error| / threshold
    scale: str
    not_converged: bool
    converged_failing: bool          # scoring.converged_but_failing
    regression: str | None       # the baseline comparison's kind, when it is a regression
    config: list[str]            # configuration changes against the baseline
    title: str                   # the full task name, for a tooltip
    tags: list[str] = field(default_factory=list)


@dataclass
class MatrixRow:
    case: str
    basis: str
    basis_label: str
    geometry: str                # "h2" or "h2-scan, r = 0.7 Å"
    scan_length: float | None
    cells: list[MatrixCell | None]


@dataclass
class MatrixGroup:
    key: str
    formula_html: str            # escaped HTML (<sub>/<sup>), or the case name escaped
    formula_text: str
    title: str
    rows: list[MatrixRow] = field(default_factory=list)


@dataclass
class AccuracyMatrix:
    columns: list[MatrixColumn]
    groups: list[MatrixGroup]
    several_encodings: bool
    verdicts: list[str]          # verdicts that occur, in scoring's order then any other

    @property
    def methods(self) -> list[tuple[str, int]]:
        """(method, number of its columns) in column order, for a two-level header."""
        out: list[list] = []
        for c in self.columns:
            if out and out[-1][0] == c.method:
                out[-1][1] += 1
            else:
                out.append([c.method, 1])
        return [(m, n) for m, n in out]


def _group(r, registry) -> "MatrixGroup":
    """An empty group for the molecule a row belongs to (its key: the ASCII formula, or the case name)."""
    from html import escape

    mol = molecule_of(r.case, registry)
    name = r.scan_parent or r.case
    if mol is None:
        return MatrixGroup(name, escape(name), name, "")
    case = registry.cases.get(r.scan_parent) or registry.cases[r.case]
    return MatrixGroup(mol.ascii(), mol.html(), mol.text(), case.title)


def length_unit(case_name: str, registry=None) -> str:
    """The unit a scan's lengths are given in (its case file's): ``Å`` unless the file says bohr."""
    case = None if registry is None else registry.cases.get(case_name)
    return "bohr" if case is not None and case.units == "bohr" else "Å"


def geometry_label(r, registry=None) -> str:
    """``h2`` for a single geometry, ``h2-scan, r = 0.7 Å`` for a scan point."""
    if r.scan_parent and r.scan_length is not None:
        return f"{r.scan_parent}, r = {r.scan_length:g} {length_unit(r.case, registry)}"
    return r.case


def _baseline_notes(gate: dict) -> dict[tuple, dict]:
    notes: dict[tuple, dict] = {}
    for c in ((gate or {}).get("baseline") or {}).get("changes") or []:
        key = (c["method"], c["case"], c["basis"], c["encoding"])
        note = notes.setdefault(key, {"regression": None, "config": []})
        if c["kind"] in REGRESSION_KINDS:
            note["regression"] = c["kind"]
        note["config"] += [x for x in c.get("config") or [] if x not in note["config"]]
    return notes


def _cell(r, anchor: str, note: dict | None) -> MatrixCell:
    label, glyph = verdict_label(r.verdict)
    ratio = None if r.error_mha is None or not r.threshold_mha else abs(r.error_mha) / r.threshold_mha
    return MatrixCell(anchor=anchor, verdict=r.verdict, label=label, glyph=glyph, error_mha=r.error_mha,
                      ratio=ratio, scale=scale_class(r.error_mha, r.threshold_mha),
                      not_converged=r.converged is False and r.verdict != "unconverged",
                      converged_failing=converged_but_failing(r),
                      regression=(note or {}).get("regression"), config=list((note or {}).get("config") or []),
                      title=task_label(r.case, r.basis, r.encoding, r.method, full_encoding=True),
                      tags=list(r.tags))


def build_matrix(rows, methods: list[str], anchors: dict[str, str], gate: dict, registry=None,
                 verdict_order=()) -> AccuracyMatrix:
    """The matrix over ``rows``; ``anchors`` maps a task key to its row id in the method tables."""
    encodings = list(dict.fromkeys(r.encoding for r in rows))
    several = len(encodings) > 1
    columns = [MatrixColumn(m, e, encoding_parts(e)[0], encoding_label(e))
               for m in methods for e in encodings if any(r.method == m and r.encoding == e for r in rows)]
    index = {(c.method, c.encoding): i for i, c in enumerate(columns)}
    notes = _baseline_notes(gate)
    groups: dict[str, MatrixGroup] = {}
    lines: dict[tuple, MatrixRow] = {}
    order = sorted(rows, key=lambda r: (r.scan_parent is not None, r.scan_parent or r.case, r.scan_length or 0.0,
                                        r.case, r.basis))
    for r in order:
        candidate = _group(r, registry)
        group = groups.setdefault(candidate.key, candidate)
        line = lines.get((r.case, r.basis))
        if line is None:
            line = lines[(r.case, r.basis)] = MatrixRow(r.case, r.basis, basis_label(r.basis), geometry_label(r, registry),
                                                        r.scan_length, [None] * len(columns))
            group.rows.append(line)
        line.cells[index[(r.method, r.encoding)]] = _cell(
            r, anchors.get(r.task_key, ""), notes.get((r.method, r.case, r.basis, r.encoding)))
    present = list(dict.fromkeys(r.verdict for r in rows))
    verdicts = [v for v in verdict_order if v in present] + [v for v in present if v not in verdict_order]
    return AccuracyMatrix(columns, sorted(groups.values(), key=lambda g: g.key.lower()), several, verdicts)
