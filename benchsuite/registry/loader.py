"""Read and validate case files (TOML) into :class:`~benchsuite.registry.case.Case`.

Every problem is raised as :class:`~benchsuite.errors.InputError` naming the
file, the field and what is wrong.  Unknown fields are rejected, so a typo
such as ``multiplicty`` cannot silently fall back to a default.
"""

from __future__ import annotations

import codecs
import math
import re
import tomllib
from pathlib import Path
from typing import Any

import numpy as np

from benchsuite.constants import ANGSTROM_BOHR, BOHR_ANGSTROM
from benchsuite.errors import InputError
from benchsuite.registry import bounds
from benchsuite.registry.bounds import MAX_CASE_FILE_BYTES, MAX_NESTING_DEPTH, MIN_ATOM_DISTANCE_ANGSTROM
from benchsuite.registry.case import (
    DMRG_ORBITAL_CHOICES,
    ActiveSpace,
    Basis,
    Case,
    DmrgSchedule,
    PublishedValue,
    Scan,
    format_length,
    neighbour_distances_angstrom,
    scan_geometry,
)
from benchsuite.registry.elements import ATOMIC_NUMBER, normalise_symbol

NAME_PATTERN = re.compile(r"[a-z0-9]+(-[a-z0-9]+)*")  # used with fullmatch: no trailing newline

REQUIRED = ("name", "title", "units", "charge", "multiplicity", "atoms", "basis", "tags",
            "geometry_source")
OPTIONAL = ("frozen_core", "active_space", "scan", "reference", "notes", "threshold_mha", "dmrg")
DMRG_FIELDS = ("bond_dims", "sweeps_per_dim", "noisy_sweeps", "noise", "davidson_tol", "fit_points",
               "orbitals")
REFERENCE_FIELDS = {"method", "basis", "energy_ha", "source", "note", "from_memory"}


def read_toml(path: Path) -> dict[str, Any]:
    """Parse a UTF-8 TOML file; every failure is an InputError with its line (and field when known).

    Checked before parsing: the size (``MAX_CASE_FILE_BYTES``), the encoding (UTF-8; a UTF-8
    byte-order mark is allowed) and the nesting depth (``MAX_NESTING_DEPTH``).
    """
    text = read_text(path)
    check_nesting(text, path)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"malformed TOML: {exc}", path) from None
    except (ValueError, RecursionError) as exc:  # e.g. an integer of more than 4300 digits
        long_number = _LONG_DIGITS.search(text)
        line = None if long_number is None else text.count("\n", 0, long_number.start()) + 1
        raise InputError(f"malformed TOML{'' if line is None else f' (line {line})'}: {_clip(str(exc))}",
                         path, None if line is None else field_at_line(text.splitlines(), line)) from None


_LONG_DIGITS = re.compile(r"\d[\d_]{1000,}")


def read_text(path: Path) -> str:
    """The file as text: a regular file (a FIFO would block the read), at most ``MAX_CASE_FILE_BYTES``,
    UTF-8, no NUL characters."""
    if Path(path).exists() and not Path(path).is_file():
        raise InputError("not a regular file", path)
    try:
        with open(path, "rb") as fh:
            data = fh.read(MAX_CASE_FILE_BYTES + 1)
    except OSError as exc:
        raise InputError(f"cannot read file: {exc.strerror}", path) from None
    if len(data) > MAX_CASE_FILE_BYTES:
        raise InputError(f"larger than {MAX_CASE_FILE_BYTES} bytes; not a case file", path)
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        raise InputError("the file is UTF-16 (it starts with a UTF-16 byte-order mark); "
                         "save it as UTF-8", path)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        lines = data.decode("utf-8", errors="replace").splitlines()
        raise InputError(f"line {line}: byte 0x{data[exc.start]:02x} is not valid UTF-8; case files "
                         "must be UTF-8", path, field_at_line(lines, line)) from None
    if "\x00" in text:
        line = text.count("\n", 0, text.index("\x00")) + 1
        raise InputError(f"line {line}: NUL character (a UTF-16 or binary file?); case files must be UTF-8",
                         path, field_at_line(text.splitlines(), line))
    return text.removeprefix("\ufeff")


