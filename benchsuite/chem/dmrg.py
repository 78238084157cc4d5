"""The DMRG rung: spin-adapted density-matrix renormalisation group with ``block2``.

Optional: ``block2`` (GPL-3) is the ``benchsuite[dmrg]`` extra.  Without it the rung is
``skipped`` with the reason; nothing else in the package imports it.

The DMRG runs on exactly the active-space integrals the qubit Hamiltonian is built
from (:class:`~benchsuite.chem.integrals.MOIntegrals`: ``h1_ha``, ``eri_ha`` in chemists'
notation, ``constant_ha``), spin-adapted (block2's SU(2) mode, total spin
S = (multiplicity - 1) / 2 exactly), with the sites in block2's Fiedler order (a
permutation of the orbitals; the energy does not depend on it).  The orbitals are the SCF's
canonical ones or, when a case's ``[dmrg]`` table says ``orbitals = "split-localised"``,
:func:`split_localised` ones (a rotation within the occupied and the virtual blocks: the same
Hamiltonian, the same exact energy, a faster-converging MPS for chains).

The initial MPS is block2's random MPS biased to the SCF determinant's occupations, with a
fixed seed (:data:`RANDOM_SEED`); an unbiased random start was seen to stall in an excited
triplet of CH2 (0.39 Eh too high) depending on earlier runs in the process.

Schedule (:class:`DmrgSettings`, a case's ``[dmrg]`` table or the built-in one): for each bond dimension M of :attr:`DmrgSettings.bond_dims` in increasing
order, ``sweeps_per_dim`` two-site sweeps, the first ``noisy_sweeps`` of them with
perturbative noise and the rest without.  Each M contributes one point: the energy and
the largest discarded weight of its last (noise-free) sweep.

Extrapolation (common practice, e.g. Chan & Head-Gordon, J. Chem. Phys. 116, 4462,
2002; Olivares-Amaya et al., J. Chem. Phys. 142, 034102, 2015): a least-squares line
E(w) = E_0 + b w through the points of the last ``fit_points`` bond dimensions, w the
discarded weight; E_0 is the extrapolated energy (``energy_ha``).  Its uncertainty is

    u = max(|E_0 - E_var|, s(E_0))

with E_var the lowest variational energy of any sweep and s(E_0) the standard error of
the intercept (zero when the fit has no degree of freedom left).  When every
discarded weight is below :data:`EXACT_WEIGHT` the MPS is exact at these bond
dimensions: E_0 = E_var and u is the spread of the points' energies.

The DMRG state's <S^2> and <N> are measured with block2's operators and checked against
S(S+1) and the active electron count (tolerance :data:`STATE_TOLERANCE`); a state that
fails is a ``failed`` rung without an energy.
"""

from __future__ import annotations

import os
import shutil
import tempfile
import time
from dataclasses import asdict, dataclass, replace

import numpy as np

from benchsuite.chem.integrals import MOIntegrals
from benchsuite.registry.case import DmrgSchedule

#: More active orbitals than this and the rung is skipped before block2 is called: a sweep costs
#: ~ k^3 M^3 for k orbitals, so the default schedule past 40 orbitals is beyond a gate's time budget
#: (the 60-orbital N2/cc-pVTZ case is for the qubit Hamiltonian, not for a DMRG reference).
MAX_ORBITALS = 40

#: A <S^2> or <N> of the DMRG state this far from the declared value fails the rung.
STATE_TOLERANCE = 1e-5
#: Largest discarded weight that counts as "nothing discarded" (an exact MPS).
EXACT_WEIGHT = 1e-13
#: block2's random-number seed for the initial MPS (a run is reproducible).
RANDOM_SEED = 1234
INSTALL_HINT = "block2 is not installed (pip install 'benchsuite[dmrg]')"


@dataclass(frozen=True)
class DmrgSettings:
    """A DMRG schedule (part of the ladder's cache key); the defaults are
    :class:`~benchsuite.registry.case.DmrgSchedule`'s, a case's ``[dmrg]`` table overrides them.

    ``orbitals``: ``"canonical"`` or ``"split-localised"`` (:func:`split_localised`).
    ``n_threads``: block2's OpenMP threads (``$BENCHSUITE_DMRG_THREADS``, default 2).
    """

    bond_dims: tuple[int, ...] = DmrgSchedule.bond_dims
    sweeps_per_dim: int = DmrgSchedule.sweeps_per_dim
    noisy_sweeps: int = DmrgSchedule.noisy_sweeps
    noise: float = DmrgSchedule.noise
    davidson_tol: float = DmrgSchedule.davidson_tol
    fit_points: int = DmrgSchedule.fit_points
    orbitals: str = DmrgSchedule.orbitals
    n_threads: int = 2

    def to_key(self) -> dict:
        """The fields that determine the result (threads do not)."""
        d = asdict(self)
        d.pop("n_threads")
        d["bond_dims"] = list(d["bond_dims"])   # as JSON holds it (a cached record compares equal)
        return d


