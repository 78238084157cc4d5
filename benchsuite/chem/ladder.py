"""The classical reference ladder: HF, MP2, CCSD, CCSD(T), FCI or CASCI, DMRG.

Every rung is computed in the case's orbital space (:mod:`benchsuite.chem.space`):
MP2 and CC with PySCF's ``frozen=`` list holding exactly the orbitals outside
it, FCI/CASCI on the same active-space integrals the qubit Hamiltonian is
built from.  Energies are totals in hartree (nuclear repulsion and frozen-core
energy included); ``correlation_ha`` is relative to the HF rung.

Open shells: ROHF orbitals; CCSD and CCSD(T) are spin-unrestricted on the ROHF
determinant in semicanonical orbitals (occupied-occupied and virtual-virtual
blocks of each spin's Fock matrix diagonalised inside the space), the usual
ROHF-based CCSD(T) (Watts, Gauss & Bartlett, J. Chem. Phys. 98, 8718, 1993).
MP2 is closed-shell only.

The primary rung is FCI (no active space) or CASCI (active space).  Its root's
<S^2> must equal S(S+1) for the case's multiplicity within 1e-6; a root of
the wrong spin is rejected and the lowest root of the right spin is found with
a spin penalty.  The primary rung also records ``sector_lowest_ha``, the
lowest root of its (N, S_z) sector whatever its spin (equal to the energy when
that root has the declared spin), so that the gate can tell a state of another
spin (``wrong-state``) from an impossible energy (``below-exact``).  Beyond ``max_determinants`` the primary rung is skipped with
the reason recorded, not attempted.

DMRG (:mod:`benchsuite.chem.dmrg`, optional ``block2``) runs on the same active-space integrals
when FCI/CASCI is skipped (``dmrg="auto"``), always (``"always"``) or never (``"never"``).  Its
rung's ``energy_ha`` is the extrapolation to zero discarded weight, ``uncertainty_ha`` the
extrapolation's uncertainty u and ``variational_ha`` the lowest variational energy of its sweeps;
``details`` holds bond dimensions, discarded weights, sweep energies and the fit.

The primary reference is chosen by availability (:attr:`Ladder.primary`): FCI/CASCI when it ran,
else an ``ok`` DMRG rung, else the (skipped or failed) FCI/CASCI rung.
"""

from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field

import numpy as np

from benchsuite.chem import dmrg as dmrg_module
from benchsuite.chem.cache import DiskCache
from benchsuite.chem.integrals import MOIntegrals
from benchsuite.chem.scf import ScfSummary, run_scf
from benchsuite.chem.space import (OrbitalSpace, Prepared, case_integrals, prepare, restricted_kind,
                                   solve_scf)
from benchsuite.registry.case import Basis, Case, PublishedValue

DEFAULT_MAX_DETERMINANTS = 5_000_000
#: Part of every ladder's cache key; raise it when a rung's meaning or fields change
#: (2: the primary rung records ``sector_lowest_ha``; 4: rungs carry ``uncertainty_ha``,
#: ``variational_ha`` and ``details``, and a DMRG rung may be the primary).
LADDER_VERSION = 4
S2_TOLERANCE = 1e-6
EXACT_METHODS = ("fci", "casci")
PRIMARY_METHODS = (*EXACT_METHODS, "dmrg")
DMRG_MODES = ("auto", "always", "never")


@dataclass
class Rung:
    """One rung.  ``status``: ok, skipped (too large, or not applicable), failed, not-converged.

    ``sector_lowest_ha`` (FCI/CASCI rung only): the lowest energy of the (N, S_z) sector over
    every spin, <= ``energy_ha``.  ``uncertainty_ha`` (DMRG): the reference's own uncertainty u
    (0 or None for an exact rung); ``variational_ha`` (DMRG): its lowest variational energy;
    ``details``: the rung's record (DMRG schedule, discarded weights, fit).
    """

    method: str
    energy_ha: float | None
    correlation_ha: float | None
    space: str
    seconds: float
    status: str = "ok"
    note: str = ""
    s2: float | None = None
    n_determinants: int | None = None
    sector_lowest_ha: float | None = None
    uncertainty_ha: float | None = None
    variational_ha: float | None = None
    details: dict | None = None