_KEY_LINE = re.compile(r"""^\s*([A-Za-z0-9_\-]+|"[^"]*"|'[^']*')\s*=""")
_HEADER_LINE = re.compile(r"^\s*\[\[?\s*([^\]]+?)\s*\]")


def field_at_line(lines: list[str], line: int) -> str | None:
    """The dotted key whose value spans line ``line`` (1-based): the nearest ``key =`` at or above
    it, prefixed with the table header above that; None if there is none."""
    key = None
    for text in reversed(lines[:line]):
        if key is None:
            m = _KEY_LINE.match(text)
            if m:
                key = m.group(1).strip("\"'")
            continue
        m = _HEADER_LINE.match(text)
        if m:
            return f"{m.group(1)}.{key}"
    return key


def check_nesting(text: str, path: Path) -> None:
    """Reject arrays / inline tables nested deeper than ``MAX_NESTING_DEPTH`` before the
    (recursive) TOML parser meets them.  Brackets inside strings and comments are skipped."""
    depth, line, quote, i = 0, 1, "", 0
    while (m := _SPECIAL.search(text, i)) is not None:
        i, ch = m.start(), m.group()
        if ch == "\n":
            line, i = line + 1, i + 1
        elif quote:
            if ch == "\\" and quote[0] == '"':
                i += 2 if text[i + 1:i + 2] != "\n" else 1   # an escaped character
            elif text.startswith(quote, i):
                i, quote = i + len(quote), ""
            else:
                i += 1
        elif ch in "\"'":
            quote = ch * 3 if text.startswith(ch * 3, i) else ch
            i += len(quote)
        elif ch == "#":
            end = text.find("\n", i)
            i = len(text) if end < 0 else end
        else:
            depth = depth + 1 if ch in "[{" else max(depth - (ch in "]}"), 0)
            if depth > MAX_NESTING_DEPTH:
                raise InputError(f"line {line}: arrays or tables nested more than {MAX_NESTING_DEPTH} "
                                 "deep", path, field_at_line(text.splitlines(), line))
            i += 1


_SPECIAL = re.compile(r"""[\n"'#\[\]{}\\]""")


def _clip(text: str, limit: int = 120) -> str:
    return text if len(text) <= limit else text[:limit] + "..."


def show(value: Any) -> str:
    """A value for an error message: short, and safe for integers of any size."""
    if isinstance(value, int) and not isinstance(value, bool) and value.bit_length() > 64:
        return f"an integer of {value.bit_length()} bits"
    try:
        return _clip(repr(value))
    except ValueError:  # repr of a huge int nested in a list
        return f"a {type(value).__name__} too large to print"


def check_type(value: Any, kinds: type | tuple[type, ...], path: Path, name: str, what: str) -> Any:
    # bool is an int in Python; a TOML `true` where a number belongs is a mistake.
    if isinstance(value, bool) and bool not in (kinds if isinstance(kinds, tuple) else (kinds,)):
        raise InputError(f"expected {what}, got {show(value)}", path, name)
    if not isinstance(value, kinds):
        raise InputError(f"expected {what}, got {show(value)}", path, name)
    return value


def check_number(value: Any, path: Path, name: str, max_abs: float | None = None) -> float:
    """A finite int or float (NaN, inf, overflowing integers refused), |value| <= ``max_abs``."""
    check_type(value, (int, float), path, name, "a number")
    try:
        val = float(value)
    except OverflowError:
        raise InputError(f"{show(value)} is out of range for a number", path, name) from None
    if not math.isfinite(val):
        raise InputError(f"expected a finite number, got {show(value)}", path, name)
    if max_abs is not None and abs(val) > max_abs:
        raise InputError(f"{val:g} is out of range (|value| <= {max_abs:g})", path, name)
    return val


def check_int(value: Any, path: Path, name: str, what: str, max_abs: int) -> int:
    """An integer with |value| <= ``max_abs``."""
    check_type(value, int, path, name, what)
    if abs(value) > max_abs:
        raise InputError(f"{show(value)} is out of range (|value| <= {max_abs})", path, name)
    return value


