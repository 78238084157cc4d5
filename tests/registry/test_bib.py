"""sources.bib through benchsuite.registry.bib (bibtexparser v2 underneath).

Outside reference for what a valid entry is: BibTeX's own grammar as documented by
O. Patashnik, "BibTeXing" (1988): a field value is a brace- or quote-delimited string
that may span lines and nest braces, or a bare number; entry types and field names are
case-insensitive.  The shipped reference_data/sources.bib is the real-world input.
"""

from __future__ import annotations

import os
import textwrap
from pathlib import Path

import pytest

from benchsuite.errors import InputError
from benchsuite.registry.bib import read_bib
from tests.conftest import H2_CASE

MULTI_LINE = textwrap.dedent("""\
    % a comment line between entries is ignored
    @Article{kolos-1976,
      Author  = {Ko{\\l}os, W. and Peek, J. M.},
      title   = {New ab initio potential curve and quasibound states
                 of {HeH}$^+$},
      journal = "Chem. Phys.",
      volume  = 12,
      pages   = {381--386},
      year    = {1976}
    }

    @misc{second, note = {one {nested {two}} level}, year = 2001}
""")


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "sources.bib"
    path.write_text(text)
    return path


def test_multi_line_field_braces_and_bare_numbers(tmp_path):
    entries = read_bib(_write(tmp_path, MULTI_LINE))
    assert set(entries) == {"kolos-1976", "second"}
    entry = entries["kolos-1976"]
    assert entry.kind == "article"
    title = " ".join(entry.fields["title"].split())
    assert title == "New ab initio potential curve and quasibound states of {HeH}$^+$"
    assert entry.fields["author"] == "Ko{\\l}os, W. and Peek, J. M."
    assert entry.fields["journal"] == "Chem. Phys." and entry.fields["volume"] == "12"
    assert entry.short() == "Ko{\\l}os (1976)"
    assert entry.raw.startswith("@Article{kolos-1976,") and entry.raw.endswith("}")
    assert "quasibound states\n" in entry.raw                  # written back verbatim by `table --bib`
    assert entries["second"].fields["note"] == "one {nested {two}} level"
    assert entries["second"].fields["year"] == "2001"


def test_malformed_entry_names_file_entry_and_line(tmp_path):
    broken = MULTI_LINE.replace("year = 2001}", "year = 2001}\n\n@book{unclosed,\n  title = {no end\n")
    path = _write(tmp_path, broken + "@misc{after, year = 2002}\n")
    with pytest.raises(InputError) as info:
        read_bib(path)
    assert info.value.path == str(path) and info.value.field == "unclosed"
    assert "'unclosed' (line 14)" in str(info.value) and "not valid BibTeX" in str(info.value)


def test_missing_equals_sign_is_reported_with_the_parsers_reason(tmp_path):
    with pytest.raises(InputError, match=r"entry 'k' \(line 1\).*`=`"):
        read_bib(_write(tmp_path, "@article{k, title {x}}\n"))


def test_key_defined_twice(tmp_path):
    with pytest.raises(InputError, match=r"'twice' defined twice \(line 3\)"):
        read_bib(_write(tmp_path, "@misc{twice, year = 1}\n\n@misc{twice, year = 2}\n"))


def test_a_fifo_is_refused_without_blocking(tmp_path):
    os.mkfifo(tmp_path / "pipe.bib")
    with pytest.raises(InputError, match="not a regular file"):
        read_bib(tmp_path / "pipe.bib")


def test_shipped_bibliography_reads(registry):
    assert len(registry.bib) >= 10
    assert all(entry.raw.startswith("@") and entry.fields.get("title") for entry in registry.bib.values())


def test_malformed_bib_is_exit_2_from_the_command_line(tmp_path, run_cli):
    (tmp_path / "sources.bib").write_text("@misc{scratch-geometry,\n  title = {Scratch\n   geometry},\n"
                                          "  year = {2026}\n}\n@article{bad entry, year = 1}\n")
    case = tmp_path / "case.toml"
    case.write_text(H2_CASE)
    code, out, err = run_cli("cases", "--case-file", str(case))
    assert code == 2 and out == ""
    assert "sources.bib" in err and "'bad entry' (line 6)" in err and "not a valid BibTeX key" in err


def test_multi_line_entry_is_citable_from_a_case(tmp_path, run_cli):
    (tmp_path / "sources.bib").write_text("@misc{scratch-geometry,\n  author = {Nobody,\n    A.},\n"
                                          "  title = {Scratch\n   geometry},\n  year = {2026}\n}\n")
    case = tmp_path / "case.toml"
    case.write_text(H2_CASE)
    code, out, err = run_cli("cases", "--case-file", str(case), "--format", "json")
    assert code == 0, err
    assert "scratch-h2" in out
