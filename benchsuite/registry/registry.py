"""The registry: built-in cases and suites merged with the user's.

Layout of a case directory (the built-in one is ``reference_data/``)::

    cases/*.toml      one case per file (the built-in registry)
    suites/*.toml     named suites
    sources.bib       every key that a case cites

A user directory given with ``--cases DIR`` holds case files directly
(``DIR/*.toml``), and optionally ``DIR/suites/*.toml`` and ``DIR/sources.bib``;
its bib keys and cases are merged with the built-in ones.  A case name that
appears twice anywhere is an input error naming both files.

Suite file fields: ``name``, ``description``, ``cases`` (case names, scan
names meaning every point, or shell-style patterns such as ``"h2o-*"``),
optional ``basis`` (run every case in this basis rather than its first one)
``threshold_mha`` (the pass threshold for this suite) and ``exclude_tags`` (cases carrying any of
these tags are left out, e.g. ``all`` leaves out the ``beyond-exact`` cases).
"""

from __future__ import annotations

import fnmatch
import os
from dataclasses import dataclass
from pathlib import Path

from benchsuite.errors import InputError
from benchsuite.registry.bib import BibEntry, read_bib
from benchsuite.registry.case import Basis, Case
from benchsuite.registry.loader import check_type, check_number, parse_case_file, read_toml


def builtin_data_dir() -> Path:
    """The built-in registry: ``$BENCHSUITE_REFERENCE_DATA``, else the ``benchsuite.reference_data``
    package -- the repository's top-level ``reference_data/``, which setuptools maps into the package
    so that it ships inside the wheel and an editable install reads the checkout's files."""
    env = os.environ.get("BENCHSUITE_REFERENCE_DATA")
    if env:
        path = Path(env)
    else:
        from importlib.resources import files

        path = Path(str(files("benchsuite.reference_data")))
    if not (path / "cases").is_dir():
        raise InputError("built-in registry not found (no cases/ directory); reinstall benchsuite "
                         "or set BENCHSUITE_REFERENCE_DATA", path)
    return path


@dataclass(frozen=True)
class Suite:
    name: str
    description: str
    patterns: tuple[str, ...]
    path: Path
    basis: str | None = None
    threshold_mha: float | None = None
    exclude_tags: tuple[str, ...] = ()


@dataclass(frozen=True)
class SuiteEntry:
    """One (case, basis) pair of a suite, the unit the runner works on."""

    case: Case
    basis: Basis