def max_coordinate(units: str) -> float:
    """``MAX_COORDINATE_ANGSTROM`` in the file's units."""
    return bounds.MAX_COORDINATE_ANGSTROM * (1.0 if units == "angstrom" else ANGSTROM_BOHR)


def _parse_atoms(raw: Any, path: Path, units: str) -> tuple[tuple[str, ...], np.ndarray]:
    check_type(raw, list, path, "atoms", "a list of [symbol, x, y, z]")
    if not raw:
        raise InputError("at least one atom is required", path, "atoms")
    if len(raw) > bounds.MAX_ATOMS:
        raise InputError(f"{len(raw)} atoms; at most {bounds.MAX_ATOMS} are accepted", path, "atoms")
    limit = max_coordinate(units)
    symbols, coords = [], []
    for k, atom in enumerate(raw):
        fname = f"atoms[{k}]"
        if not isinstance(atom, list) or len(atom) != 4 or not isinstance(atom[0], str):
            raise InputError(f"expected [symbol, x, y, z], got {show(atom)}", path, fname)
        sym = normalise_symbol(atom[0])
        if sym is None:
            raise InputError(f"unknown element {show(atom[0])}", path, fname)
        symbols.append(sym)
        coords.append([check_number(c, path, fname, limit) for c in atom[1:]])
    return tuple(symbols), np.asarray(coords, dtype=float)


def _parse_basis(raw: Any, path: Path) -> tuple[Basis, ...]:
    if isinstance(raw, (str, dict)):
        raw = [raw]
    check_type(raw, list, path, "basis", "a list of basis names or per-element tables")
    if not raw:
        raise InputError("at least one basis is required", path, "basis")
    out = []
    for k, item in enumerate(raw):
        if isinstance(item, str) and item.strip():
            check_basis_name(item, path, f"basis[{k}]")
            out.append(Basis(label=item.strip().lower(), spec=item.strip().lower()))
        elif isinstance(item, dict) and item:
            pairs = []
            for elem, name in item.items():
                sym = normalise_symbol(elem)
                if sym is None or not isinstance(name, str):
                    raise InputError(f"per-element basis needs element = \"name\", got {show(elem)} = "
                                     f"{show(name)}", path, f"basis[{k}]")
                check_basis_name(name, path, f"basis[{k}].{elem}")
                pairs.append((sym, name.strip().lower()))
            label = ",".join(f"{s}:{n}" for s, n in pairs)
            out.append(Basis(label=label, spec=tuple(pairs)))
        else:
            raise InputError(f"expected a basis name or per-element table, got {show(item)}", path,
                             f"basis[{k}]")
    labels = [b.label for b in out]
    if len(set(labels)) != len(labels):
        raise InputError(f"basis listed twice: {labels}", path, "basis")
    return tuple(out)


def check_basis_name(name: str, path: Path, fname: str) -> None:
    """A basis is named, never given as a file path (PySCF would read any file it is given)."""
    if not name.strip() or len(name) > 100 or any(c in name for c in "/\\\x00") or name.strip()[0] == ".":
        raise InputError(f"{show(name)} is not a basis name (no paths, at most 100 characters)", path, fname)


def _parse_published(raw: Any, path: Path, bib_keys: set[str]) -> tuple[PublishedValue, ...]:
    check_type(raw, list, path, "reference", "an array of [[reference]] tables")
    out = []
    for k, ref in enumerate(raw):
        fname = f"reference[{k}]"
        check_type(ref, dict, path, fname, "a table")
        unknown = set(ref) - REFERENCE_FIELDS
        if unknown:
            raise InputError(f"unknown field(s) {sorted(unknown)}", path, fname)
        for req in ("method", "basis", "energy_ha", "source"):
            if req not in ref:
                raise InputError("missing", path, f"{fname}.{req}")
        source = check_type(ref["source"], str, path, f"{fname}.source", "a bib key")
        if source not in bib_keys:
            raise InputError(f"bib key {show(source)} is not in sources.bib", path, f"{fname}.source")
        out.append(PublishedValue(
            method=check_type(ref["method"], str, path, f"{fname}.method", "a string").lower(),
            basis=check_type(ref["basis"], str, path, f"{fname}.basis", "a string").lower(),
            energy_ha=check_number(ref["energy_ha"], path, f"{fname}.energy_ha", bounds.MAX_ABS_ENERGY_HA),
            source=source,
            note=check_type(ref.get("note", ""), str, path, f"{fname}.note", "a string"),
            from_memory=check_type(ref.get("from_memory", False), bool, path, f"{fname}.from_memory",
                                "true or false"),
        ))
    return tuple(out)


