"""The problem fingerprint: which exact problem an energy belongs to, in one string.

A fingerprint is seven SHA-256 digests, one per component of the problem, each
over the canonical JSON (sorted keys, no spaces) of that component's values:

==============  ==========================================================================
component       what is hashed
==============  ==========================================================================
geometry        element symbols and coordinates in bohr (file order), each coordinate
                written with 8 decimals (1e-8 bohr), ``-0`` written as ``0``
basis           the basis label and its specification (a name, or element -> name pairs)
charge          the total charge
multiplicity    2S + 1
space           orbital-space kind, frozen core, active orbitals, active alpha/beta
                electrons and the basis's orbital count
orbitals        the SCF solution: SCF kind, the orbital convention version
                (:data:`benchsuite.chem.scf.ORBITALS_VERSION`), every orbital energy
                rounded to 1e-6 Eh and the alpha and beta density matrices in the AO
                basis rounded to 1e-5 -- invariant under the sign (phase) of any orbital,
                different for a different SCF solution
encoding        encoding, spin-orbital ordering, dropped spin-parity qubits, tapering
==============  ==========================================================================

The **token** written into every export and expected in a results file is
``bsfp1.`` followed by the first :data:`PREFIX_HEX` hex digits of each component
digest in the order above, separated by dots; :func:`differing_components` names
the components in which a token differs from the registry's problem.  The
document form (:meth:`ProblemFingerprint.to_dict`) also holds the full digests,
``sha256`` (SHA-256 over the canonical JSON of all seven full digests) and the
readable values of every component but the density matrices.

Rounding makes the fingerprint reproducible for the same SCF solution (values
converged far below the rounding step); a value that sits within numerical noise
of a rounding boundary can still flip one digest, which shows as "orbitals
differ" and is resolved by exporting the problem again.  The orbital component
is cached beside the SCF results (:class:`~benchsuite.chem.cache.DiskCache`).
"""

from __future__ import annotations

import hashlib
import json
import re
from dataclasses import dataclass, field

import numpy as np

from benchsuite.chem.cache import DiskCache
from benchsuite.chem.scf import ORBITALS_VERSION
from benchsuite.chem.space import OrbitalSpace, Prepared, prepare, restricted_kind, solve_scf
from benchsuite.registry.case import Basis, Case

SCHEMA = "bsfp1"
COMPONENTS = ("geometry", "basis", "charge", "multiplicity", "space", "orbitals", "encoding")
GEOMETRY_DECIMALS = 8
ORBITAL_ENERGY_DECIMALS = 6
DENSITY_DECIMALS = 5
PREFIX_HEX = 10
_TOKEN = re.compile(rf"^{SCHEMA}(\.[0-9a-f]{{{PREFIX_HEX}}}){{{len(COMPONENTS)}}}$")
RULES = {
    "geometry": f"bohr, {GEOMETRY_DECIMALS} decimals", "orbital_energies": f"Eh, {ORBITAL_ENERGY_DECIMALS} decimals",
    "density": f"AO basis, alpha and beta, {DENSITY_DECIMALS} decimals",
    "digest": "SHA-256 of canonical JSON (sorted keys, separators ',' ':')",
    "token": f"{SCHEMA}. + first {PREFIX_HEX} hex digits of each component digest, in order {list(COMPONENTS)}",
}


def digest(obj) -> str:
    """SHA-256 hex of the canonical JSON of ``obj`` (sorted keys, no spaces)."""
    return hashlib.sha256(json.dumps(obj, sort_keys=True, separators=(",", ":")).encode()).hexdigest()


def rounded(values, decimals: int) -> list[str]:
    """Numbers as fixed-decimal strings (no float repr in the hash; ``-0`` becomes ``0``)."""
    return [f"{round(float(v), decimals) + 0.0:.{decimals}f}" for v in np.ravel(values)]


def orbital_signature(mol, mo_coeff: np.ndarray, mo_energy: np.ndarray, mo_occ: np.ndarray, scf_kind: str) -> dict:
    """The phase-invariant signature of a restricted SCF solution (see the module docstring).

    ``mo_occ`` are PySCF's restricted occupations (2, 1 or 0): an orbital with occupation >= 1
    holds an alpha electron, one with 2 a beta electron too.  Densities are C_occ C_occ^T per spin.
    """
    c = np.asarray(mo_coeff)
    occ = np.asarray(mo_occ)
    d_alpha = c[:, occ >= 1] @ c[:, occ >= 1].T
    d_beta = c[:, occ >= 2] @ c[:, occ >= 2].T
    return {"scf": scf_kind, "orbitals_version": ORBITALS_VERSION, "n_ao": int(mol.nao_nr()),
            "mo_energy_ha": rounded(mo_energy, ORBITAL_ENERGY_DECIMALS),
            "density_alpha": rounded(d_alpha, DENSITY_DECIMALS), "density_beta": rounded(d_beta, DENSITY_DECIMALS)}


