"""Read and validate case files (TOML) into :class:`~benchsuite.registry.case.Case`.

Every problem is raised as :class:`~benchsuite.errors.InputError` naming the
file, the field and what is wrong.  Unknown fields are rejected, so a typo
such as ``multiplicty`` cannot silently fall back to a default.
"""

from __future__ import annotations

import math
import re
import tomllib
from pathlib import Path
from typing import Any

import numpy as np

from benchsuite.constants import BOHR_ANGSTROM
from benchsuite.errors import InputError
from benchsuite.registry.case import (
    MIN_ATOM_DISTANCE_ANGSTROM,
    ActiveSpace,
    Basis,
    Case,
    PublishedValue,
    Scan,
    closest_pair_angstrom,
    format_length,
    scan_geometry,
)
from benchsuite.registry.elements import ATOMIC_NUMBER, normalise_symbol

NAME_PATTERN = re.compile(r"^[a-z0-9]+(-[a-z0-9]+)*$")

REQUIRED = ("name", "title", "units", "charge", "multiplicity", "atoms", "basis", "tags",
            "geometry_source")
OPTIONAL = ("frozen_core", "active_space", "scan", "reference", "notes", "threshold_mha")
REFERENCE_FIELDS = {"method", "basis", "energy_ha", "source", "note", "from_memory"}


def read_toml(path: Path) -> dict[str, Any]:
    """Parse a TOML file; a syntax error is reported with its line and column."""
    try:
        with open(path, "rb") as fh:
            return tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"malformed TOML: {exc}", path) from None
    except OSError as exc:
        raise InputError(f"cannot read file: {exc.strerror}", path) from None


def check_type(value: Any, kinds: type | tuple[type, ...], path: Path, name: str, what: str) -> Any:
    # bool is an int in Python; a TOML `true` where a number belongs is a mistake.
    if isinstance(value, bool) and bool not in (kinds if isinstance(kinds, tuple) else (kinds,)):
        raise InputError(f"expected {what}, got {value!r}", path, name)
    if not isinstance(value, kinds):
        raise InputError(f"expected {what}, got {value!r}", path, name)
    return value


def check_number(value: Any, path: Path, name: str) -> float:
    val = float(check_type(value, (int, float), path, name, "a number"))
    if not math.isfinite(val):
        raise InputError(f"expected a finite number, got {value!r}", path, name)
    return val


def _parse_atoms(raw: Any, path: Path) -> tuple[tuple[str, ...], np.ndarray]:
    check_type(raw, list, path, "atoms", "a list of [symbol, x, y, z]")
    if not raw:
        raise InputError("at least one atom is required", path, "atoms")
    symbols, coords = [], []
    for k, atom in enumerate(raw):
        fname = f"atoms[{k}]"
        if not isinstance(atom, list) or len(atom) != 4 or not isinstance(atom[0], str):
            raise InputError(f"expected [symbol, x, y, z], got {atom!r}", path, fname)
        sym = normalise_symbol(atom[0])
        if sym is None:
            raise InputError(f"unknown element {atom[0]!r}", path, fname)
        symbols.append(sym)
        coords.append([check_number(c, path, fname) for c in atom[1:]])
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
            out.append(Basis(label=item.strip().lower(), spec=item.strip().lower()))
        elif isinstance(item, dict) and item:
            pairs = []
            for elem, name in item.items():
                sym = normalise_symbol(elem)
                if sym is None or not isinstance(name, str):
                    raise InputError(f"per-element basis needs element = \"name\", got {elem} = {name!r}",
                                     path, f"basis[{k}]")
                pairs.append((sym, name.strip().lower()))
            label = ",".join(f"{s}:{n}" for s, n in pairs)
            out.append(Basis(label=label, spec=tuple(pairs)))
        else:
            raise InputError(f"expected a basis name or per-element table, got {item!r}", path, f"basis[{k}]")
    labels = [b.label for b in out]
    if len(set(labels)) != len(labels):
        raise InputError(f"basis listed twice: {labels}", path, "basis")
    return tuple(out)


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
            raise InputError(f"bib key {source!r} is not in sources.bib", path, f"{fname}.source")
        out.append(PublishedValue(
            method=check_type(ref["method"], str, path, f"{fname}.method", "a string").lower(),
            basis=check_type(ref["basis"], str, path, f"{fname}.basis", "a string").lower(),
            energy_ha=check_number(ref["energy_ha"], path, f"{fname}.energy_ha"),
            source=source,
            note=check_type(ref.get("note", ""), str, path, f"{fname}.note", "a string"),
            from_memory=check_type(ref.get("from_memory", False), bool, path, f"{fname}.from_memory",
                                "true or false"),
        ))
    return tuple(out)


