"""Publication tables: LaTeX (booktabs, escaped), Markdown pipe table, CSV through pandas."""

from __future__ import annotations

import argparse
import io
import re

import pandas as pd
import pytest

from benchsuite.errors import InputError
from benchsuite.report.command import add_table_arguments, run_table
from benchsuite.report.tables import COLUMNS, latex_escape, render_table, results_hash
from tests.report import make_row, make_run, store_with

SPECIAL_METHOD = r"vqe_50% & $5 #1 {a} ~b ^c \d <e> |f"
PUBLISHED = [{"method": "fci", "basis": "sto-3g", "energy_ha": -1.1373, "source": "szabo-ostlund-1996",
              "from_memory": True, "error_mha": 0.0}]


def _rows(run):
    return [make_row(run.run_id, "h2", SPECIAL_METHOD, 0.4, published=PUBLISHED),
            make_row(run.run_id, "heh-cation", SPECIAL_METHOD, -3.25),
            make_row(run.run_id, "h2", "uccsd-vqe", 0.0123456789, stderr_ha=0.0002),
            make_row(run.run_id, "lih", "uccsd-vqe", None, status="error", message="worker died")]


def test_latex_escape_makes_every_special_character_literal():
    assert latex_escape(r"a&b%c$d#e_f{g}h~i^j\k<l>m|n") == (
        r"a\&b\%c\$d\#e\_f\{g\}h\textasciitilde{}i\textasciicircum{}j\textbackslash{}k"
        r"\textless{}l\textgreater{}m\textbar{}n")
    assert latex_escape("two\nlines") == "two lines"
    assert latex_escape(r"\&") == r"\textbackslash{}\&"     # escaped once, never twice


def _cells(line: str) -> list[str]:
    body = line.rstrip()
    assert body.endswith(r"\\"), line
    return re.split(r"(?<!\\)&", body[:-2])


def test_latex_table_is_booktabs_and_escaped(registry):
    run = make_run(methods=(SPECIAL_METHOD, "uccsd-vqe"))
    rows = _rows(run)
    text, table = render_table(run, rows, "latex", registry=registry)
    lines = text.splitlines()
    start = next(i for i, ln in enumerate(lines) if ln.startswith(r"\begin{tabular}"))
    spec = re.fullmatch(r"\\begin\{tabular\}\{([lr]+)\}", lines[start]).group(1)
    assert lines[start + 1] == r"\toprule" and lines[start + 3] == r"\midrule"
    end = lines.index(r"\bottomrule")
    assert lines[end + 1] == r"\end{tabular}" and r"\hline" not in text
    body = lines[start + 4:end]
    assert len(body) == len(rows)
    for line in [lines[start + 2]] + body:
        assert len(_cells(line)) == len(spec)
    assert r"\cite{szabo-ostlund-1996}" in text
    escaped = latex_escape(SPECIAL_METHOD)
    assert sum(escaped in ln for ln in body) == 2
    for line in body:                       # nothing special survives unescaped outside math and \cite
        plain = re.sub(r"\$[^$]*\$|\\cite\{[^}]*\}|\\[a-z]+\{\}|\\[&%$#_{}]", "", line.rstrip()[:-2])
        assert not re.search(r"(?<!\\)[%#_{}~^<>|\\]", plain), line
    caption = next(ln for ln in lines if ln.startswith(r"\caption"))
    assert "1.5936" in caption and table.results_hash in caption and r"$\le$" in caption
    assert "Error / mHa" in lines[start + 2] and "mE" + "h" not in text   # units in the header, spelled mHa


