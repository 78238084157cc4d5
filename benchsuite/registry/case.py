"""Validated molecule cases.

A case is one molecule at one geometry: atoms, charge, multiplicity, the basis
sets it is run in, an optional frozen core or active space, and published
reference energies with their sources.  A case file with a ``[scan]`` table
expands into one case per bond length, named ``name@<length>``.

Conventions
-----------
* Atom coordinates are stored in the file's ``units`` ("angstrom" or "bohr");
  :meth:`Case.coords_bohr` converts with the CODATA 2018 Bohr radius.
* Atom indices (``scan.bond``, ``scan.move``) count from 0 in file order.
* ``multiplicity`` is 2S + 1; ``n_electrons`` counts all electrons of the
  molecule (nuclear charges minus ``charge``).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from benchsuite.constants import ANGSTROM_BOHR, BOHR_ANGSTROM
from benchsuite.registry.bounds import MIN_ATOM_DISTANCE_ANGSTROM  # noqa: F401  (re-exported)
from benchsuite.registry.elements import ATOMIC_NUMBER


@dataclass(frozen=True)
class Basis:
    """A basis choice: one PySCF basis name, or a per-element table.

    ``label`` is how the basis is named on the command line and in outputs:
    the lower-case name (``"sto-3g"``) or, for a table, ``"H:6-31g,O:cc-pvdz"``
    in the table's order.
    """

    label: str
    spec: str | tuple[tuple[str, str], ...]

    def for_pyscf(self) -> str | dict[str, str]:
        """The value for ``pyscf.gto.Mole.basis``."""
        return self.spec if isinstance(self.spec, str) else dict(self.spec)


@dataclass(frozen=True)
class ActiveSpace:
    """A complete active space: ``electrons`` in ``orbitals`` spatial orbitals
    around the Fermi level of the SCF orbitals (doubly occupied core below)."""

    electrons: int
    orbitals: int


@dataclass(frozen=True)
class PublishedValue:
    """A published energy for this molecule (hartree) and its bib key."""

    method: str
    basis: str
    energy_ha: float
    source: str
    note: str = ""
    from_memory: bool = False


@dataclass(frozen=True)
class Scan:
    """Bond scan: atom ``bond[1]`` and the atoms in ``move`` are translated
    together along bond[0] -> bond[1] so that the bond has each length
    (in the file's units)."""

    bond: tuple[int, int]
    lengths: tuple[float, ...]
    move: tuple[int, ...] = ()


#: The orbitals a DMRG run may use (:class:`DmrgSchedule`).
DMRG_ORBITAL_CHOICES = ("canonical", "split-localised")


@dataclass(frozen=True)
class DmrgSchedule:
    """A case's DMRG schedule (the ``[dmrg]`` table); its defaults are the built-in schedule.

    ``bond_dims`` strictly increasing; for each, ``sweeps_per_dim`` two-site sweeps, the first
    ``noisy_sweeps`` with perturbative ``noise``; the line through the last ``fit_points`` bond
    dimensions gives the extrapolation.  ``orbitals``: ``"canonical"`` (the SCF orbitals) or
    ``"split-localised"`` (Foster-Boys localisation within the occupied, singly occupied and
    virtual active blocks separately, so the SCF determinant is unchanged).
    """

    bond_dims: tuple[int, ...] = (100, 200, 300, 400)
    sweeps_per_dim: int = 4
    noisy_sweeps: int = 2
    noise: float = 1e-5
    davidson_tol: float = 1e-9
    fit_points: int = 3
    orbitals: str = "canonical"


@dataclass(frozen=True)
class Case:
    """One molecule at one geometry, validated.

    ``frozen_core`` is ``None`` (all electrons correlated), ``True`` (PySCF's
    chemical core, resolved in :mod:`benchsuite.chem`), or a number of lowest
    spatial orbitals kept doubly occupied.
    """

    name: str
    title: str
    units: str
    charge: int
    multiplicity: int
    symbols: tuple[str, ...]
    coords: tuple[tuple[float, float, float], ...]
    bases: tuple[Basis, ...]
    tags: tuple[str, ...]
    geometry_source: str
    path: Path
    frozen_core: bool | int | None = None
    active_space: ActiveSpace | None = None
    published: tuple[PublishedValue, ...] = ()
    scan: Scan | None = None
    scan_parent: str | None = None
    scan_length: float | None = None
    notes: str = ""
    threshold_mha: float | None = None
    dmrg: DmrgSchedule | None = None

    @property
    def formula(self) -> str:
        """The molecular formula in Hill order: ``CH4``, ``H2O``, ``H3N`` (ammonia), ``FH``
        (hydrogen fluoride); see :func:`hill_formula`."""
        return hill_formula(self.symbols)

    @property
    def n_electrons(self) -> int:
        return sum(ATOMIC_NUMBER[s] for s in self.symbols) - self.charge

    @property
    def spin(self) -> int:
        """2S = n_alpha - n_beta (PySCF's ``spin``)."""
        return self.multiplicity - 1

    @property
    def n_alpha_beta(self) -> tuple[int, int]:
        n = self.n_electrons
        return (n + self.spin) // 2, (n - self.spin) // 2

    @property
    def is_open_shell(self) -> bool:
        return self.multiplicity > 1

    def coords_bohr(self) -> np.ndarray:
        xyz = np.asarray(self.coords, dtype=float)
        return xyz * ANGSTROM_BOHR if self.units == "angstrom" else xyz

    def coords_angstrom(self) -> np.ndarray:
        xyz = np.asarray(self.coords, dtype=float)
        return xyz if self.units == "angstrom" else xyz * BOHR_ANGSTROM

    @property
    def default_basis(self) -> Basis:
        return self.bases[0]

    def basis(self, label: str | None) -> Basis:
        """The case's basis with this label, or any PySCF basis name given."""
        if label is None:
            return self.default_basis
        for b in self.bases:
            if b.label.lower() == label.lower():
                return b
        return parse_basis_label(label)

    def published_for(self, basis_label: str) -> tuple[PublishedValue, ...]:
        return tuple(p for p in self.published if p.basis.lower() == basis_label.lower())


def parse_basis_label(label: str) -> Basis:
    """A basis from its label: ``"6-31g"`` or a per-element ``"Li:6-31g,H:sto-3g"``."""
    text = label.strip()
    if ":" not in text:
        return Basis(label=text.lower(), spec=text.lower())
    pairs = []
    for item in text.split(","):
        elem, _, name = item.partition(":")
        pairs.append((elem.strip().capitalize(), name.strip().lower()))
    return Basis(label=",".join(f"{e}:{n}" for e, n in pairs), spec=tuple(pairs))


def format_length(length: float) -> str:
    """How a scan length appears in a point's name: ``1.5`` -> ``"1.5"``."""
    return format(float(length), "g")


def scan_geometry(coords: np.ndarray, scan: Scan, length: float) -> np.ndarray:
    """Coordinates with bond ``scan.bond`` set to ``length`` (file units)."""
    i, j = scan.bond
    vec = coords[j] - coords[i]
    d0 = float(np.linalg.norm(vec))
    shift = (length - d0) * vec / d0
    out = coords.copy()
    for k in {j, *scan.move}:
        out[k] = out[k] + shift
    return out


def hill_formula(symbols) -> str:
    """Molecular formula in Hill order: with carbon, C first, then H, then the other elements
    alphabetically; without carbon, every element alphabetically (H included).  A count of one is
    not written.  (Hill, 1900, J. Am. Chem. Soc. 22, 478; the order of Chemical Abstracts.)"""
    counts: dict[str, int] = {}
    for s in symbols:
        counts[s] = counts.get(s, 0) + 1
    first = [e for e in ("C", "H") if e in counts] if "C" in counts else []
    order = first + sorted(e for e in counts if e not in first)
    return "".join(f"{e}{counts[e] if counts[e] > 1 else ''}" for e in order)


def neighbour_distances_angstrom(coords_angstrom: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each atom's nearest other atom: (distance in angstrom, index), from a k-d tree.

    O(n log n) time and O(n) memory (scipy's ``cKDTree``), so 10,000 atoms cost a few MB
    rather than the 2.4 GB of a dense distance matrix.  Needs at least two atoms.
    """
    from scipy.spatial import cKDTree

    dist, idx = cKDTree(coords_angstrom).query(coords_angstrom, k=2)
    own = np.arange(len(coords_angstrom))
    # with two atoms at the same place the tree may list the other one first
    other = np.where(idx[:, 1] == own, idx[:, 0], idx[:, 1])
    return dist[:, 1], other


def closest_pair_angstrom(coords_angstrom: np.ndarray) -> tuple[float, int, int] | None:
    """Smallest interatomic distance (angstrom) and the pair (lower index first), or None for one atom."""
    if len(coords_angstrom) < 2:
        return None
    dist, idx = neighbour_distances_angstrom(coords_angstrom)
    i = int(np.argmin(dist))
    j = int(idx[i])
    return float(dist[i]), min(i, j), max(i, j)
