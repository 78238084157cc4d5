"""Publication tables of a stored run: LaTeX (booktabs), Markdown (pipe table) and CSV.

Every table carries what a reader needs to cite and reproduce it:

* the molecule as a formula with its charge and state (Hill order from the
  registry, :class:`benchsuite.report.naming.Molecule`: ``HHe⁺``, ``³O₂``), the
  basis as published (``STO-3G``, ``cc-pVDZ``, ``6-31G``);
* units in the column headers (energies in Eh, errors and sigma in mHa, times in s);
* the pass threshold and its source;
* the reference rung of each row (``fci`` or ``casci``);
* citation keys from ``sources.bib`` for each row, the geometry's source and the
  sources of the published reference energies in separate columns
  (``\\cite{key}`` in LaTeX, ``[@key]`` in Markdown, the bare keys in CSV);
* the run id and a short content hash of the run's results
  (:func:`results_hash`), so two tables built from the same results carry the
  same hash and any changed energy, error or verdict changes it.

CSV values are raw, at full precision (``repr``), missing ones empty:
``pandas.read_csv(path, float_precision="round_trip")`` gives back the
stored floats exactly.

``--bib FILE`` writes the cited BibTeX entries verbatim (:func:`bibtex_for`).

The LaTeX is ASCII only and needs nothing beyond ``booktabs``: it compiles as it
is under pdfLaTeX, XeLaTeX or LuaLaTeX (a non-ASCII character in a value is
written as its nearest ASCII letters, or ``?``).

Plain records in (:class:`~benchsuite.store.records.ResultRow`), text out:
no PySCF, no OpenFermion.
"""

from __future__ import annotations

import csv
import hashlib
import io
import math
import re
from dataclasses import dataclass
from typing import Callable

from benchsuite.errors import InputError
from benchsuite.report.naming import basis_label, encoding_label, molecule_of
from benchsuite.store.records import dumps

FORMATS = ("latex", "markdown", "csv")


# -- identity and citations ---------------------------------------------------------

def results_hash(rows) -> str:
    """First 12 hex digits of the SHA-256 of the canonical JSON of the results.

    Over ``[task_key, energy_ha, error_mha, verdict]`` of every row, sorted by
    task key, so row order and everything else about the run (timings,
    machine) leave it unchanged.
    """
    items = sorted([r.task_key, r.energy_ha, r.error_mha, r.verdict] for r in rows)
    return hashlib.sha256(dumps(items).encode()).hexdigest()[:12]


def geometry_citations(row, registry=None) -> list[str]:
    """Bib key of the row's geometry source (empty without a registry that has the case)."""
    case = None if registry is None else registry.cases.get(row.case)
    return [case.geometry_source] if case is not None and case.geometry_source else []


def reference_citations(row) -> list[str]:
    """Bib keys of the published reference energies stored with the row."""
    return list(dict.fromkeys(p["source"] for p in (row.secondary or {}).get("published") or [] if p.get("source")))


def row_citations(row, registry=None) -> list[str]:
    """Bib keys a row rests on: the case's geometry source, then its published values' sources."""
    return list(dict.fromkeys(geometry_citations(row, registry) + reference_citations(row)))


def cited_keys(rows, registry=None) -> list[str]:
    """Every key cited by ``rows``, in order of first citation."""
    return list(dict.fromkeys(k for r in rows for k in row_citations(r, registry)))


def bibtex_for(keys, registry) -> str:
    """The BibTeX entries of ``keys`` verbatim; a key the registry lacks is named in a comment."""
    out = ["% BibTeX entries cited by a benchsuite table", ""]
    for key in keys:
        entry = None if registry is None else registry.bib.get(key)
        out += [entry.raw if entry is not None else f"% {key}: not found in the loaded sources.bib", ""]
    return "\n".join(out)


# -- escaping ---------------------------------------------------------------------------

_LATEX_SPECIAL = {
    "\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
    "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}",
    "<": r"\textless{}", ">": r"\textgreater{}", "|": r"\textbar{}",
}
_LATEX_TABLE = str.maketrans(_LATEX_SPECIAL)
_CITE_KEY = re.compile(r"[A-Za-z0-9_:.+/\-]+")
_MARKDOWN_SPECIAL = str.maketrans({c: "\\" + c for c in "\\`*_[]<>|&~$"})
_CONTROL = re.compile(r"[\x00-\x1f\x7f\u2028\u2029]")
_FORMULA_START = frozenset("=+-@\t\r")


def _one_line(text) -> str:
    """``text`` as one line: every control character (newline, tab, NUL, ...) becomes a space."""
    return _CONTROL.sub(" ", str(text))