def test_markdown_is_a_valid_pipe_table(registry):
    run = make_run(methods=(SPECIAL_METHOD, "uccsd-vqe"))
    rows = _rows(run)
    text, table = render_table(run, rows, "markdown", "case,method,error,sigma,verdict,sources", registry)
    lines = text.splitlines()
    assert lines[0].startswith("Table: ") and table.results_hash in lines[0] and lines[1] == ""
    pipe = lines[2:]
    assert all(ln.startswith("| ") and ln.endswith(" |") for ln in pipe)
    split = [re.split(r"(?<!\\)\|", ln)[1:-1] for ln in pipe]
    assert {len(c) for c in split} == {6}
    assert [c.strip() for c in split[0]] == ["case", "method", "error / mHa", "sigma / mHa", "verdict",
                                             "sources (bib keys)"]
    assert all(re.fullmatch(r" (:---|---:) ", c) for c in split[1])
    assert len(pipe) == 2 + len(rows)
    assert r"\|f" in text and r"\<e\>" in text and "[@szabo-ostlund-1996]" in text
    sigma = [c[3].strip() for c in split[2:]]
    assert "0.200" in sigma and sigma.count("--") == 3


def test_csv_round_trips_through_pandas_with_units(registry):
    run = make_run(methods=(SPECIAL_METHOD, "uccsd-vqe"))
    rows = _rows(run)
    text, table = render_table(run, rows, "csv", registry=registry)
    frame = pd.read_csv(io.StringIO(text), float_precision="round_trip")
    assert list(frame.columns) == [c.header for c in table.columns]
    assert {"E_method / Eh", "E_reference / Eh", "error / mHa", "threshold / mHa"} <= set(frame.columns)
    by_key = {(r.case, r.method): r for r in rows}
    assert len(frame) == len(rows)
    for _, line in frame.iterrows():
        r = by_key[(line["case"], line["method"])]
        if r.energy_ha is None:
            assert pd.isna(line["E_method / Eh"]) and pd.isna(line["error / mHa"])
        else:
            assert line["E_method / Eh"] == r.energy_ha and line["error / mHa"] == r.error_mha   # exact
        assert line["E_reference / Eh"] == r.reference_energy_ha and line["verdict"] == r.verdict
        assert line["threshold / mHa"] == r.threshold_mha and line["reference rung"] == "fci"
        assert line["results sha256[:12]"] == table.results_hash and line["run id"] == run.run_id
    assert frame["qubits"].dtype.kind == "i"


def test_results_hash_identifies_the_results():
    run = make_run(methods=("a",))
    rows = [make_row(run.run_id, "h2", "a", 0.1), make_row(run.run_id, "lih", "a", 2.0)]
    h = results_hash(rows)
    assert re.fullmatch(r"[0-9a-f]{12}", h)
    assert results_hash(rows[::-1]) == h
    slower = [make_row(run.run_id, "h2", "a", 0.1, seconds=99.0), rows[1]]
    assert results_hash(slower) == h                       # timings are not results
    assert results_hash([make_row(run.run_id, "h2", "a", 0.1000001), rows[1]]) != h
    failing = make_row(run.run_id, "h2", "a", 0.1)
    failing.verdict = "fail"
    assert results_hash([failing, rows[1]]) != h


def test_columns_are_chosen_and_checked():
    run = make_run(methods=("a",))
    rows = [make_row(run.run_id, "h2", "a", 0.1)]
    text, table = render_table(run, rows, "csv", "case,error")
    assert text.splitlines()[0] == "case,error / mHa"
    with pytest.raises(InputError, match="unknown column"):
        render_table(run, rows, "csv", "case,energy_in_kcal")
    with pytest.raises(InputError, match="format"):
        render_table(run, rows, "html")
    assert {"qubits", "terms", "one_norm", "groups", "parameters", "two_qubit_gates", "sources"} <= set(COLUMNS)


def test_table_command_writes_table_and_bib(tmp_path, registry):
    run = make_run(methods=("a",))
    rows = [make_row(run.run_id, "h2", "a", 0.1, published=PUBLISHED), make_row(run.run_id, "lih", "a", 0.2)]
    store_with(tmp_path / "r.sqlite", run, rows).close()
    parser = argparse.ArgumentParser()
    add_table_arguments(parser)
    out, bib = tmp_path / "t.tex", tmp_path / "cited.bib"
    args = parser.parse_args([run.run_id, "--db", str(tmp_path / "r.sqlite"), "--format", "latex",
                              "--out", str(out), "--bib", str(bib)])
    assert run_table(args) == 0
    assert r"\toprule" in out.read_text()
    written = bib.read_text()
    keys = [registry.cases["h2"].geometry_source, "szabo-ostlund-1996", registry.cases["lih"].geometry_source]
    for key in dict.fromkeys(keys):
        assert written.count(registry.bib[key].raw) == 1
    assert written.count("@") == len(set(keys))