@dataclass
class Ladder:
    """All references for one (case, basis)."""

    case: str
    basis: str
    space: OrbitalSpace
    scf: ScfSummary
    rungs: list[Rung]
    published: list[PublishedValue]
    multiplicity: int
    n_electrons_total: int
    cache_status: str = "off"
    flags: list[str] = field(default_factory=list)

    @property
    def primary(self) -> Rung | None:
        """FCI/CASCI when it ran, else an ``ok`` DMRG rung, else the FCI/CASCI rung (skipped or
        failed), else None."""
        exact = next((r for r in self.rungs if r.method in EXACT_METHODS), None)
        if exact is not None and exact.status == "ok":
            return exact
        dmrg = self.rung("dmrg")
        return dmrg if dmrg is not None and dmrg.status == "ok" else exact

    def rung(self, method: str) -> Rung | None:
        return next((r for r in self.rungs if r.method == method), None)

    def to_json(self) -> dict:
        """The ``references --format json`` document."""
        s = self.space
        return {
            "case": self.case, "basis": self.basis,
            "n_electrons": s.n_electrons, "n_orbitals": s.n_orbitals,
            "n_electrons_total": self.n_electrons_total, "n_orbitals_total": s.n_orbitals_total,
            "n_frozen_core": s.n_core, "multiplicity": self.multiplicity, "space": s.to_dict(),
            "scf": {"method": self.scf.method, "converged": self.scf.converged, "stable": self.scf.stable,
                    **{k: v for k, v in self.scf.to_dict().items() if k not in ("method", "converged", "stable")}},
            "ladder": [asdict(r) for r in self.rungs],
            "primary": None if self.primary is None else self.primary.method,
            "published": [asdict(p) for p in self.published],
            "flags": self.flags, "cache": self.cache_status,
        }

    @classmethod
    def from_meta(cls, meta: dict, case: Case, basis: Basis, space: OrbitalSpace, status: str) -> "Ladder":
        return cls(case=case.name, basis=basis.label, space=space, scf=ScfSummary.from_dict(meta["scf"]),
                   rungs=[Rung(**r) for r in meta["rungs"]], published=list(case.published_for(basis.label)),
                   multiplicity=case.multiplicity, n_electrons_total=case.n_electrons,
                   cache_status=status, flags=list(meta["flags"]))


# -- rung kernels ---------------------------------------------------------------

def exact_in_space(ints: MOIntegrals, multiplicity: int, label: str, method: str = "fci",
                   max_determinants: int = DEFAULT_MAX_DETERMINANTS) -> Rung:
    """Lowest root of the right spin by PySCF's determinant FCI on the active-space integrals."""
    from pyscf import fci

    t0 = time.perf_counter()
    norb, nelec = ints.n_orbitals, (ints.n_alpha, ints.n_beta)
    ndet = int(fci.cistring.num_strings(norb, nelec[0]) * fci.cistring.num_strings(norb, nelec[1]))
    if ndet > max_determinants:
        return Rung(method, None, None, label, 0.0, "skipped",
                    f"{ndet:,} determinants exceed the limit of {max_determinants:,}", n_determinants=ndet)
    target = 0.25 * (multiplicity - 1) * (multiplicity + 1)   # S(S+1), S = (mult-1)/2

    def solve(nroots: int, penalty: bool):
        base = fci.direct_spin1.FCI()
        solver = fci.addons.fix_spin_(base, shift=0.5, ss=target) if penalty else base
        solver.conv_tol, solver.max_cycle, solver.verbose, solver.nroots = 1e-12, 300, 0, nroots
        es, cis = solver.kernel(ints.h1_ha, ints.eri_ha, norb, nelec, ecore=ints.constant_ha)
        es, cis = (list(es), list(cis)) if nroots > 1 else ([es], [cis])
        return [(float(e), float(fci.spin_op.spin_square(c, norb, nelec)[0])) for e, c in zip(es, cis)]

    roots = solve(1, False)
    e, s2 = roots[0]
    sector_lowest = e
    note = ""
    if abs(s2 - target) > S2_TOLERANCE:
        # The lowest root of this M_S has another spin: look among the lowest few roots, then
        # with a spin penalty, and keep the lowest root whose <S^2> is right.
        note = f"lowest root had <S^2> = {s2:.6f}, rejected"
        candidates = solve(min(8, ndet), False) + solve(min(3, ndet), True)
        sector_lowest = min([sector_lowest] + [c[0] for c in candidates])
        right = [r for r in candidates if abs(r[1] - target) <= S2_TOLERANCE]
        if right:
            e, s2 = min(right)
            note += f"; lowest root with <S^2> = {s2:.6f} kept"
    status = "ok" if abs(s2 - target) <= S2_TOLERANCE else "failed"
    if status == "failed":
        note += f"; no root with <S^2> = {target} found, energy withheld"
        e = None
    return Rung(method, e, None, label, time.perf_counter() - t0, status, note,
                s2=s2, n_determinants=ndet, sector_lowest_ha=sector_lowest)


