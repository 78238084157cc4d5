"""The orbital space a case is solved in, and its integrals (cached).

Three kinds of space, all over the restricted SCF orbitals in energy order:

* ``all-electron``: every orbital active;
* ``frozen-core``: the lowest ``n_core`` orbitals doubly occupied and frozen
  (``frozen_core = true`` uses PySCF's chemical core, e.g. 1s on Li-Ne);
* ``active-space``: ``(electrons, orbitals)`` around the Fermi level; the core
  below is frozen and the virtuals above are dropped.

Every rung of the reference ladder and every method under test uses the same
space; its label is carried into every output.  :func:`check_room` (run by
:func:`resolve_space`, so by :func:`prepare` before any SCF) refuses a space
that leaves nothing to correlate.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from math import comb

import numpy as np

from benchsuite.chem.cache import DiskCache
from benchsuite.chem.integrals import MOIntegrals, build_mo_integrals
from benchsuite.chem.scf import ORBITALS_VERSION, ScfSummary, build_mole, default_scf_kind, run_scf
from benchsuite.errors import InputError
from benchsuite.registry.case import Basis, Case


@dataclass(frozen=True)
class OrbitalSpace:
    kind: str
    n_core: int
    n_orbitals: int
    n_alpha: int
    n_beta: int
    n_orbitals_total: int

    @property
    def n_electrons(self) -> int:
        return self.n_alpha + self.n_beta

    @property
    def n_dropped_virtuals(self) -> int:
        return self.n_orbitals_total - self.n_core - self.n_orbitals

    @property
    def frozen_indices(self) -> list[int]:
        """Orbitals outside the space (PySCF's ``frozen=`` list for MP2/CC)."""
        return list(range(self.n_core)) + list(range(self.n_core + self.n_orbitals, self.n_orbitals_total))

    @property
    def n_determinants(self) -> int:
        return comb(self.n_orbitals, self.n_alpha) * comb(self.n_orbitals, self.n_beta)

    @property
    def label(self) -> str:
        text = f"({self.n_electrons}e, {self.n_orbitals}o)"
        if self.kind == "all-electron":
            return f"all-electron {text}"
        if self.kind == "frozen-core":
            return f"frozen core {self.n_core} {text}"
        return f"CAS{text}, core {self.n_core}"

    def to_dict(self) -> dict:
        return {**asdict(self), "label": self.label}


def resolve_space(case: Case, mol) -> OrbitalSpace:
    """Orbital counts for this case in this basis; an impossible space is an input error."""
    from pyscf.data import elements

    nmo = int(mol.nao_nr())
    n_alpha, n_beta = (int(x) for x in mol.nelec)
    if case.active_space is not None:
        ne, no = case.active_space.electrons, case.active_space.orbitals
        n_core = (case.n_electrons - ne) // 2
        if n_core + no > nmo:
            raise InputError(f"{no} active orbitals above {n_core} core orbitals need {n_core + no} "
                             f"orbitals; the basis has {nmo}", case.path, "active_space.orbitals")
        kind = "active-space"
        n_orb = no
    else:
        n_core = int(elements.chemcore(mol)) if case.frozen_core is True else int(case.frozen_core or 0)
        kind = "frozen-core" if n_core else "all-electron"
        n_orb = nmo - n_core
    space = OrbitalSpace(kind=kind, n_core=n_core, n_orbitals=n_orb, n_alpha=n_alpha - n_core,
                         n_beta=n_beta - n_core, n_orbitals_total=nmo)
    label = mol.basis if isinstance(mol.basis, str) else ",".join(f"{k}:{v}" for k, v in mol.basis.items())
    check_room(case, space, label)
    return space


def check_room(case: Case, space: OrbitalSpace, basis_label: str = "") -> None:
    """The space must hold the electrons and leave something to correlate: at least one occupied
    and one empty orbital for the alpha electrons (n_alpha >= n_beta, so beta has room too).

    Without this a single-determinant space (H2 triplet or H2 with charge -2 in STO-3G, H2 with
    ``frozen_core = 1``, an active space of (2e, 1o)) crashes PySCF's stability analysis, MP2 or CCSD
    with a ZeroDivisionError or AssertionError.  Raises :class:`InputError` naming the field to change.
    """
    nmo, n_alpha_total = space.n_orbitals_total, space.n_core + space.n_alpha
    in_basis = f"basis {basis_label!r}" if basis_label else "the basis"
    if n_alpha_total > nmo:
        raise InputError(f"{case.n_electrons} electrons ({n_alpha_total} alpha) need {n_alpha_total} spatial "
                         f"orbitals; {in_basis} has {nmo} (charge {case.charge}, multiplicity "
                         f"{case.multiplicity})", case.path, _culprit(case, 0, nmo + 1))
    space_field = {"active-space": "active_space", "frozen-core": "frozen_core"}.get(space.kind)
    if space.n_beta < 0:
        raise InputError(f"{space.n_core} frozen orbitals need {2 * space.n_core} paired electrons; the "
                         f"molecule has {space.n_core + space.n_beta} beta electrons", case.path, space_field)
    if space.n_alpha == 0:
        raise InputError(f"the space {space.label} has no occupied orbital: nothing to correlate",
                         case.path, space_field)
    if space.n_alpha >= space.n_orbitals:
        field = ("active_space.orbitals" if space.kind == "active-space"
                 else _culprit(case, space.n_core, space.n_orbitals))
        raise InputError(f"the space {space.label} has no empty orbital for the {space.n_alpha} alpha "
                         f"electrons in {in_basis}: no excitation to correlate (use a larger basis or "
                         "space)", case.path, field)


def _culprit(case: Case, n_core: int, limit: int) -> str:
    """The field to change so that the alpha electrons (less ``n_core``) number fewer than ``limit``:
    the multiplicity if the lowest spin would do, the charge if the neutral molecule would, else the basis."""
    lowest_alpha = (case.n_electrons + 1) // 2 - n_core
    if case.spin and lowest_alpha < limit:
        return "multiplicity"
    neutral_alpha = (case.n_electrons + case.charge + 1) // 2 - n_core
    return "charge" if case.charge < 0 and neutral_alpha < limit else "basis"


def cache_fields(case: Case, basis: Basis, space: OrbitalSpace, scf_kind: str) -> dict:
    """Everything that determines SCF, integrals and references (the cache key)."""
    import pyscf

    spec = basis.spec if isinstance(basis.spec, str) else [list(p) for p in basis.spec]
    return {
        "symbols": list(case.symbols),
        "coords_bohr": np.round(case.coords_bohr(), 10).tolist(),
        "basis": spec, "charge": case.charge, "multiplicity": case.multiplicity,
        "frozen_core": space.n_core, "active_space": [space.n_electrons, space.n_orbitals],
        "space_kind": space.kind, "scf": scf_kind, "pyscf": pyscf.__version__, "orbitals": ORBITALS_VERSION,
    }


@dataclass
class Prepared:
    """A case made ready: molecule, orbital space, SCF and integrals."""

    case: Case
    basis: Basis
    mol: object
    space: OrbitalSpace
    scf_kind: str
    fields: dict
    mf: object = None
    scf: ScfSummary | None = None
    integrals: MOIntegrals | None = None
    cache_status: str = "off"


def prepare(case: Case, basis: Basis | str | None = None, scf_kind: str | None = None) -> Prepared:
    """Validate the case in this basis (no SCF yet): molecule, space, cache key."""
    basis = basis if isinstance(basis, Basis) else case.basis(basis)
    mol = build_mole(case, basis)
    space = resolve_space(case, mol)
    kind = scf_kind or default_scf_kind(case)
    return Prepared(case=case, basis=basis, mol=mol, space=space, scf_kind=kind,
                    fields=cache_fields(case, basis, space, kind))


def restricted_kind(prep: Prepared) -> str:
    """The integrals always use restricted orbitals (RHF/ROHF), even when UHF is requested."""
    return default_scf_kind(prep.case) if prep.scf_kind == "uhf" else prep.scf_kind


def solve_scf(prep: Prepared) -> Prepared:
    """Run the restricted SCF (once) and build the integrals in the case's space."""
    if prep.mf is None:
        prep.mf, prep.scf = run_scf(prep.mol, restricted_kind(prep))
        s = prep.space
        prep.integrals = build_mo_integrals(prep.mol, prep.mf.mo_coeff, prep.mf.mo_energy,
                                            s.n_core, s.n_orbitals)
    return prep


def case_integrals(case: Case, basis: Basis | str | None = None, cache: DiskCache | None = None,
                   prep: Prepared | None = None) -> tuple[MOIntegrals, ScfSummary, OrbitalSpace]:
    """MO integrals, SCF summary and orbital space of a case, through the cache."""
    prep = prep or prepare(case, basis)
    cache = cache or DiskCache(None)
    fields = {**prep.fields, "scf": restricted_kind(prep)}

    def compute():
        solve_scf(prep)
        return {"scf": prep.scf.to_dict()}, prep.integrals.arrays()

    meta, arrays, status = cache.get_or_compute("integrals", fields, compute)
    prep.cache_status = status
    ints = prep.integrals if prep.integrals is not None else MOIntegrals.from_arrays(arrays)
    return ints, ScfSummary.from_dict(meta["scf"]), prep.space