def _parse_scan(raw: Any, path: Path, coords: np.ndarray, units: str) -> Scan:
    n_atoms = len(coords)
    check_type(raw, dict, path, "scan", "a table")
    unknown = set(raw) - {"bond", "lengths", "move"}
    if unknown:
        raise InputError(f"unknown field(s) {sorted(unknown)}", path, "scan")
    bond = raw.get("bond")
    if not (isinstance(bond, list) and len(bond) == 2 and all(isinstance(b, int) and not isinstance(b, bool)
                                                           for b in bond)):
        raise InputError(f"expected two atom indices [i, j], got {show(bond)}", path, "scan.bond")
    move = raw.get("move", [])
    if not (isinstance(move, list) and all(isinstance(m, int) and not isinstance(m, bool) for m in move)):
        raise InputError(f"expected a list of atom indices, got {show(move)}", path, "scan.move")
    for fname, idx in [("scan.bond", b) for b in bond] + [("scan.move", m) for m in move]:
        if not 0 <= idx < n_atoms:
            raise InputError(f"atom index {idx} out of range (0..{n_atoms - 1}, counted from 0)", path, fname)
    if bond[0] == bond[1]:
        raise InputError("the two atoms must differ", path, "scan.bond")
    if np.linalg.norm(coords[bond[1]] - coords[bond[0]]) < 1e-6:
        raise InputError(f"atoms {bond[0]} and {bond[1]} are at the same place: the bond has no direction",
                         path, "scan.bond")
    if bond[0] in move:
        raise InputError(f"atom {bond[0]} is the fixed end of the bond and cannot move", path, "scan.move")
    lengths = raw.get("lengths")
    if not isinstance(lengths, list) or not lengths:
        raise InputError("expected a non-empty list of bond lengths", path, "scan.lengths")
    vals = tuple(check_number(v, path, "scan.lengths", max_coordinate(units)) for v in lengths)
    if any(v <= 0 for v in vals):
        raise InputError("bond lengths must be positive", path, "scan.lengths")
    if len({format_length(v) for v in vals}) != len(vals):
        raise InputError("a bond length is listed twice", path, "scan.lengths")
    return Scan(bond=(bond[0], bond[1]), lengths=vals, move=tuple(move))


def _bounded_int(raw: dict, key: str, low: int, high: int, default: int, path: Path) -> int:
    """``raw[key]`` (or ``default``) as an integer in ``[low, high]``; field ``dmrg.<key>``."""
    if key not in raw:
        return default
    value = check_type(raw[key], int, path, f"dmrg.{key}", "an integer")
    if not low <= value <= high:
        raise InputError(f"{show(value)} is out of range ({low}..{high})", path, f"dmrg.{key}")
    return value


def _dmrg_bond_dims(raw: Any, path: Path) -> tuple[int, ...]:
    name = "dmrg.bond_dims"
    if not isinstance(raw, list) or not all(isinstance(m, int) and not isinstance(m, bool) for m in raw):
        raise InputError(f"expected a list of integers, got {show(raw)}", path, name)
    if not 2 <= len(raw) <= bounds.MAX_DMRG_BOND_DIMS:
        raise InputError(f"{len(raw)} bond dimensions; give 2..{bounds.MAX_DMRG_BOND_DIMS} (the "
                         "extrapolation needs at least two)", path, name)
    if any(not 1 <= m <= bounds.MAX_DMRG_BOND_DIM for m in raw):
        raise InputError(f"every bond dimension must lie in 1..{bounds.MAX_DMRG_BOND_DIM}, got {show(raw)}",
                         path, name)
    if any(b <= a for a, b in zip(raw, raw[1:])):
        raise InputError(f"bond dimensions must increase strictly, got {show(raw)}", path, name)
    return tuple(raw)