def default_settings(schedule: DmrgSchedule | None = None) -> DmrgSettings:
    """The built-in schedule, or a case's ``schedule``, with the thread count of the environment."""
    threads = max(1, int(os.environ.get("BENCHSUITE_DMRG_THREADS", "2") or 2))
    return DmrgSettings(**asdict(schedule or DmrgSchedule()), n_threads=threads)


def split_localised(ints: MOIntegrals, mol, mo_coeff: np.ndarray) -> MOIntegrals:
    """``ints`` in split-localised active orbitals: Foster-Boys localisation (PySCF ``lo.Boys``, atomic
    initial guess, deterministic) within the doubly occupied, singly occupied and virtual active blocks
    separately.  A rotation inside each block leaves the SCF determinant, its energy and the constant
    unchanged (common practice for DMRG on chains: local orbitals keep the entanglement between
    distant sites small).  ``mo_energy_ha`` keeps the canonical values (the blocks' order is kept)."""
    from pyscf import lo

    n, c0 = ints.n_orbitals, ints.n_core
    c_act = mo_coeff[:, c0:c0 + n]
    c_loc = c_act.copy()
    for lo_i, hi_i in ((0, ints.n_beta), (ints.n_beta, ints.n_alpha), (ints.n_alpha, n)):
        if hi_i - lo_i >= 2:
            boys = lo.Boys(mol, c_act[:, lo_i:hi_i])
            boys.verbose = 0
            c_loc[:, lo_i:hi_i] = boys.kernel()
    u = c_act.T @ mol.intor_symmetric("int1e_ovlp") @ c_loc
    h1 = u.T @ ints.h1_ha @ u
    eri = np.einsum("pqrs,pi,qj,rk,sl->ijkl", ints.eri_ha, u, u, u, u, optimize=True)
    return replace(ints, h1_ha=np.ascontiguousarray(h1), eri_ha=np.ascontiguousarray(eri))


def block2_version() -> str | None:
    """The installed block2's version, or None when it is not installed."""
    try:
        from importlib.metadata import version

        import pyblock2  # noqa: F401
        return version("block2")
    except Exception:
        return None


@dataclass(frozen=True)
class Extrapolation:
    """A linear fit E = E_0 + slope * w over (discarded weight, energy) points (Eh)."""

    energy_ha: float
    slope_ha: float
    stderr_ha: float
    n_points: int


def extrapolate(weights: list[float], energies: list[float]) -> Extrapolation:
    """Least-squares line through ``(weights, energies)``; its intercept at w = 0 and the
    intercept's standard error (zero for two points, where the line is exact)."""
    w, e = np.asarray(weights, float), np.asarray(energies, float)
    if len(w) < 2 or np.ptp(w) <= EXACT_WEIGHT:
        return Extrapolation(float(e.min()), 0.0, float(np.ptp(e)) if len(e) else 0.0, len(e))
    design = np.column_stack([np.ones_like(w), w])
    coef, *_ = np.linalg.lstsq(design, e, rcond=None)
    dof = len(w) - 2
    stderr = 0.0
    if dof > 0:
        resid = e - design @ coef
        cov = (resid @ resid / dof) * np.linalg.inv(design.T @ design)
        stderr = float(np.sqrt(max(cov[0, 0], 0.0)))
    return Extrapolation(float(coef[0]), float(coef[1]), stderr, len(w))


def uncertainty(extrap: Extrapolation, best_variational_ha: float) -> float:
    """u = max(|E_0 - E_var|, s(E_0)) (module docstring)."""
    return max(abs(extrap.energy_ha - best_variational_ha), extrap.stderr_ha)


def _per_bond_dim(schedule: list[int], bond_dims, weights, energies) -> list[dict]:
    """The last sweep of each bond dimension: ``{"bond_dim", "discarded_weight", "energy_ha"}``."""
    last: dict[int, dict] = {}
    for i, m in enumerate(schedule[:len(energies)]):
        last[m] = {"bond_dim": int(m), "discarded_weight": float(weights[i]),
                   "energy_ha": float(np.min(energies[i]))}
    return [last[m] for m in sorted(last)]


def _schedule(settings: DmrgSettings) -> tuple[list[int], list[float]]:
    bond_dims, noises = [], []
    for m in settings.bond_dims:
        bond_dims += [m] * settings.sweeps_per_dim
        noises += [settings.noise] * settings.noisy_sweeps + [0.0] * (settings.sweeps_per_dim
                                                                      - settings.noisy_sweeps)
    return bond_dims, noises


def _reordered(driver, ints: MOIntegrals) -> tuple[np.ndarray, np.ndarray, list[int]]:
    idx = [int(i) for i in driver.orbital_reordering(ints.h1_ha, ints.eri_ha)]
    h1 = ints.h1_ha[np.ix_(idx, idx)]
    g2 = ints.eri_ha[np.ix_(idx, idx, idx, idx)]
    return np.ascontiguousarray(h1), np.ascontiguousarray(g2), idx


