"""How a task, a molecule, a basis and an encoding read in every output (terminal, JUnit, HTML, tables).

One place for the spelling a chemist expects, so the terminal, the JUnit testcase names, the HTML
report and the citable tables name a task the same way:

* :func:`basis_label` -- a basis as published: ``sto-3g`` -> ``STO-3G``, ``cc-pvdz`` -> ``cc-pVDZ``,
  ``aug-cc-pvtz`` -> ``aug-cc-pVTZ``, ``6-31g*`` -> ``6-31G*``, ``6-311+g(d,p)`` -> ``6-311+G(d,p)``,
  ``def2-svp`` -> ``def2-SVP``; a per-element basis ``Li:6-31g,H:sto-3g`` -> ``Li 6-31G, H STO-3G``;
  a name it does not know is left as given.
* :func:`encoding_label` -- the stored encoding label ``name[+reduction...]/ordering`` in words:
  ``jordan-wigner/interleaved`` -> ``jordan-wigner, interleaved``.
* :func:`task_label` -- ``h2 / STO-3G / jordan-wigner · exact-sector`` (case name, basis as
  published, encoding name, method); the parts a view already states are left out.
* :class:`Molecule` and :func:`molecule_of` -- the molecular formula in Hill order (the registry's
  :func:`benchsuite.registry.case.hill_formula`, the order of Chemical Abstracts) with its charge
  as a right superscript and, for a multiplicity above one, the multiplicity as a left superscript
  (``³O₂``, ``HHe⁺``, ``²HO``), as plain Unicode, as HTML and as LaTeX.

The stored ``task_key`` (``case/basis/encoding/method#hash``) is never changed here: the store and
baselines match on it.  Pure string work: no PySCF, no OpenFermion.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from html import escape as html_escape

#: Basis families whose published spelling differs from PySCF's lower-case names (common practice).
_UPPER_NAMES = ("sto-", "minao", "ano-rcc", "ugbs")
_CORRELATION_CONSISTENT = re.compile(r"^(?P<pre>(?:aug-|[dt]-aug-|jun-|may-|apr-)?)cc-p(?P<core>w?c?)v"
                                     r"(?P<zeta>[dtq56]|\(.+\))z(?P<rest>.*)$")
_POPLE = re.compile(r"^(?P<head>\d-\d+\+{0,2})g(?P<rest>.*)$")
_KARLSRUHE = re.compile(r"^def2-(?P<name>[a-z]+)(?P<rest>.*)$")

_SUPERSCRIPT = str.maketrans("0123456789+-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻")
_SUBSCRIPT = str.maketrans("0123456789", "₀₁₂₃₄₅₆₇₈₉")
_FORMULA_PART = re.compile(r"([A-Z][a-z]?)(\d*)")


def _one_basis(name: str) -> str:
    low = name.strip().lower()
    if low.startswith(_UPPER_NAMES):
        return low.upper()
    m = _CORRELATION_CONSISTENT.match(low)
    if m:
        core = m["core"].replace("c", "C")
        return f"{m['pre']}cc-p{core}V{m['zeta'].upper()}Z{m['rest'].upper()}"
    m = _POPLE.match(low)
    if m:
        return f"{m['head']}G{m['rest']}"
    m = _KARLSRUHE.match(low)
    if m:
        return f"def2-{m['name'].upper()}{m['rest'].upper()}"
    return name.strip()


def basis_label(basis: str) -> str:
    """A basis name as it is published (see the module docstring); per-element bases part by part."""
    text = str(basis)
    if ":" not in text:
        return _one_basis(text)
    parts = []
    for item in text.split(","):
        element, _, name = item.partition(":")
        parts.append(f"{element.strip()} {_one_basis(name)}")
    return ", ".join(parts)


def encoding_parts(encoding: str) -> tuple[str, list[str]]:
    """(encoding name, [ordering, reductions...]) of a stored label ``name[+extra...]/ordering``."""
    name_part, _, ordering = str(encoding).partition("/")
    name, *extras = name_part.split("+")
    return name, [x for x in [ordering, *extras] if x]


def encoding_label(encoding: str) -> str:
    """``jordan-wigner/interleaved`` -> ``jordan-wigner, interleaved``; reductions follow the ordering."""
    name, rest = encoding_parts(encoding)
    return ", ".join([name, *rest])


def task_label(case: str, basis: str | None = None, encoding: str | None = None, method: str | None = None,
               *, full_encoding: bool = False) -> str:
    """``h2 / STO-3G / jordan-wigner · exact-sector``: the parts given, in that order.

    ``encoding`` shows its name only (``jordan-wigner``) unless ``full_encoding`` (then with its
    ordering and reductions, :func:`encoding_label`).
    """
    parts = [str(case)]
    if basis is not None:
        parts.append(basis_label(basis))
    if encoding is not None:
        parts.append(encoding_label(encoding) if full_encoding else encoding_parts(encoding)[0])
    text = " / ".join(parts)
    return text if method is None else f"{text} · {method}"


@dataclass(frozen=True)
class Molecule:
    """A molecule's formula (Hill order), charge and multiplicity, printable three ways."""

    formula: str
    charge: int = 0
    multiplicity: int = 1

    def _pieces(self) -> list[tuple[str, str]]:
        return [(el, n) for el, n in _FORMULA_PART.findall(self.formula)]

    @property
    def charge_text(self) -> str:
        """``+``, ``2+``, ``-``, or empty for a neutral molecule."""
        if self.charge == 0:
            return ""
        size = abs(self.charge)
        return ("" if size == 1 else str(size)) + ("+" if self.charge > 0 else "-")

    @property
    def state_text(self) -> str:
        """The multiplicity as a left superscript, empty for a singlet."""
        return str(self.multiplicity) if self.multiplicity > 1 else ""

    def text(self) -> str:
        """Unicode: ``³O₂``, ``HHe⁺``, ``H₂O``."""
        body = "".join(el + n.translate(_SUBSCRIPT) for el, n in self._pieces()) or self.formula
        return self.state_text.translate(_SUPERSCRIPT) + body + self.charge_text.translate(_SUPERSCRIPT)

    def ascii(self) -> str:
        """Plain ASCII for machine-read files: ``3-O2``, ``HHe+``, ``H2O``."""
        return (f"{self.state_text}-" if self.state_text else "") + self.formula + self.charge_text

    def html(self) -> str:
        """Escaped HTML with ``<sub>``/``<sup>``: ``<sup>3</sup>O<sub>2</sub>``."""
        body = "".join(html_escape(el) + (f"<sub>{n}</sub>" if n else "") for el, n in self._pieces())
        body = body or html_escape(self.formula)
        pre = f"<sup>{self.state_text}</sup>" if self.state_text else ""
        post = f"<sup>{html_escape(self.charge_text)}</sup>" if self.charge_text else ""
        return pre + body + post

    def latex(self) -> str:
        """Math-mode LaTeX needing no package: ``${}^{3}\\mathrm{O}_{2}$``, ``$\\mathrm{HHe}^{+}$``."""
        body = "".join(rf"\mathrm{{{el}}}" + (f"_{{{n}}}" if n else "") for el, n in self._pieces())
        if not body:
            return ""
        pre = f"{{}}^{{{self.state_text}}}" if self.state_text else ""
        post = f"^{{{self.charge_text}}}" if self.charge_text else ""
        return f"${pre}{body}{post}$"


def molecule_of(case_name: str, registry=None) -> Molecule | None:
    """The molecule of a registry case (None when the registry is absent or lacks the case)."""
    case = None if registry is None else registry.cases.get(case_name)
    if case is None:
        return None
    return Molecule(case.formula, int(case.charge), int(case.multiplicity))