def _dmrg_real(raw: dict, key: str, low: float, high: float, default: float, path: Path) -> float:
    if key not in raw:
        return default
    value = check_number(raw[key], path, f"dmrg.{key}")
    if not low <= value <= high:
        raise InputError(f"{value:g} is out of range ({low:g}..{high:g})", path, f"dmrg.{key}")
    return value


def _parse_dmrg(raw: Any, path: Path) -> DmrgSchedule:
    """The ``[dmrg]`` table: every field optional (the built-in schedule's value), each checked."""
    check_type(raw, dict, path, "dmrg", "a table")
    unknown = set(raw) - set(DMRG_FIELDS)
    if unknown:
        raise InputError(f"unknown field(s) {sorted(unknown)}; known: {', '.join(DMRG_FIELDS)}", path,
                         f"dmrg.{sorted(unknown)[0]}")
    base = DmrgSchedule()
    dims = _dmrg_bond_dims(raw["bond_dims"], path) if "bond_dims" in raw else base.bond_dims
    sweeps = _bounded_int(raw, "sweeps_per_dim", 1, bounds.MAX_DMRG_SWEEPS_PER_DIM, base.sweeps_per_dim, path)
    if "noisy_sweeps" not in raw and base.noisy_sweeps >= sweeps:
        raise InputError(f"with {sweeps} sweep(s) per bond dimension set noisy_sweeps below it (the "
                         "energy of each bond dimension is taken from a noise-free last sweep)",
                         path, "dmrg.sweeps_per_dim")
    noisy = _bounded_int(raw, "noisy_sweeps", 0, sweeps - 1, base.noisy_sweeps, path)
    fit = _bounded_int(raw, "fit_points", 2, len(dims), min(base.fit_points, len(dims)), path)
    orbitals = check_type(raw.get("orbitals", base.orbitals), str, path, "dmrg.orbitals", "a string")
    if orbitals not in DMRG_ORBITAL_CHOICES:
        raise InputError(f"{show(orbitals)} is not one of {', '.join(DMRG_ORBITAL_CHOICES)}", path,
                         "dmrg.orbitals")
    return DmrgSchedule(
        bond_dims=dims, sweeps_per_dim=sweeps, noisy_sweeps=noisy,
        noise=_dmrg_real(raw, "noise", 0.0, bounds.MAX_DMRG_NOISE, base.noise, path),
        davidson_tol=_dmrg_real(raw, "davidson_tol", *bounds.DMRG_DAVIDSON_TOL_RANGE, base.davidson_tol, path),
        fit_points=fit, orbitals=orbitals)


def _check_electrons(n_electrons: int, multiplicity: int, path: Path) -> None:
    if n_electrons < 1:
        raise InputError(f"the molecule has {n_electrons} electrons", path, "charge")
    unpaired = multiplicity - 1
    if unpaired > n_electrons or (n_electrons - unpaired) % 2:
        raise InputError(
            f"{n_electrons} electrons cannot have multiplicity {multiplicity} "
            f"(2S = {unpaired} unpaired electrons needs the same parity as the electron count)",
            path, "multiplicity")