def _reference_occupations(ints: MOIntegrals) -> np.ndarray:
    """Occupation of each active orbital in the SCF determinant (2, 1, 0; integrals convention)."""
    occ = np.zeros(ints.n_orbitals)
    occ[:ints.n_beta] = 2.0
    occ[ints.n_beta:ints.n_alpha] = 1.0
    return occ


def _state_check(driver, ket, n_orbitals: int) -> tuple[float, float]:
    """(<S^2>, <N>) of the normalised MPS."""
    norm = driver.expectation(ket, driver.get_identity_mpo(), ket)
    s2 = driver.expectation(ket, driver.get_spin_square_mpo(iprint=0), ket) / norm
    n_mpo = driver.get_qc_mpo(h1e=np.eye(n_orbitals), g2e=np.zeros((n_orbitals,) * 4), ecore=0.0, iprint=0)
    n = driver.expectation(ket, n_mpo, ket) / norm
    return float(s2), float(n)


def run_dmrg(ints: MOIntegrals, multiplicity: int, settings: DmrgSettings | None = None) -> dict:
    """One DMRG calculation on ``ints``; the raw record (energies in Eh, see module docstring).

    Keys: ``energy_ha`` (extrapolated), ``variational_ha``, ``uncertainty_ha``, ``points``
    (per bond dimension), ``sweep_energies_ha``, ``sweep_discarded_weights``,
    ``sweep_bond_dims``, ``n_sweeps``, ``fit``, ``s2``, ``n_electrons``, ``orbital_order``,
    ``seconds``, ``block2``.  Raises ImportError without block2.
    """
    from pyblock2.driver.core import DMRGDriver, SymmetryTypes

    settings = settings or default_settings()
    t0 = time.perf_counter()
    scratch = tempfile.mkdtemp(prefix="benchsuite-dmrg-")
    driver = None
    try:
        driver = DMRGDriver(scratch=scratch, symm_type=SymmetryTypes.SU2, n_threads=settings.n_threads,
                            stack_mem=2 << 30)
        n = ints.n_orbitals
        driver.initialize_system(n_sites=n, n_elec=ints.n_electrons, spin=multiplicity - 1)
        h1, g2, order = _reordered(driver, ints)
        mpo = driver.get_qc_mpo(h1e=h1, g2e=g2, ecore=ints.constant_ha, iprint=0)
        driver.bw.b.Random.rand_seed(RANDOM_SEED)
        ket = driver.get_random_mps(tag="GS", bond_dim=settings.bond_dims[0], nroots=1,
                                    occs=_reference_occupations(ints)[order])
        schedule, noises = _schedule(settings)
        driver.dmrg(mpo, ket, n_sweeps=len(schedule), bond_dims=schedule, noises=noises,
                    thrds=[settings.davidson_tol] * len(schedule), tol=0.0, iprint=0)
        dims, weights, energies = driver.get_dmrg_results()
        s2, n_elec = _state_check(driver, ket, n)
    finally:
        if driver is not None:
            driver.finalize()
        shutil.rmtree(scratch, ignore_errors=True)
    sweep_e = [float(np.min(e)) for e in energies]
    points = _per_bond_dim(schedule, dims, weights, energies)
    fit_pts = points[-settings.fit_points:]
    fit = extrapolate([p["discarded_weight"] for p in fit_pts], [p["energy_ha"] for p in fit_pts])
    best = min(sweep_e)
    return {"energy_ha": fit.energy_ha, "variational_ha": best, "uncertainty_ha": uncertainty(fit, best),
            "points": points, "sweep_energies_ha": sweep_e,
            "sweep_discarded_weights": [float(w) for w in weights],
            "sweep_bond_dims": [int(m) for m in schedule[:len(sweep_e)]], "n_sweeps": len(sweep_e),
            "fit": asdict(fit), "s2": s2, "n_electrons": n_elec, "orbital_order": order,
            "seconds": time.perf_counter() - t0, "block2": block2_version(), "schedule": settings.to_key(),
            "n_threads": settings.n_threads}


def state_problems(record: dict, multiplicity: int, n_electrons: int) -> list[str]:
    """What is wrong with the DMRG state's <S^2> and <N> (empty when both are right)."""
    target = 0.25 * (multiplicity - 1) * (multiplicity + 1)
    out = []
    if abs(record["s2"] - target) > STATE_TOLERANCE:
        out.append(f"<S^2> = {record['s2']:.6f}, expected {target:.6f}")
    if abs(record["n_electrons"] - n_electrons) > STATE_TOLERANCE:
        out.append(f"<N> = {record['n_electrons']:.6f}, expected {n_electrons}")
    return out
