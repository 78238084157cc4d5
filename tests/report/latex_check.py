"""Does a LaTeX table compile as it is?  Three routes, strongest first.

1. :func:`engine` -- a LaTeX engine on PATH (``pdflatex``, ``lualatex``, ``xelatex`` or ``tectonic``)
   compiles the table inside a minimal ``article`` with ``booktabs``.
2. :func:`pylatexenc_errors` -- the pylatexenc parser, strict mode, when it is installed.
3. :func:`markup_errors` -- always: a checker of the markup a compiler would reject, written for
   this table's subset of LaTeX: ASCII only; every command known to the LaTeX kernel or booktabs;
   braces balanced outside math and inside it; ``$`` math closed on the line it opens; no
   unescaped ``% # & _ ^ ~`` where they mean something else; ``\\begin``/``\\end`` properly nested;
   inside ``tabular`` every line a booktabs rule or a row ending in ``\\\\`` with as many cells as
   the column specification has columns.
   The rules are LaTeX's own (Lamport, *LaTeX: A Document Preparation System*, 2nd ed., 1994,
   ch. 2-3; the booktabs manual for ``\\toprule``/``\\midrule``/``\\bottomrule``) -- common practice.
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

#: Commands the tables may use: the LaTeX kernel's and booktabs' (symbols, text commands, floats).
KNOWN_COMMANDS = frozenset({
    "begin", "end", "centering", "caption", "label", "toprule", "midrule", "bottomrule", "cite", "mathrm",
    "le", "ge", "pm", "times", "cdot", "sigma", "mu", "to", "AA", "textbackslash", "textasciitilde",
    "textasciicircum", "textless", "textgreater", "textbar", "documentclass", "usepackage",
})
#: Escaped characters: ``\&`` and friends, the row end ``\\`` and the control space ``\ ``.
ESCAPES = frozenset("&%$#_{}\\ ")
RULES = frozenset({r"\toprule", r"\midrule", r"\bottomrule"})
ENVIRONMENTS = frozenset({"table", "tabular", "document"})
_COMMAND = re.compile(r"\\([A-Za-z]+|.)")


def _strip_comments(line: str) -> str:
    """The line up to an unescaped ``%`` (an even number of backslashes before it)."""
    m = re.search(r"(?<!\\)(?:\\\\)*%", line)
    return line if m is None else line[:m.end() - 1]


def _cells(line: str) -> int:
    """Cells in a tabular row: unescaped ``&`` outside braces and math, plus one."""
    depth, math, n, i = 0, False, 1, 0
    while i < len(line):
        ch = line[i]
        if ch == "\\":
            i += 2
            continue
        if ch == "$":
            math = not math
        elif ch == "{":
            depth += 1
        elif ch == "}":
            depth -= 1
        elif ch == "&" and depth == 0 and not math:
            n += 1
        i += 1
    return n


def _line_errors(no: int, line: str) -> list[str]:
    errors, depth, math, i = [], 0, False, 0
    while i < len(line):
        ch = line[i]
        if ch == "\\":
            m = _COMMAND.match(line, i)
            name = m.group(1)
            if len(name) == 1 and name not in ESCAPES:
                errors.append(f"line {no}: unknown escape \\{name}")
            elif len(name) > 1 and name not in KNOWN_COMMANDS:
                errors.append(f"line {no}: unknown command \\{name}")
            i = m.end()
            continue
        if ch == "$":
            math = not math
        elif ch == "{":
            depth += 1
        elif ch == "}":
            depth -= 1
            if depth < 0:
                errors.append(f"line {no}: '}}' closes nothing")
                depth = 0
        elif ch in "#~" or (ch in "_^" and not math):
            errors.append(f"line {no}: unescaped {ch!r}")
        i += 1
    if depth:
        errors.append(f"line {no}: {depth} unclosed '{{'")
    if math:
        errors.append(f"line {no}: unclosed '$'")
    return errors


def markup_errors(tex: str) -> list[str]:
    """What a LaTeX compiler would reject in ``tex`` (empty when it would compile); see the module docstring."""
    errors: list[str] = []
    if not tex.isascii():
        errors.append("non-ASCII characters: " + "".join(sorted({c for c in tex if not c.isascii()})))
    stack: list[tuple[str, int]] = []
    for no, raw in enumerate(tex.splitlines(), 1):
        line = _strip_comments(raw)
        errors += _line_errors(no, line)
        for kind, env, spec in re.findall(r"\\(begin|end)\{([^}]*)\}(?:\{([^}]*)\})?", line):
            if env not in ENVIRONMENTS:
                errors.append(f"line {no}: unknown environment {env}")
            if kind == "begin":
                stack.append((env, len(spec) if env == "tabular" else 0))
            elif not stack or stack[-1][0] != env:
                errors.append(f"line {no}: \\end{{{env}}} closes {stack[-1][0] if stack else 'nothing'}")
            else:
                stack.pop()
        in_tabular = stack and stack[-1][0] == "tabular" and not line.lstrip().startswith("\\begin")
        if in_tabular and line.strip() not in RULES:
            if not line.rstrip().endswith("\\\\"):
                errors.append(f"line {no}: a tabular row that does not end with \\\\ (a value ate it?)")
            elif _cells(line) != stack[-1][1]:
                errors.append(f"line {no}: {_cells(line)} cells in a {stack[-1][1]}-column tabular")
    errors += [f"\\begin{{{env}}} never ended" for env, _ in stack]
    return errors


def document(table: str) -> str:
    """The table inside the smallest document that compiles it (``article`` and ``booktabs``)."""
    return "\n".join([r"\documentclass{article}", r"\usepackage{booktabs}", r"\begin{document}", table,
                      r"\end{document}", ""])


def pylatexenc_errors(tex: str) -> list[str] | None:
    """The pylatexenc parser's complaint in strict mode, [] if none; None when it is not installed."""
    try:
        from pylatexenc.latexwalker import LatexWalker
    except ImportError:
        return None
    try:
        LatexWalker(tex, tolerant_parsing=False).get_latex_nodes()
    except Exception as exc:                      # the parser's own error types vary across versions
        return [str(exc)]
    return []


def engine() -> list[str] | None:
    """The command of the first LaTeX engine on PATH, or None."""
    for name in ("pdflatex", "lualatex", "xelatex"):
        if shutil.which(name):
            return [name, "-interaction=nonstopmode", "-halt-on-error"]
    return ["tectonic"] if shutil.which("tectonic") else None


def compile_with_engine(tex: str, workdir: Path) -> subprocess.CompletedProcess:
    src = workdir / "table.tex"
    src.write_text(tex, encoding="ascii")
    return subprocess.run([*engine(), src.name], cwd=workdir, capture_output=True, text=True, timeout=120)