#: Non-ASCII characters a value or caption may carry, as ASCII LaTeX.
_LATEX_UNICODE = {"–": "--", "—": "---", "−": "-", "≤": r"$\le$", "≥": r"$\ge$", "±": r"$\pm$",
                  "×": r"$\times$", "·": r"$\cdot$", "σ": r"$\sigma$", "Å": r"\AA{}", "’": "'", "“": "``",
                  "”": "''", "µ": r"$\mu$", "→": r"$\to$"}


def _ascii_latex(ch: str) -> str:
    """One non-ASCII character as ASCII LaTeX: a known symbol, else its letters without accents, else ``?``."""
    import unicodedata

    if ch in _LATEX_UNICODE:
        return _LATEX_UNICODE[ch]
    folded = unicodedata.normalize("NFKD", ch).encode("ascii", "ignore").decode()
    return latex_escape(folded) if folded else "?"


def latex_escape(text) -> str:
    """``text`` with every LaTeX special character made literal and every non-ASCII character made
    ASCII (:func:`_ascii_latex`); control characters become spaces."""
    out = _one_line(text).translate(_LATEX_TABLE)
    return out if out.isascii() else "".join(c if c.isascii() else _ascii_latex(c) for c in out)


def markdown_escape(text) -> str:
    """``text`` safe inside one pipe-table cell (backslash escapes, one line)."""
    return _one_line(text).translate(_MARKDOWN_SPECIAL)


def csv_cell(value):
    """A CSV value: numbers raw (floats at full precision), None empty, text defused.

    Text starting with ``= + - @`` (or a tab or carriage return) is read as a
    formula by spreadsheets; such a cell gets a leading apostrophe (common
    practice against CSV injection).  Quoting is the csv module's.
    """
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, int) and not isinstance(value, bool):
        return value
    text = str(value)
    return "'" + text if text[:1] in _FORMULA_START else text