def dmrg_integrals(prep: Prepared, settings: dmrg_module.DmrgSettings) -> MOIntegrals:
    """The active-space integrals in the orbitals the schedule asks for (canonical or split-localised)."""
    if settings.orbitals == "split-localised":
        return dmrg_module.split_localised(prep.integrals, prep.mol, prep.mf.mo_coeff)
    return prep.integrals


def dmrg_rung(prep: Prepared, label: str, settings: dmrg_module.DmrgSettings) -> Rung:
    """The DMRG rung (:mod:`benchsuite.chem.dmrg`) on a solved ``prep``: extrapolated energy with its
    uncertainty; ``skipped`` without block2, ``failed`` (no energy) when block2 raises or the state's
    <S^2> or <N> is off."""
    ints, multiplicity = prep.integrals, prep.case.multiplicity
    if dmrg_module.block2_version() is None:
        return Rung("dmrg", None, None, label, 0.0, "skipped", dmrg_module.INSTALL_HINT)
    if ints.n_orbitals > dmrg_module.MAX_ORBITALS:
        return Rung("dmrg", None, None, label, 0.0, "skipped",
                    f"{ints.n_orbitals} active orbitals exceed the DMRG rung's limit of {dmrg_module.MAX_ORBITALS}")
    t0 = time.perf_counter()
    try:
        rec = dmrg_module.run_dmrg(dmrg_integrals(prep, settings), multiplicity, settings)
    except Exception as exc:  # a reference engine records a failed rung, never aborts the ladder
        return Rung("dmrg", None, None, label, time.perf_counter() - t0, "failed",
                    f"block2: {type(exc).__name__}: {exc}")
    details = {k: v for k, v in rec.items() if k not in ("energy_ha", "uncertainty_ha", "variational_ha", "s2")}
    problems = dmrg_module.state_problems(rec, multiplicity, ints.n_electrons)
    points = rec["points"]
    note = (f"{settings.orbitals} orbitals; M = {', '.join(str(p['bond_dim']) for p in points)}; extrapolated to zero discarded weight "
            f"over the last {rec['fit']['n_points']}; u = {rec['uncertainty_ha'] * 1000:.3g} mHa")
    if problems:
        return Rung("dmrg", None, None, label, rec["seconds"], "failed",
                    "DMRG state rejected: " + "; ".join(problems), s2=rec["s2"], details=details)
    return Rung("dmrg", rec["energy_ha"], None, label, rec["seconds"], "ok", note, s2=rec["s2"],
                uncertainty_ha=rec["uncertainty_ha"], variational_ha=rec["variational_ha"], details=details)


def _semicanonical_uhf(mf, space: OrbitalSpace):
    """The ROHF determinant as a UHF object in semicanonical orbitals inside the space."""
    from pyscf import scf

    umf = scf.addons.convert_to_uhf(mf)
    fock = umf.get_fock(dm=umf.make_rdm1())
    inside = range(space.n_core, space.n_core + space.n_orbitals)
    coeffs, energies = [], []
    for spin in (0, 1):
        c, occ = umf.mo_coeff[spin], umf.mo_occ[spin]
        f_mo = c.T @ fock[spin] @ c
        c_new, e_new = c.copy(), np.diag(f_mo).copy()
        for block in ([i for i in inside if occ[i] > 0], [i for i in inside if occ[i] == 0]):
            if block:
                w, v = np.linalg.eigh(f_mo[np.ix_(block, block)])
                c_new[:, block] = c[:, block] @ v
                e_new[block] = w
        coeffs.append(c_new)
        energies.append(e_new)
    umf.mo_coeff, umf.mo_energy = np.array(coeffs), np.array(energies)
    return umf