def _parse_scan(raw: Any, path: Path, n_atoms: int) -> Scan:
    check_type(raw, dict, path, "scan", "a table")
    unknown = set(raw) - {"bond", "lengths", "move"}
    if unknown:
        raise InputError(f"unknown field(s) {sorted(unknown)}", path, "scan")
    bond = raw.get("bond")
    if not (isinstance(bond, list) and len(bond) == 2 and all(isinstance(b, int) and not isinstance(b, bool)
                                                           for b in bond)):
        raise InputError(f"expected two atom indices [i, j], got {bond!r}", path, "scan.bond")
    move = raw.get("move", [])
    if not (isinstance(move, list) and all(isinstance(m, int) and not isinstance(m, bool) for m in move)):
        raise InputError(f"expected a list of atom indices, got {move!r}", path, "scan.move")
    for fname, idx in [("scan.bond", b) for b in bond] + [("scan.move", m) for m in move]:
        if not 0 <= idx < n_atoms:
            raise InputError(f"atom index {idx} out of range (0..{n_atoms - 1}, counted from 0)", path, fname)
    if bond[0] == bond[1]:
        raise InputError("the two atoms must differ", path, "scan.bond")
    if bond[0] in move:
        raise InputError(f"atom {bond[0]} is the fixed end of the bond and cannot move", path, "scan.move")
    lengths = raw.get("lengths")
    if not isinstance(lengths, list) or not lengths:
        raise InputError("expected a non-empty list of bond lengths", path, "scan.lengths")
    vals = tuple(check_number(v, path, "scan.lengths") for v in lengths)
    if any(v <= 0 for v in vals):
        raise InputError("bond lengths must be positive", path, "scan.lengths")
    if len({format_length(v) for v in vals}) != len(vals):
        raise InputError("a bond length is listed twice", path, "scan.lengths")
    return Scan(bond=(bond[0], bond[1]), lengths=vals, move=tuple(move))


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

    name = check_type(raw["name"], str, path, "name", "a string")
    if not NAME_PATTERN.match(name):
        raise InputError(f"{name!r} must be lowercase letters, digits and single hyphens", path, "name")
    units = check_type(raw["units"], str, path, "units", '"angstrom" or "bohr"').lower()
    if units not in ("angstrom", "bohr"):
        raise InputError(f'expected "angstrom" or "bohr", got {raw["units"]!r}', path, "units")
    charge = check_type(raw["charge"], int, path, "charge", "an integer")
    mult = check_type(raw["multiplicity"], int, path, "multiplicity", "an integer 2S+1")
    if mult < 1:
        raise InputError(f"must be at least 1 (2S+1), got {mult}", path, "multiplicity")
    symbols, coords = _parse_atoms(raw["atoms"], path)
    n_electrons = sum(ATOMIC_NUMBER[s] for s in symbols) - charge
    _check_electrons(n_electrons, mult, path)
    tags = check_type(raw["tags"], list, path, "tags", "a list of strings")
    if not all(isinstance(t, str) for t in tags):
        raise InputError("expected a list of strings", path, "tags")
    geometry_source = check_type(raw["geometry_source"], str, path, "geometry_source", "a bib key")
    if geometry_source not in bib_keys:
        raise InputError(f"bib key {geometry_source!r} is not in sources.bib", path, "geometry_source")

    active = frozen = None
    if "active_space" in raw:
        active = _parse_active(raw["active_space"], path, n_electrons, mult)
    if "frozen_core" in raw:
        frozen = _parse_frozen(raw["frozen_core"], path, n_electrons, mult)
    if active is not None and frozen is not None:
        raise InputError("give either frozen_core or active_space: an active space already "
                         "freezes every orbital below it", path, "frozen_core")
    scan = _parse_scan(raw["scan"], path, len(symbols)) if "scan" in raw else None
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
    )
    if scan is None:
        _check_distances(symbols, coords, units, path, "atoms")
        return [Case(name=name, coords=_as_tuple(coords), **common)]

    points = []
    for length in scan.lengths:
        xyz = scan_geometry(coords, scan, length)
        _check_distances(symbols, xyz, units, path, f"scan.lengths ({format_length(length)})")
        points.append(Case(name=f"{name}@{format_length(length)}", coords=_as_tuple(xyz), scan=scan,
                           scan_parent=name, scan_length=float(length), **common))
    return points


def _as_tuple(xyz: np.ndarray) -> tuple[tuple[float, float, float], ...]:
    return tuple(tuple(float(c) for c in row) for row in xyz)


def _check_distances(symbols, coords, units: str, path: Path, fname: str) -> None:
    xyz_a = coords if units == "angstrom" else coords * BOHR_ANGSTROM
    pair = closest_pair_angstrom(xyz_a)
    if pair and pair[0] < MIN_ATOM_DISTANCE_ANGSTROM:
        d, i, j = pair
        raise InputError(f"atoms {i} ({symbols[i]}) and {j} ({symbols[j]}) are {d:.3f} angstrom apart "
                         f"(minimum {MIN_ATOM_DISTANCE_ANGSTROM})", path, fname)