HOSTILE = (r"\input{/etc/passwd}", "<script>alert(1)</script>", '=HYPERLINK("http://x")', "a|b\nc\r\x00d",
           r"$x$ & \write18{rm -rf}", "@SUM(A1)")
NUMBER_COLUMNS = "case,method,qubits,parameters,two_qubit_gates,depth,shots,error,seconds"


def _hostile_rows(run):
    """Values a careless or hostile plugin (or an edited database) could put in any column."""
    rows = []
    for i, text in enumerate(HOSTILE):
        row = make_row(run.run_id, "h2", f"m{i}", 0.1 * i,
                       resources={"n_parameters": text, "two_qubit_gates": 1.5, "circuit_depth": 10**20,
                                  "shots": float("nan")})
        row.method = text                               # text columns get the same text
        row.n_qubits = text                             # and a number column of the row itself
        rows.append(row)
    return rows


def test_latex_never_emits_a_command_from_a_value():
    run = make_run(methods=("a",))
    text, _ = render_table(run, _hostile_rows(run), "latex", NUMBER_COLUMNS)
    body = text[text.index(r"\midrule"):text.index(r"\bottomrule")]
    assert r"\input" not in body and r"\write18" not in body and "<script>" not in body
    assert r"\textbackslash{}input\{/etc/passwd\}" in body
    for line in body.splitlines()[1:]:
        cells = _cells(line)
        assert len(cells) == len(NUMBER_COLUMNS.split(","))
        for cell in cells:                              # math mode only around a real number
            for math in re.findall(r"(?<!\\)\$([^$]*)(?<!\\)\$", cell):
                assert re.fullmatch(r"[+-]?[0-9.e+-]+", math), cell
    assert "$100000000000000000000$" in body and "$1.5$" in body   # big ints, floats in an int column


def test_markdown_and_csv_escape_hostile_values():
    run = make_run(methods=("a",))
    rows = _hostile_rows(run)
    md, _ = render_table(run, rows, "markdown", NUMBER_COLUMNS)
    lines = md.splitlines()[2:]
    assert len(lines) == 2 + len(rows)                  # no value broke a line
    for line in lines:
        assert len(re.split(r"(?<!\\)\|", line)) == len(NUMBER_COLUMNS.split(",")) + 2
    assert "<script>" not in md and r"\<script\>" in md and "\x00" not in md
    text, table = render_table(run, rows, "csv", NUMBER_COLUMNS)
    frame = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False)
    assert len(frame) == len(rows)
    for column in ("method", "qubits", "parameters"):
        cells = list(frame[COLUMNS[column].header])
        assert not any(c[:1] in "=+-@" for c in cells), cells        # no spreadsheet formula
        assert "'=HYPERLINK(\"http://x\")" in cells and "'@SUM(A1)" in cells
    assert frame["circuit depth"].tolist() == [str(10**20)] * len(rows)


# -- citable as it is: chemistry spelled as published, LaTeX that compiles ---------------------

def _chemistry_rows(run):
    """Rows of real registry cases: a cation, an open-shell triplet and a doublet, in two bases."""
    return [make_row(run.run_id, "heh-cation", "uccsd-vqe", 0.3, published=PUBLISHED),
            make_row(run.run_id, "o2-triplet", "uccsd-vqe", 2.1, basis="cc-pvdz"),
            make_row(run.run_id, "oh", "uccsd-vqe", -0.2, basis="6-31g"),
            make_row(run.run_id, "h2", "vqe 50% “naïve” → σ", None, status="error", message="worker died")]