def _frozen(space: OrbitalSpace):
    return space.frozen_indices or None


def mp2_rung(mf, space: OrbitalSpace, e_hf: float) -> Rung:
    from pyscf import mp

    t0 = time.perf_counter()
    if space.n_alpha != space.n_beta:
        return Rung("mp2", None, None, space.label, 0.0, "skipped", "MP2 rung is for closed shells only")
    e_corr = float(mp.MP2(mf, frozen=_frozen(space)).kernel()[0])
    return Rung("mp2", e_hf + e_corr, e_corr, space.label, time.perf_counter() - t0)


def cc_rungs(mf, space: OrbitalSpace, e_hf: float, tag: str = "") -> list[Rung]:
    """CCSD and CCSD(T) in the space; restricted for closed shells, else semicanonical UCC.

    ``tag="u"``: ``mf`` is a UHF solution; rungs are named uccsd/uccsd(t) and their
    correlation energies are relative to ``e_hf``, the UHF energy.
    """
    from pyscf import cc

    t0 = time.perf_counter()
    label = space.label + (", UHF orbitals" if tag else "")
    if tag == "u":                       # already a UHF object
        solver = cc.UCCSD(mf, frozen=_frozen(space))
    elif space.n_alpha != space.n_beta:  # ROHF determinant, semicanonical UCC
        solver = cc.UCCSD(_semicanonical_uhf(mf, space), frozen=_frozen(space))
    else:
        solver = cc.CCSD(mf, frozen=_frozen(space))
    solver.conv_tol, solver.conv_tol_normt, solver.max_cycle, solver.verbose = 1e-10, 1e-8, 100, 0
    try:
        e_corr, _, _ = solver.kernel()
    except Exception as exc:  # a reference engine records a failed rung, never aborts the ladder
        msg = f"{type(exc).__name__}: {exc}"
        return [Rung(f"{tag}ccsd", None, None, label, time.perf_counter() - t0, "failed", msg),
                Rung(f"{tag}ccsd(t)", None, None, label, 0.0, "failed", "CCSD failed")]
    t1 = time.perf_counter()
    status = "ok" if solver.converged else "not-converged"
    note = "" if solver.converged else f"CCSD amplitudes not converged in {solver.max_cycle} cycles"
    ccsd = Rung(f"{tag}ccsd", e_hf + float(e_corr), float(e_corr), label, t1 - t0, status, note)
    e_t = float(solver.ccsd_t())
    ccsd_t = Rung(f"{tag}ccsd(t)", e_hf + float(e_corr) + e_t, float(e_corr) + e_t, label,
                  time.perf_counter() - t1, status, note)
    return [ccsd, ccsd_t]


# -- the ladder -----------------------------------------------------------------

def _finite_or_failed(rung: Rung) -> Rung:
    """A rung whose energy came out NaN or infinite (MP2 with a zero orbital-energy gap, for one)
    is ``failed`` with no energy, never ``ok``."""
    values = (rung.energy_ha, rung.correlation_ha)
    if rung.status != "ok" or all(v is None or np.isfinite(v) for v in values):
        return rung
    note = "non-finite energy (a zero orbital-energy denominator?)" + (f"; {rung.note}" if rung.note else "")
    return Rung(rung.method, None, None, rung.space, rung.seconds, "failed", note, rung.s2,
                rung.n_determinants, rung.sector_lowest_ha, details=rung.details)


def _wants_dmrg(mode: str, exact_skipped: bool) -> bool:
    if mode not in DMRG_MODES:
        raise ValueError(f"unknown DMRG mode {mode!r}; one of {DMRG_MODES}")
    return mode == "always" or (mode == "auto" and exact_skipped)