def _parse_active(raw: Any, path: Path, n_electrons: int, multiplicity: int) -> ActiveSpace:
    check_type(raw, dict, path, "active_space", "a table with electrons and orbitals")
    unknown = set(raw) - {"electrons", "orbitals"}
    if unknown:
        raise InputError(f"unknown field(s) {sorted(unknown)}", path, "active_space")
    vals = {}
    for key in ("electrons", "orbitals"):
        if key not in raw:
            raise InputError("missing", path, f"active_space.{key}")
        vals[key] = check_type(raw[key], int, path, f"active_space.{key}", "a positive integer")
        if vals[key] < 1:
            raise InputError("must be at least 1", path, f"active_space.{key}")
    ne, no = vals["electrons"], vals["orbitals"]
    if ne > n_electrons:
        raise InputError(f"{ne} active electrons but the molecule has only {n_electrons}",
                         path, "active_space.electrons")
    if (n_electrons - ne) % 2:
        raise InputError(f"{n_electrons - ne} core electrons is odd; the core must be doubly occupied",
                         path, "active_space.electrons")
    if ne < multiplicity - 1:
        raise InputError(f"{ne} active electrons cannot hold {multiplicity - 1} unpaired spins",
                         path, "active_space.electrons")
    if ne > 2 * no:
        raise InputError(f"{ne} electrons do not fit in {no} spatial orbitals",
                         path, "active_space.orbitals")
    return ActiveSpace(electrons=ne, orbitals=no)


def _parse_frozen(raw: Any, path: Path, n_electrons: int, multiplicity: int) -> bool | int | None:
    if raw is False:
        return None
    if raw is True:
        return True
    count = check_type(raw, int, path, "frozen_core", "true, false or a number of orbitals")
    if count < 0:
        raise InputError("must not be negative", path, "frozen_core")
    if 2 * count > n_electrons - (multiplicity - 1):
        raise InputError(f"{count} doubly occupied frozen orbitals need {2 * count} paired electrons; "
                         f"the molecule has {n_electrons - (multiplicity - 1)}", path, "frozen_core")
    return count or None


def _parse_identity(raw: dict, path: Path) -> tuple[str, str, int, int]:
    """``(name, units, charge, multiplicity)`` of a case file, each checked."""
    name = check_type(raw["name"], str, path, "name", "a string")
    if len(name) > bounds.MAX_NAME_LENGTH or not NAME_PATTERN.fullmatch(name):
        raise InputError(f"{show(name)} must be lowercase letters, digits and single hyphens "
                         f"(at most {bounds.MAX_NAME_LENGTH} characters)", path, "name")
    units = check_type(raw["units"], str, path, "units", '"angstrom" or "bohr"').lower()
    if units not in ("angstrom", "bohr"):
        raise InputError(f'expected "angstrom" or "bohr", got {show(raw["units"])}', path, "units")
    charge = check_int(raw["charge"], path, "charge", "an integer", bounds.MAX_ABS_CHARGE)
    mult = check_type(raw["multiplicity"], int, path, "multiplicity", "an integer 2S+1")
    if mult < 1:
        raise InputError(f"must be at least 1 (2S+1), got {mult}", path, "multiplicity")
    return name, units, charge, mult


def _parse_space(raw: dict, path: Path, n_electrons: int, mult: int):
    """``(active space or None, frozen-core count or None)``; not both."""
    active = frozen = None
    if "active_space" in raw:
        active = _parse_active(raw["active_space"], path, n_electrons, mult)
    if "frozen_core" in raw:
        frozen = _parse_frozen(raw["frozen_core"], path, n_electrons, mult)
    if active is not None and frozen is not None:
        raise InputError("give either frozen_core or active_space: an active space already "
                         "freezes every orbital below it", path, "frozen_core")
    return active, frozen