def is_number(value) -> bool:
    """A finite int or float (bools, strings, containers and NaN/inf are not numbers here)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return False
    return isinstance(value, int) or math.isfinite(value)


def format_number(x, spec: str) -> str:
    """``format(x, spec)``, defensively.

    A value printing as zero carries no sign ("0.000", not "-0.000"); an
    integer spec (``d``) given a float prints the float with ``g``; a value the
    spec cannot format prints as ``str``.  Callers escape the result for
    their format.
    """
    if spec.endswith("d") and isinstance(x, float):
        x = int(x) if x.is_integer() and abs(x) < 2 ** 63 else x
        spec = spec if isinstance(x, int) else spec[:-1] + "g"
    try:
        text = format(x, spec)
    except (TypeError, ValueError):
        return str(x)
    if isinstance(x, float) and text.strip("+-0.") == "":
        text = text.lstrip("+-")
    return text


# -- columns -------------------------------------------------------------------------

@dataclass(frozen=True)
class TableColumn:
    """One column: ``header`` (plain, with its unit), ``latex`` header, alignment,
    the raw value of a row and its printed form (``fmt``, for LaTeX and Markdown)."""

    name: str
    header: str
    latex: str
    align: str
    value: Callable
    fmt: str | None = None          # format spec for numbers; None: text
    number: bool = False


def _res(key):
    return lambda r, cites, ctx: (r.resources or {}).get(key)


def _mha(x):
    return None if x is None else 1000.0 * x


#: Columns whose cells are citation keys, and where the keys come from.
CITATION_COLUMNS = {"sources": lambda c: c["all"], "geometry_source": lambda c: c["geometry"],
                    "reference_source": lambda c: c["reference"]}


COLUMNS: dict[str, TableColumn] = {c.name: c for c in (
    TableColumn("molecule", "molecule", "Molecule", "l", lambda r, c, x: x["molecules"].get(r.case)),
    TableColumn("case", "case", "Case", "l", lambda r, c, x: r.case),
    TableColumn("basis", "basis", "Basis", "l", lambda r, c, x: basis_label(r.basis)),
    TableColumn("encoding", "encoding", "Encoding", "l", lambda r, c, x: encoding_label(r.encoding)),
    TableColumn("space", "orbital space", "Space", "l", lambda r, c, x: r.space),
    TableColumn("method", "method", "Method", "l", lambda r, c, x: r.method),
    TableColumn("qubits", "qubits", "Qubits", "r", lambda r, c, x: r.n_qubits, "d", True),
    TableColumn("terms", "Pauli terms", "Pauli terms", "r", lambda r, c, x: r.n_terms, "d", True),
    TableColumn("energy", "E_method / Eh", r"$E_\mathrm{method}$ / $E_\mathrm{h}$", "r",
                lambda r, c, x: r.energy_ha, ".6f", True),
    TableColumn("sigma", "sigma / mHa", r"$\sigma$ / mHa", "r",
                lambda r, c, x: _mha(r.stderr_ha), ".3f", True),
    TableColumn("reference", "E_reference / Eh", r"$E_\mathrm{ref}$ / $E_\mathrm{h}$", "r",
                lambda r, c, x: r.reference_energy_ha, ".6f", True),
    TableColumn("rung", "reference rung", "Reference", "l", lambda r, c, x: r.reference_method),
    TableColumn("error", "error / mHa", "Error / mHa", "r", lambda r, c, x: r.error_mha, "+.3f", True),
    TableColumn("threshold", "threshold / mHa", "Threshold / mHa", "r",
                lambda r, c, x: r.threshold_mha, ".4f", True),
    TableColumn("verdict", "verdict", "Verdict", "l", lambda r, c, x: r.verdict),
    TableColumn("seconds", "time / s", "Time / s", "r", lambda r, c, x: r.seconds, ".2f", True),
    TableColumn("one_norm", "1-norm / Eh", r"1-norm / $E_\mathrm{h}$", "r", lambda r, c, x: r.one_norm_ha,
                ".3f", True),
    TableColumn("groups", "QWC groups", "QWC groups", "r", lambda r, c, x: r.qwc_groups, "d", True),
    TableColumn("parameters", "parameters", "Parameters", "r", _res("n_parameters"), "d", True),
    TableColumn("two_qubit_gates", "two-qubit gates", "Two-qubit gates", "r", _res("two_qubit_gates"), "d", True),
    TableColumn("depth", "circuit depth", "Depth", "r", _res("circuit_depth"), "d", True),
    TableColumn("shots", "shots", "Shots", "r", _res("shots"), "d", True),
    TableColumn("geometry_source", "geometry source (bib key)", "Geometry", "l",
                lambda r, c, x: " ".join(c["geometry"])),
    TableColumn("reference_source", "reference-energy source (bib keys)", "Ref.\\ energy", "l",
                lambda r, c, x: " ".join(c["reference"])),
    TableColumn("sources", "sources (bib keys)", "Sources", "l", lambda r, c, x: " ".join(c["all"])),
    TableColumn("task_key", "task key", "Task", "l", lambda r, c, x: r.task_key),
    TableColumn("run", "run id", "Run", "l", lambda r, c, x: x["run_id"]),
    TableColumn("results_hash", "results sha256[:12]", "Results hash", "l", lambda r, c, x: x["hash"]),
)}

DEFAULT_COLUMNS = ("molecule", "case", "basis", "method", "qubits", "energy", "reference", "rung", "error",
                   "verdict", "geometry_source", "reference_source")
#: A CSV row stands alone, so it also carries its threshold and the run's identity.
DEFAULT_CSV_COLUMNS = DEFAULT_COLUMNS + ("threshold", "run", "results_hash")


def parse_columns(spec: str | None, fmt: str) -> list[TableColumn]:
    """``--columns a,b,c`` (or the format's default) as columns; unknown names are input errors."""
    if spec is None:
        names = list(DEFAULT_CSV_COLUMNS if fmt == "csv" else DEFAULT_COLUMNS)
    else:
        names = [n.strip() for n in spec.split(",") if n.strip()]
    unknown = [n for n in names if n not in COLUMNS]
    if unknown or not names:
        raise InputError(f"unknown column(s) {unknown or spec!r}; choose from {', '.join(COLUMNS)}",
                         field="--columns")
    return [COLUMNS[n] for n in dict.fromkeys(names)]


# -- the table --------------------------------------------------------------------------

@dataclass(frozen=True)
class Table:
    """What every format prints: header data, the columns and one value list per row."""

    run_id: str
    results_hash: str
    threshold_mha: float
    threshold_source: str
    thresholds_differ: bool
    columns: list[TableColumn]
    values: list[list]
    cites: list[dict]               # per row: {"geometry", "reference", "all"} bib keys
    keys: list[str]


def build_table(run, rows, columns: list[TableColumn], registry=None) -> Table:
    """The rows in table order (method, case, basis, encoding) with every column's raw value."""
    rows = sorted(rows, key=lambda r: (r.method, r.scan_parent or r.case, r.scan_length or 0.0, r.case, r.basis,
                                       r.encoding, r.task_key))
    ctx = {"run_id": run.run_id, "hash": results_hash(rows),
           "molecules": {r.case: m for r in rows if (m := molecule_of(r.case, registry)) is not None}}
    cites = [{"geometry": geometry_citations(r, registry), "reference": reference_citations(r),
              "all": row_citations(r, registry)} for r in rows]
    values = [[col.value(r, c, ctx) for col in columns] for r, c in zip(rows, cites)]
    return Table(run_id=run.run_id, results_hash=ctx["hash"], threshold_mha=run.threshold_mha,
                 threshold_source=run.threshold_source,
                 thresholds_differ=any(abs(r.threshold_mha - run.threshold_mha) > 1e-12 for r in rows),
                 columns=columns, values=values, cites=cites,
                 keys=list(dict.fromkeys(k for c in cites for k in c["all"])))


def _text(col: TableColumn, value) -> str:
    """A value as printed text (not yet escaped): numbers through ``col.fmt``, missing ones ``--``."""
    if value is None or value == "" or (isinstance(value, float) and not math.isfinite(value)):
        return "--" if col.number else ""
    if col.name == "molecule":
        return value.text()
    if col.fmt and is_number(value):
        return format_number(value, col.fmt)
    return str(value)


def _caption(t: Table, escape: Callable[[str], str], le: str) -> str:
    per_row = " (a case or suite threshold differs on some rows: see their threshold)" if t.thresholds_differ else ""
    names = {c.name for c in t.columns}
    molecules = (" Molecules as formulas in Hill order, charge as a superscript, spin multiplicity as a left"
                 " superscript (singlets without).") if "molecule" in names else ""
    sources = (" Geometry and published reference energies cited from their sources."
               if names & {"geometry_source", "reference_source", "sources"} else "")
    return (escape("Energies against the FCI/CASCI reference computed in the same orbital space; pass if |error| ")
            + le + escape(f" {t.threshold_mha:.4f} mHa ({t.threshold_source}){per_row}.{molecules}{sources} "
                          f"benchsuite run {t.run_id}, results hash {t.results_hash}."))


def render_latex(t: Table) -> str:
    """A ``table`` environment with a booktabs ``tabular`` (needs ``\\usepackage{booktabs}``)."""
    def cell(col, value, cites):
        if col.name in CITATION_COLUMNS:
            keys = CITATION_COLUMNS[col.name](cites)
            return ", ".join(rf"\cite{{{k}}}" if _CITE_KEY.fullmatch(k) else latex_escape(k) for k in keys) or "--"
        if col.name == "molecule" and value is not None:
            return value.latex()
        text = _text(col, value)
        if col.number and is_number(value):       # only a real number enters math mode
            return f"${text}$"
        return latex_escape(text)

    caption = _caption(t, latex_escape, r"$\le$")
    lines = [f"% benchsuite table: run {latex_escape(t.run_id)}, results hash {t.results_hash}",
             r"% needs \usepackage{booktabs}",
             r"\begin{table}", r"\centering",
             rf"\caption{{{caption}}}",
             rf"\label{{tab:benchsuite-{t.results_hash}}}",
             rf"\begin{{tabular}}{{{''.join(c.align for c in t.columns)}}}",
             r"\toprule",
             " & ".join(c.latex for c in t.columns) + r" \\",
             r"\midrule"]
    for values, cites in zip(t.values, t.cites):
        lines.append(" & ".join(cell(c, v, cites) for c, v in zip(t.columns, values)) + r" \\")
    lines += [r"\bottomrule", r"\end{tabular}", r"\end{table}", ""]
    return "\n".join(lines)


def render_markdown(t: Table) -> str:
    """A pipe table (GitHub / pandoc), its caption as a pandoc ``Table:`` line before it."""
    def cell(col, value, cites):
        if col.name in CITATION_COLUMNS:
            keys = CITATION_COLUMNS[col.name](cites)
            return "; ".join(f"[@{k}]" if _CITE_KEY.fullmatch(k) else markdown_escape(k) for k in keys)
        return markdown_escape(_text(col, value))

    def line(cells):
        return "| " + " | ".join(cells) + " |"

    out = [f"Table: {_caption(t, markdown_escape, '≤')}", "",
           line([markdown_escape(c.header) for c in t.columns]),
           line([":---" if c.align == "l" else "---:" for c in t.columns])]
    out += [line([cell(c, v, cites) for c, v in zip(t.columns, values)]) for values, cites in zip(t.values, t.cites)]
    return "\n".join(out) + "\n"


def render_csv(t: Table) -> str:
    """Header row (names with units), then raw values at full precision; empty = missing."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow([csv_cell(c.header) for c in t.columns])
    for values in t.values:
        writer.writerow([csv_cell(_text(c, v) if c.name == "molecule" else v) for c, v in zip(t.columns, values)])
    return buf.getvalue()


RENDERERS = {"latex": render_latex, "markdown": render_markdown, "csv": render_csv}


def render_table(run, rows, fmt: str, columns: str | None = None, registry=None) -> tuple[str, Table]:
    """The table as text in ``fmt`` and the :class:`Table` it came from."""
    if fmt not in RENDERERS:
        raise InputError(f"unknown table format {fmt!r}; choose one of {', '.join(FORMATS)}", field="--format")
    table = build_table(run, rows, parse_columns(columns, fmt), registry)
    return RENDERERS[fmt](table), table