def test_molecules_bases_and_sources_need_no_editing(registry):
    run = make_run(methods=("uccsd-vqe",))
    rows = _chemistry_rows(run)
    text, table = render_table(run, rows, "markdown", registry=registry)
    lines = text.splitlines()
    header = [c.strip() for c in re.split(r"(?<!\\)\|", lines[2])[1:-1]]
    assert header[:3] == ["molecule", "case", "basis"]
    assert "geometry source (bib key)" in header and "reference-energy source (bib keys)" in header
    cells = {c[1].strip(): [x.strip() for x in c] for c in (re.split(r"(?<!\\)\|", ln)[1:-1] for ln in lines[4:])}
    # Hill order from the registry, the charge and the multiplicity as superscripts (IUPAC Green Book, 3rd ed.
    # 2007, sec. 2.10: charge number as a right superscript; the multiplicity 2S+1 as a left superscript of a
    # term symbol -- common practice for a molecule's spin state in tables)
    assert cells["heh-cation"][0] == "HHe⁺" and cells["o2-triplet"][0] == "³O₂" and cells["oh"][0] == "²HO"
    assert cells["o2-triplet"][2] == "cc-pVDZ" and cells["oh"][2] == "6-31G" and cells["heh-cation"][2] == "STO-3G"
    geometry, reference = header.index("geometry source (bib key)"), header.index("reference-energy source (bib keys)")
    heh = cells["heh-cation"]
    assert heh[geometry] == f"[@{registry.cases['heh-cation'].geometry_source}]"
    assert heh[reference] == "[@szabo-ostlund-1996]" and cells["oh"][reference] == ""
    assert table.keys[0] == registry.cases["heh-cation"].geometry_source


def test_latex_compiles_as_it_is(registry, tmp_path):
    """Every column, hostile and non-ASCII values included: a LaTeX engine if one is installed, the
    pylatexenc parser if installed, and always the markup checker (tests/report/latex_check.py)."""
    from tests.report import latex_check

    run = make_run(methods=("uccsd-vqe",))
    rows = _chemistry_rows(run) + _hostile_rows(run)
    text, table = render_table(run, rows, "latex", ",".join(COLUMNS), registry)
    tex = latex_check.document(text)
    assert latex_check.markup_errors(tex) == []
    assert r"${}^{3}\mathrm{O}_{2}$" in text and r"$\mathrm{H}\mathrm{He}^{+}$" in text and "cc-pVDZ" in text
    assert r"vqe 50\% ``naive'' $\to$ $\sigma$" in text        # non-ASCII folded, specials escaped
    parsed = latex_check.pylatexenc_errors(tex)
    assert parsed in (None, [])
    if latex_check.engine() is not None:
        proc = latex_check.compile_with_engine(tex, tmp_path)
        assert proc.returncode == 0, proc.stdout[-3000:]


@pytest.mark.parametrize("broken, complaint", [
    (r"a & b {c \\", "unclosed '{'"), (r"a & b} \\", "closes nothing"), (r"a & $x \\", "unclosed '$'"),
    (r"50% & b \\", "does not end"), (r"a_b & c \\", "unescaped '_'"), (r"\input{x} & b \\", "unknown command"),
    (r"a & b & c \\", "3 cells"), ("é & b \\\\", "non-ASCII"), (r"\end{table} & b \\", "closes tabular"),
])
def test_markup_checker_rejects_what_a_compiler_rejects(broken, complaint):
    """The checker is not vacuous: each broken row is found (an unescaped % turns the rest of its row,
    the row end included, into a comment)."""
    from tests.report.latex_check import markup_errors

    template = "\n".join([r"\begin{table}", r"\begin{tabular}{ll}", r"\toprule", r"a & b \\", "ROW",
                          r"\bottomrule", r"\end{tabular}", r"\end{table}"])
    assert markup_errors(template.replace("ROW", r"c \& {d} & $-1.5$ \\")) == []
    errors = markup_errors(template.replace("ROW", broken))
    assert errors, broken
    assert any(complaint in e for e in errors), errors