def parse_case_file(path: Path, bib_keys: set[str]) -> list[Case]:
    """Validate one case file; returns one case, or one per scan point."""
    path = Path(path)
    raw = read_toml(path)
    missing = [k for k in REQUIRED if k not in raw]
    if missing:
        raise InputError("missing", path, missing[0])
    unknown = set(raw) - set(REQUIRED) - set(OPTIONAL)
    if unknown:
        raise InputError(f"unknown field(s) {sorted(unknown)}", path, sorted(unknown)[0])

    name, units, charge, mult = _parse_identity(raw, path)
    symbols, coords = _parse_atoms(raw["atoms"], path, units)
    n_electrons = sum(ATOMIC_NUMBER[s] for s in symbols) - charge
    _check_electrons(n_electrons, mult, path)
    tags = check_type(raw["tags"], list, path, "tags", "a list of strings")
    if not all(isinstance(t, str) for t in tags):
        raise InputError("expected a list of strings", path, "tags")
    geometry_source = check_type(raw["geometry_source"], str, path, "geometry_source", "a bib key")
    if geometry_source not in bib_keys:
        raise InputError(f"bib key {show(geometry_source)} is not in sources.bib", path, "geometry_source")

    active, frozen = _parse_space(raw, path, n_electrons, mult)
    scan = _parse_scan(raw["scan"], path, coords, units) if "scan" in raw else None
    threshold = None
    if "threshold_mha" in raw:
        threshold = check_number(raw["threshold_mha"], path, "threshold_mha")
        if threshold <= 0:
            raise InputError("must be positive", path, "threshold_mha")

    common = dict(
        title=check_type(raw["title"], str, path, "title", "a string"),
        units=units, charge=charge, multiplicity=mult, symbols=symbols,
        bases=_parse_basis(raw["basis"], path), tags=tuple(tags), geometry_source=geometry_source,
        path=path, frozen_core=frozen, active_space=active,
        published=_parse_published(raw.get("reference", []), path, bib_keys),
        notes=check_type(raw.get("notes", ""), str, path, "notes", "a string"),
        threshold_mha=threshold,
        dmrg=_parse_dmrg(raw["dmrg"], path) if "dmrg" in raw else None,
    )
    if scan is None:
        _check_distances(symbols, coords, units, path, "atoms")
        return [Case(name=name, coords=_as_tuple(coords), **common)]

    return _scan_points(name, coords, scan, common, path)


def _scan_points(name: str, coords: np.ndarray, scan: Scan, common: dict, path: Path) -> list[Case]:
    """One case per scan length, each point's coordinates finite, in bounds and well spaced."""
    units, points = common["units"], []
    for length in scan.lengths:
        xyz = scan_geometry(coords, scan, length)
        where = f"scan.lengths ({format_length(length)})"
        if not np.all(np.isfinite(xyz)) or np.abs(xyz).max() > max_coordinate(units):
            raise InputError(f"the scan puts an atom outside |coordinate| <= {max_coordinate(units):g} "
                             f"{units}", path, where)
        _check_distances(common["symbols"], xyz, units, path, where)
        points.append(Case(name=f"{name}@{format_length(length)}", coords=_as_tuple(xyz), scan=scan,
                           scan_parent=name, scan_length=float(length), **common))
    return points


def _as_tuple(xyz: np.ndarray) -> tuple[tuple[float, float, float], ...]:
    return tuple(tuple(float(c) for c in row) for row in xyz)


def _check_distances(symbols, coords, units: str, path: Path, fname: str) -> None:
    """No two atoms closer than ``MIN_ATOM_DISTANCE_ANGSTROM``, none farther than
    ``MAX_NEIGHBOUR_DISTANCE_ANGSTROM`` from its nearest neighbour (a k-d tree: O(n) memory)."""
    if len(symbols) < 2:
        return
    xyz_a = coords if units == "angstrom" else coords * BOHR_ANGSTROM
    dist, other = neighbour_distances_angstrom(xyz_a)
    i = int(np.argmin(dist))
    if dist[i] < MIN_ATOM_DISTANCE_ANGSTROM:
        a, b = sorted((i, int(other[i])))
        raise InputError(f"atoms {a} ({symbols[a]}) and {b} ({symbols[b]}) are {dist[i]:.3f} angstrom apart "
                         f"(minimum {MIN_ATOM_DISTANCE_ANGSTROM})", path, fname)
    i = int(np.argmax(dist))
    if dist[i] > bounds.MAX_NEIGHBOUR_DISTANCE_ANGSTROM:
        raise InputError(f"atom {i} ({symbols[i]}) is {dist[i]:.3f} angstrom from its nearest neighbour "
                         f"(at most {bounds.MAX_NEIGHBOUR_DISTANCE_ANGSTROM}: an isolated fragment)",
                         path, fname)