class Registry:
    """Cases by name, suites by name and bibliography entries by key."""

    def __init__(self, cases: dict[str, Case], suites: dict[str, Suite], bib: dict[str, BibEntry]):
        self.cases = cases
        self.suites = suites
        self.bib = bib

    # -- loading -------------------------------------------------------------
    @classmethod
    def load(cls, case_dirs: list[Path] | None = None, case_files: list[Path] | None = None,
             builtin: bool = True) -> "Registry":
        """Built-in registry plus ``case_dirs`` (``--cases``) and ``case_files`` (``--case-file``)."""
        sources: list[tuple[list[Path], Path | None, Path | None]] = []  # (case files, suites dir, bib)
        if builtin:
            root = builtin_data_dir()
            sources.append((sorted((root / "cases").glob("*.toml")), root / "suites", root / "sources.bib"))
        for d in case_dirs or []:
            d = Path(d)
            if not d.is_dir():
                raise InputError("not a directory", d, "--cases")
            sources.append((sorted(d.glob("*.toml")), d / "suites", d / "sources.bib"))
        for f in case_files or []:
            f = Path(f)
            if not f.is_file():
                raise InputError("no such file", f, "--case-file")
            sources.append(([f], None, f.parent / "sources.bib"))

        bib: dict[str, BibEntry] = {}
        for _, _, bib_path in sources:
            if bib_path is not None and bib_path.is_file():
                for key, entry in read_bib(bib_path).items():
                    if key in bib and bib[key].raw != entry.raw:
                        raise InputError(f"bib key {key!r} also defined differently in {bib[key].path}",
                                         bib_path, key)
                    bib[key] = entry

        cases: dict[str, Case] = {}
        for files, _, _ in sources:
            for path in files:
                for case in parse_case_file(path, set(bib)):
                    prior = cases.get(case.name)
                    if prior is not None and prior.path.resolve() != path.resolve():
                        raise InputError(f"duplicate case name {case.name!r}, also in {prior.path}",
                                         path, "name")
                    cases[case.name] = case

        suites: dict[str, Suite] = {}
        for _, suite_dir, _ in sources:
            if suite_dir is not None and suite_dir.is_dir():
                for path in sorted(suite_dir.glob("*.toml")):
                    suite = _parse_suite(path)
                    if suite.name in suites and suites[suite.name].path != path:
                        raise InputError(f"duplicate suite name {suite.name!r}, also in "
                                         f"{suites[suite.name].path}", path, "name")
                    suites[suite.name] = suite
        registry = cls(cases, suites, bib)
        for suite in suites.values():
            registry.suite_entries(suite.name)  # every pattern must match something
        return registry

    # -- queries -------------------------------------------------------------
    def case(self, name: str) -> Case:
        try:
            return self.cases[name]
        except KeyError:
            hint = sorted(n for n in self.cases if n.startswith(name.split("@")[0]))[:8]
            more = f"; did you mean one of {hint}?" if hint else ""
            raise InputError(f"unknown case {name!r}{more}", field="CASE") from None

    def scan_points(self, parent: str) -> list[Case]:
        """Points of a scan, shortest bond first."""
        pts = [c for c in self.cases.values() if c.scan_parent == parent]
        return sorted(pts, key=lambda c: c.scan_length)

    def select(self, pattern: str) -> list[Case]:
        """Cases matching a name, a scan name (every point) or a shell pattern."""
        if pattern in self.cases:
            return [self.cases[pattern]]
        points = self.scan_points(pattern)
        if points:
            return points
        return [c for n, c in sorted(self.cases.items()) if fnmatch.fnmatchcase(n, pattern)]

    def named_entries(self, names: list[str], basis: str | None = None) -> list[SuiteEntry]:
        """(case, basis) pairs for names given on the command line: a case, a scan (every point)
        or a pattern; a name matching nothing is an input error with suggestions."""
        entries = []
        for name in names:
            matched = self.select(name) if "@" not in name else [self.case(name)]
            if not matched:
                self.case(name)  # raises with suggestions
            entries += [SuiteEntry(case=c, basis=c.basis(basis)) for c in matched]
        return entries

    def suite_entries(self, suite_name: str, basis: str | None = None) -> list[SuiteEntry]:
        """The (case, basis) pairs of a suite, in the suite file's order, no repeats."""
        try:
            suite = self.suites[suite_name]
        except KeyError:
            raise InputError(f"unknown suite {suite_name!r}; known: {sorted(self.suites)}",
                             field="--suite") from None
        seen: dict[str, Case] = {}
        for pat in suite.patterns:
            matched = self.select(pat)
            if not matched:
                raise InputError(f"{pat!r} matches no case", suite.path, "cases")
            for case in matched:
                if not set(case.tags) & set(suite.exclude_tags):
                    seen.setdefault(case.name, case)
        label = basis or suite.basis
        return [SuiteEntry(case=c, basis=c.basis(label)) for c in seen.values()]


def _parse_suite(path: Path) -> Suite:
    raw = read_toml(path)
    unknown = set(raw) - {"name", "description", "cases", "basis", "threshold_mha", "exclude_tags"}
    if unknown:
        raise InputError(f"unknown field(s) {sorted(unknown)}", path, sorted(unknown)[0])
    for key in ("name", "cases"):
        if key not in raw:
            raise InputError("missing", path, key)
    patterns = check_type(raw["cases"], list, path, "cases", "a list of case names or patterns")
    if not patterns or not all(isinstance(p, str) for p in patterns):
        raise InputError("expected a non-empty list of strings", path, "cases")
    threshold = raw.get("threshold_mha")
    if threshold is not None:
        threshold = check_number(threshold, path, "threshold_mha")
        if threshold <= 0:
            raise InputError("must be positive", path, "threshold_mha")
    basis = raw.get("basis")
    if basis is not None:
        basis = check_type(basis, str, path, "basis", "a basis name").lower()
    return Suite(name=check_type(raw["name"], str, path, "name", "a string"),
                 description=check_type(raw.get("description", ""), str, path, "description", "a string"),
                 patterns=tuple(patterns), path=path, basis=basis, threshold_mha=threshold,
                 exclude_tags=tuple(check_type(raw.get("exclude_tags", []), list, path, "exclude_tags",
                                               "a list of tags")))