def orbital_component(prep: Prepared, cache: DiskCache | None = None) -> dict:
    """``{"sha256", "summary"}`` of the case's SCF solution, through the cache (SCF run on a miss)."""
    kind = restricted_kind(prep)
    fields = {**prep.fields, "scf": kind, "fingerprint": SCHEMA}

    def compute():
        solve_scf(prep)
        mf = prep.mf
        sig = orbital_signature(prep.mol, mf.mo_coeff, mf.mo_energy, mf.mo_occ, kind)
        summary = {k: sig[k] for k in ("scf", "orbitals_version", "n_ao", "mo_energy_ha")}
        return {"sha256": digest(sig), "summary": {**summary, "scf_energy_ha": float(mf.e_tot)}}, None

    meta, _, _ = (cache or DiskCache(None)).get_or_compute("fingerprint-orbitals", fields, compute)
    return meta


def component_values(case: Case, basis: Basis, space: OrbitalSpace, encoding) -> dict:
    """The readable values of every component except the orbitals (see the module docstring)."""
    coords = [rounded(xyz, GEOMETRY_DECIMALS) for xyz in case.coords_bohr()]
    spec = basis.spec if isinstance(basis.spec, str) else [list(p) for p in basis.spec]
    return {
        "geometry": {"symbols": list(case.symbols), "coords_bohr": coords},
        "basis": {"label": basis.label, "spec": spec},
        "charge": {"charge": int(case.charge)},
        "multiplicity": {"multiplicity": int(case.multiplicity)},
        "space": {"kind": space.kind, "n_core": space.n_core, "n_orbitals": space.n_orbitals,
                  "n_alpha": space.n_alpha, "n_beta": space.n_beta, "n_orbitals_total": space.n_orbitals_total},
        "encoding": {"name": encoding.name, "ordering": encoding.ordering, "taper": bool(encoding.taper),
                     "drop_spin_parity_qubits": bool(encoding.drop_spin_parity_qubits)},
    }


@dataclass(frozen=True)
class ProblemFingerprint:
    """A problem's fingerprint: ``digests`` (component -> full SHA-256 hex) and ``values``
    (component -> readable values; for ``orbitals`` a summary without the density matrices)."""

    digests: dict
    values: dict = field(compare=False)

    @property
    def token(self) -> str:
        return ".".join([SCHEMA] + [self.digests[c][:PREFIX_HEX] for c in COMPONENTS])

    @property
    def sha256(self) -> str:
        return digest({"schema": SCHEMA, "components": self.digests})

    def to_dict(self) -> dict:
        return {"schema": SCHEMA, "token": self.token, "sha256": self.sha256, "rules": RULES,
                "components": {c: {"sha256": self.digests[c], "value": self.values[c]} for c in COMPONENTS}}


def fingerprint_from_parts(values: dict, orbitals: dict) -> ProblemFingerprint:
    """The fingerprint of :func:`component_values` plus an orbital component ``{"sha256", "summary"}``."""
    digests = {c: digest(values[c]) for c in COMPONENTS if c != "orbitals"}
    digests["orbitals"] = orbitals["sha256"]
    return ProblemFingerprint(digests, {**values, "orbitals": orbitals["summary"]})


def problem_fingerprint(case: Case, basis: Basis | str | None, encoding, cache: DiskCache | None = None,
                        prep: Prepared | None = None) -> ProblemFingerprint:
    """The fingerprint of the problem the gate builds for (case, basis, encoding)."""
    prep = prep or prepare(case, basis)
    values = component_values(case, prep.basis, prep.space, encoding)
    return fingerprint_from_parts(values, orbital_component(prep, cache))


def differing_components(given: str, expected: ProblemFingerprint) -> list[str]:
    """The components in which the token (or full ``sha256``) ``given`` differs from ``expected``.

    A full SHA-256 that differs cannot say which component differs: ``["sha256"]``.  A string
    that is neither form raises ``ValueError``.
    """
    text = str(given).strip().lower()
    if re.fullmatch(r"[0-9a-f]{64}", text):
        return [] if text == expected.sha256 else ["sha256"]
    if not _TOKEN.match(text):
        raise ValueError(f"{given!r} is not a benchsuite fingerprint ({SCHEMA}. followed by "
                         f"{len(COMPONENTS)} groups of {PREFIX_HEX} hex digits, or a 64-digit SHA-256)")
    parts = text.split(".")[1:]
    return [c for c, p in zip(COMPONENTS, parts) if expected.digests[c][:PREFIX_HEX] != p]