def compute_ladder(prep: Prepared, max_determinants: int = DEFAULT_MAX_DETERMINANTS, dmrg: str = "auto",
                   dmrg_settings: dmrg_module.DmrgSettings | None = None) -> dict:
    """Run every rung (no cache); returns the JSON-ready metadata."""
    solve_scf(prep)
    space, scf_summary, ints = prep.space, prep.scf, prep.integrals
    e_hf = scf_summary.energy_ha
    hf = Rung("hf", e_hf, 0.0, space.label, scf_summary.seconds,
              "ok" if scf_summary.trustworthy else "not-converged", "; ".join(scf_summary.flags))
    rungs = [hf, mp2_rung(prep.mf, space, e_hf), *cc_rungs(prep.mf, space, e_hf)]
    primary = "casci" if space.kind == "active-space" else "fci"
    exact = exact_in_space(ints, prep.case.multiplicity, space.label, primary, max_determinants)
    if exact.energy_ha is not None:
        exact.correlation_ha = exact.energy_ha - e_hf
    rungs.append(exact)
    if _wants_dmrg(dmrg, exact.status == "skipped"):
        d = dmrg_rung(prep, space.label, dmrg_settings or dmrg_module.default_settings(prep.case.dmrg))
        if d.energy_ha is not None:
            d.correlation_ha = d.energy_ha - e_hf
        rungs.append(d)
    if prep.scf_kind == "uhf":
        umf, usum = run_scf(prep.mol, "uhf")
        uhf = Rung("uhf", usum.energy_ha, usum.energy_ha - e_hf, space.label + ", UHF orbitals",
                   usum.seconds, "ok" if usum.trustworthy else "not-converged",
                   f"<S^2> = {usum.s2:.4f}; correlation column relative to {scf_summary.method.upper()}")
        rungs += [uhf, *cc_rungs(umf, space, usum.energy_ha, tag="u")]
    rungs = [_finite_or_failed(r) for r in rungs]
    flags = list(scf_summary.flags)
    flags += [f"{r.method}: {r.note}" for r in rungs if r.status in ("failed", "not-converged") and r.note
              and r.method != "hf"]
    if exact.status == "skipped":
        flags.append(f"{primary} skipped: {exact.note}")
    flags += [f"dmrg skipped: {r.note}" for r in rungs if r.method == "dmrg" and r.status == "skipped"]
    return {"scf": scf_summary.to_dict(), "rungs": [asdict(r) for r in rungs], "flags": flags,
            "reference_energy_check_ha": ints.reference_energy_ha() - e_hf}


def reference_ladder(case: Case, basis: Basis | str | None = None, cache: DiskCache | None = None,
                     scf_kind: str | None = None,
                     max_determinants: int = DEFAULT_MAX_DETERMINANTS, prep: Prepared | None = None,
                     dmrg: str = "auto", dmrg_settings: dmrg_module.DmrgSettings | None = None) -> Ladder:
    """The ladder for one (case, basis), served from the cache when it can be.

    ``prep`` (from :func:`~benchsuite.chem.space.prepare`) lets a caller share one SCF between
    the ladder and :func:`~benchsuite.chem.space.case_integrals`.  ``dmrg``: when the DMRG rung
    runs (:data:`DMRG_MODES`); when it would, its schedule and the installed block2 version are
    part of the cache key (installing block2 later recomputes the ladder).
    """
    prep = prep or prepare(case, basis, scf_kind)
    cache = cache or DiskCache(None)
    fields = {**prep.fields, "max_determinants": int(max_determinants), "restricted": restricted_kind(prep),
              "ladder_version": LADDER_VERSION}
    if _wants_dmrg(dmrg, prep.space.n_determinants > max_determinants):
        settings = dmrg_settings or dmrg_module.default_settings(case.dmrg)
        fields["dmrg"] = {**settings.to_key(), "block2": dmrg_module.block2_version()}

    def compute():
        meta = compute_ladder(prep, max_determinants, dmrg, dmrg_settings)
        case_integrals(case, cache=cache, prep=prep)  # the same SCF serves later integral requests
        return meta, None

    meta, _, status = cache.get_or_compute("ladder", fields, compute)
    return Ladder.from_meta(meta, case, prep.basis, prep.space, status)
