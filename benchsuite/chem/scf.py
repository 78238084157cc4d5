"""Self-consistent field with convergence, stability and point-group symmetry recorded.

RHF for closed shells, ROHF for open shells (restricted orbitals, so the qubit
Hamiltonian and every rung share one orbital set); UHF on request.

Symmetry: the molecule is built with ``mol.symmetry = True``, so PySCF moves
it to its symmetry frame (origin and axes fixed by the point group) and
detects the point group; the restricted SCF then runs in PySCF's
symmetry-adapted form over the largest Abelian subgroup (``D2h`` and its
subgroups), and every orbital belongs to one irreducible representation.
UHF runs without symmetry constraints (same frame).

Stability: first the internal stability analysis within the symmetry
(a second-order rotation that lowers the energy means a saddle point), then
a check of every rotation, the symmetry-breaking ones included
(:func:`_hessian_search`).  An unstable or unconverged SCF is
restarted from the orbitals that follow the instability, up to
``max_retries`` times; whatever remains wrong is recorded in
:class:`ScfSummary.flags` and carried into every output.  If the lowest
solution found that way breaks the point group (its density couples
different irreducible representations, :func:`symmetry_breaking`), it is
kept, and flagged ``symmetry-broken``.  For RHF the external RHF -> UHF
stability is recorded too: it is expected to fail at stretched bonds and is
information, not a defect of the restricted reference.

Degenerate orbitals: after the SCF, orbitals of equal occupation, equal
irreducible representation and orbital energies within
:data:`DEGENERATE_HA` are rotated to a fixed form and every orbital's sign
is fixed (:func:`fix_degenerate_orbitals`), so the integrals, the Pauli sum
and its metrics do not depend on the initial guess or the atom order.
"""

from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field

import numpy as np

from benchsuite.errors import InputError
from benchsuite.registry.case import Basis, Case

SCF_KINDS = ("rhf", "rohf", "uhf")
#: SCF energy convergence (hartree); also the accuracy the qubit drop tolerance is tied to.
CONV_TOL_HA = 1e-10
#: Orbital energies closer than this (hartree) count as degenerate.
DEGENERATE_HA = 1e-6
#: A density element coupling two irreducible representations above this breaks the symmetry.
SYMMETRY_BREAKING_TOL = 1e-5
#: Lowest Hessian eigenvalue (hartree) below which an SCF solution is unstable (PySCF's own choice).
UNSTABLE_EIGENVALUE = -1e-5
#: Version of the orbital choice (symmetry adaptation, degenerate sets); part of every cache key.
ORBITALS_VERSION = "symmetry-adapted-1"
SYMMETRY_BROKEN = "symmetry-broken"
#: Orbital Hessians up to this many rotations are built densely in the stability search.
DENSE_HESSIAN_MAX = 120


@dataclass
class ScfSummary:
    """What the SCF did.  ``energy_ha`` is the total energy (nuclear repulsion included).

    ``point_group`` is PySCF's detected group of the nuclei, ``symmetry_group``
    the group PySCF labels orbitals in (its largest Abelian subgroup; for linear
    molecules Dooh/Coov with each E irrep split into x/y components, i.e. D2h/C2v
    in effect); ``symmetry_breaking`` is the largest density-matrix element between
    different irreducible representations of it (0 for a symmetric solution).
    """

    method: str
    energy_ha: float
    converged: bool
    stable: bool
    stable_external: bool | None
    attempts: int
    iterations: int
    s2: float
    seconds: float
    flags: list[str] = field(default_factory=list)
    point_group: str = "C1"
    symmetry_group: str = "C1"
    symmetry_broken: bool = False
    symmetry_breaking: float = 0.0

    @property
    def trustworthy(self) -> bool:
        return self.converged and self.stable

    def to_dict(self) -> dict:
        return asdict(self)

    @classmethod
    def from_dict(cls, d: dict) -> "ScfSummary":
        return cls(**d)


#: Molecules built in this process, by (atoms, coordinates, charge, spin, basis, verbosity): a
#: ``pyscf.gto.Mole`` is built once per (case geometry, basis) and shared read-only (callers copy to change).
_BUILT_MOLES: dict = {}
_BUILT_MOLES_LIMIT = 128


def build_mole(case: Case, basis: Basis, verbose: int = 0):
    """:func:`_build_mole`, memoised per process (see :data:`_BUILT_MOLES`)."""
    key = (tuple(case.symbols), tuple(tuple(map(float, xyz)) for xyz in case.coords_bohr()), case.charge,
           case.spin, repr(basis.for_pyscf()), verbose)
    mol = _BUILT_MOLES.get(key)
    if mol is None:
        mol = _build_mole(case, basis, verbose)
        if len(_BUILT_MOLES) >= _BUILT_MOLES_LIMIT:
            _BUILT_MOLES.pop(next(iter(_BUILT_MOLES)))
        _BUILT_MOLES[key] = mol
    return mol


def _build_mole(case: Case, basis: Basis, verbose: int = 0):
    """The PySCF molecule, in bohr, in PySCF's symmetry frame with its point group detected.

    A basis missing an element is an input error.
    """
    from pyscf import gto

    spec = basis.for_pyscf()
    for sym in dict.fromkeys(case.symbols):
        name = spec if isinstance(spec, str) else spec.get(sym)
        if name is None:
            raise InputError(f"per-element basis {basis.label!r} has no entry for {sym}", case.path, "basis")
        try:
            shells = gto.basis.load(name, sym)
        except Exception as exc:  # PySCF raises several types for unknown names
            raise InputError(f"basis {name!r} is unknown to PySCF or lacks {sym} ({exc})",
                             case.path, "basis") from None
        if not shells:
            raise InputError(f"basis {name!r} has no functions for {sym}", case.path, "basis")
    mol = gto.Mole()
    mol.atom = [(s, tuple(xyz)) for s, xyz in zip(case.symbols, case.coords_bohr())]
    mol.unit = "Bohr"
    mol.basis = spec
    mol.charge = case.charge
    mol.spin = case.spin
    mol.verbose = verbose
    mol.symmetry = True
    mol.build()
    return mol


def default_scf_kind(case: Case) -> str:
    return "rohf" if case.is_open_shell else "rhf"


def without_symmetry(mol):
    """The same molecule, frame and AO basis with point-group constraints off."""
    plain = mol.copy()
    plain.symmetry = False
    return plain


def _make(mol, kind: str):
    from pyscf import scf

    mf = {"rhf": scf.RHF, "rohf": scf.ROHF, "uhf": scf.UHF}[kind](mol)
    mf.conv_tol = CONV_TOL_HA
    mf.max_cycle = 200
    mf.verbose = 0
    return mf


def _restart(mf, mo: np.ndarray) -> None:
    mf.kernel(mf.make_rdm1(mo, mf.mo_occ))


def _stabilise(mf, check, budget: int) -> tuple[bool, int, int]:
    """Restart ``mf`` while unconverged or ``check(mf)`` finds an instability, at most
    ``budget`` times.  Returns ``(stable, restarts, cycles)``."""
    stable, mo = check(mf)
    restarts = cycles = 0
    while (not mf.converged or not stable) and restarts < budget:
        _restart(mf, mo if not stable else mf.mo_coeff)
        restarts += 1
        cycles += _cycles(mf)
        stable, mo = check(mf)
    return stable, restarts, cycles


def _solve(mol, kind: str, max_retries: int):
    """Symmetry-adapted SCF, then the unconstrained stability check (may break the symmetry).

    Returns ``(mf, stable, attempts, cycles)``.
    """
    symmetric = bool(mol.symmetry) and mol.groupname != "C1" and kind != "uhf"
    mf = _make(mol if symmetric else without_symmetry(mol), kind)
    mf.kernel()
    cycles = _cycles(mf)
    stable, restarts, more = _stabilise(mf, _internal_stable, max_retries)
    attempts, cycles = 1 + restarts, cycles + more
    if symmetric and stable and mf.converged:
        free = _unconstrained_copy(mf, kind)
        unstable, mo = _hessian_search(free, with_symmetry=False)
        if unstable:
            _restart(free, mo)
            stable, restarts, more = _stabilise(free, _full_stable, max(max_retries - attempts + 1, 1))
            mf, attempts, cycles = free, attempts + 1 + restarts, cycles + _cycles(free) + more
    return mf, stable, attempts, cycles


def _unconstrained_copy(mf, kind: str):
    """The converged solution ``mf`` as an SCF object without symmetry constraints."""
    free = _make(without_symmetry(mf.mol), kind)
    free.mo_coeff, free.mo_occ, free.mo_energy = mf.mo_coeff, mf.mo_occ, mf.mo_energy
    free.e_tot, free.converged = mf.e_tot, mf.converged
    return free


def run_scf(mol, kind: str, max_retries: int = 3):
    """Run and stabilise one SCF; degenerate orbitals fixed.  Returns ``(mf, ScfSummary)``."""
    if kind not in SCF_KINDS:
        raise InputError(f"unknown SCF kind {kind!r}; choose from {SCF_KINDS}", field="--scf")
    if kind == "rhf" and mol.spin != 0:
        raise InputError("RHF needs a closed shell; use ROHF or UHF", field="--scf")
    t0 = time.perf_counter()
    mf, stable, attempts, cycles = _solve(mol, kind, max_retries)
    external = _external_stable(mf) if kind == "rhf" else None
    breaking = symmetry_breaking(mol, mf.make_rdm1())
    fix_degenerate_orbitals(mol, mf)
    flags = []
    if not mf.converged:
        flags.append(f"{kind.upper()} not converged after {attempts} attempt(s)")
    if not stable:
        flags.append(f"{kind.upper()} internally unstable after {attempts} attempt(s)")
    broken = breaking > SYMMETRY_BREAKING_TOL
    if broken:
        flags.append(f"{SYMMETRY_BROKEN}: the {kind.upper()} solution breaks {mol.groupname} symmetry "
                     f"(density couples irreducible representations by up to {breaking:.1e}); "
                     f"orbitals are not symmetry-adapted")
    s2 = float(mf.spin_square()[0]) if kind != "rhf" else 0.0
    summary = ScfSummary(method=kind, energy_ha=float(mf.e_tot), converged=bool(mf.converged),
                         stable=bool(stable), stable_external=external, attempts=attempts,
                         iterations=cycles, s2=s2, seconds=time.perf_counter() - t0, flags=flags,
                         point_group=str(mol.topgroup), symmetry_group=str(mol.groupname),
                         symmetry_broken=broken, symmetry_breaking=float(breaking))
    return mf, summary


def _cycles(mf) -> int:
    return int(getattr(mf, "cycles", 0) or 0)


def _internal_stable(mf) -> tuple[bool, np.ndarray]:
    """Internal stability within the SCF's own constraints (symmetry, if adapted)."""
    if mf.mo_coeff.ndim == 3:  # UHF: PySCF's own analysis
        mo_i, _, stable_i, _ = mf.stability(internal=True, external=False, return_status=True)
        return bool(stable_i), mo_i
    unstable, mo = _hessian_search(mf, with_symmetry=bool(mf.mol.symmetry))
    return not unstable, mo


def _full_stable(mf) -> tuple[bool, np.ndarray]:
    unstable, mo = _hessian_search(mf, with_symmetry=False)
    return not unstable, mo


def _external_stable(mf) -> bool:
    """RHF -> UHF stability over every rotation (PySCF's analysis, symmetry constraints off)."""
    if mf.mol.symmetry:
        mf = _unconstrained_copy(mf, "rhf")
    _, _, _, stable_e = mf.stability(internal=False, external=True, return_status=True)
    return bool(stable_e)


def _hessian_search(mf, with_symmetry: bool) -> tuple[bool, np.ndarray]:
    """Lowest eigenvalue of the restricted orbital Hessian; ``with_symmetry=False`` includes
    the rotations between different irreducible representations.

    PySCF's ``stability`` starts its Davidson search from the gradient, which is exactly zero
    for rotations between different irreducible representations of a symmetry-adapted
    solution (and fails when every allowed element is zero, e.g. H2), so it never looks
    there.  Here the Hessian (PySCF's ``newton_ah`` products) is built densely up to
    DENSE_HESSIAN_MAX rotations, else searched by Davidson from the 16 rotations of lowest diagonal.
    Returns ``(unstable, orbitals rotated along the lowest mode)``.
    """
    from pyscf import lib
    from pyscf.scf import hf
    from pyscf.soscf import newton_ah

    gen = newton_ah.gen_g_hop_rohf if mf.mol.spin else newton_ah.gen_g_hop_rhf
    _, hop, hdiag = gen(mf, mf.mo_coeff, mf.mo_occ, with_symmetry=with_symmetry)
    allowed = np.flatnonzero(hdiag != 0) if with_symmetry else np.arange(hdiag.size)
    if allowed.size == 0:
        return False, mf.mo_coeff
    eye = np.eye(hdiag.size)
    if allowed.size <= DENSE_HESSIAN_MAX:
        cols = np.array([2 * hop(eye[k]).real for k in allowed]).T[allowed]
        w, u = np.linalg.eigh(0.5 * (cols + cols.T))
        e, v = w[0], np.zeros(hdiag.size)
        v[allowed] = u[:, 0]
    else:
        diag = 2 * hdiag
        starts = [eye[k] for k in allowed[np.argsort(diag[allowed], kind="stable")[:16]]]

        def precond(dx, e, _x0):
            shifted = diag - e
            shifted[np.abs(shifted) < 1e-8] = 1e-8
            return dx / shifted

        e, v = lib.davidson(lambda x: 2 * hop(x).real, starts, precond, tol=1e-6, nroots=1,
                            max_space=len(starts) + 24, verbose=0)
    if e >= UNSTABLE_EIGENVALUE:
        return False, mf.mo_coeff
    return True, mf.mo_coeff @ newton_ah.expmat(hf.unpack_uniq_var(v, mf.mo_occ))


def symmetry_breaking(mol, dm) -> float:
    """Largest |C_i^T D C_j| over pairs of different irreducible representations i != j.

    ``C_i`` are PySCF's symmetry-adapted AO combinations (``mol.symm_orb``) of the
    Abelian group the molecule was built in; ``D`` each spin density (AO basis).  A density
    invariant under the group is block diagonal in them (Schur), so any nonzero element
    means the solution breaks the symmetry.  0 for a C1 molecule.
    """
    if not mol.symmetry or mol.groupname == "C1":
        return 0.0
    dms = np.asarray(dm)
    dms = dms.reshape((-1,) + dms.shape[-2:])
    worst = 0.0
    for d in dms:
        for i, ci in enumerate(mol.symm_orb):
            for cj in mol.symm_orb[i + 1:]:
                worst = max(worst, float(np.max(np.abs(ci.T @ d @ cj), initial=0.0)))
    return worst


def _probe_operator(mol) -> np.ndarray:
    """A fixed one-electron operator with no symmetry (AO basis): a generic polynomial of
    degree 2 in (x, y, z) about the nuclear charge centre, in the molecule's frame."""
    charges = mol.atom_charges()
    centre = charges @ mol.atom_coords() / charges.sum()
    with mol.with_common_orig(centre):
        r = mol.intor_symmetric("int1e_r")
        rr = mol.intor_symmetric("int1e_rr")
    w_r = (0.113, 0.071, 0.037)
    w_rr = (1.0, 0.131, 0.053, 0.131, 0.577, 0.029, 0.053, 0.029, 0.311)
    return np.einsum("k,kij->ij", w_r, r) + np.einsum("k,kij->ij", w_rr, rr)


def _ao_order(mol) -> np.ndarray:
    """AOs sorted by (atom position, element, shell label): independent of the atom order."""
    coords = np.round(mol.atom_coords(), 6)
    keys = []
    for label in mol.ao_labels(fmt=False):
        atom, symbol, shell, comp = label
        keys.append((tuple(coords[atom]), symbol, shell, comp))
    return np.array(sorted(range(len(keys)), key=keys.__getitem__))


def _fix_signs(mo: np.ndarray, order: np.ndarray) -> np.ndarray:
    """Each orbital's sign: its largest AO coefficient (first in ``order`` among ties) positive."""
    c = mo[order]
    big = np.abs(c) >= np.abs(c).max(axis=0, keepdims=True) * (1 - 1e-6)
    lead = c[np.argmax(big, axis=0), np.arange(c.shape[1])]
    return mo * np.where(lead < 0, -1.0, 1.0)


def _degenerate_clusters(energy: np.ndarray, occ: np.ndarray) -> list[np.ndarray]:
    """Runs of consecutive orbitals with equal occupation and energy gaps below DEGENERATE_HA."""
    cut = np.flatnonzero((np.diff(energy) >= DEGENERATE_HA) | (np.diff(occ) != 0)) + 1
    return [run for run in np.split(np.arange(energy.size), cut) if run.size > 1]


def _canonical_set(mo, energy, occ, orbsym, probe, order):
    """One spin's orbitals with every degenerate cluster rotated and sorted (see fix_degenerate_orbitals)."""
    mo, energy = mo.copy(), energy.copy()
    orbsym = orbsym.copy()
    for run in _degenerate_clusters(energy, occ):
        values = np.empty(run.size)
        for irrep in np.unique(orbsym[run]):
            sub = run[orbsym[run] == irrep]
            w, u = np.linalg.eigh(mo[:, sub].T @ probe @ mo[:, sub])
            mo[:, sub] = mo[:, sub] @ u
            values[np.isin(run, sub)] = w
        perm = run[np.lexsort((values, orbsym[run]))]
        mo[:, run], energy[run], orbsym[run] = mo[:, perm], energy[perm], orbsym[perm]
    return _fix_signs(mo, order), energy, orbsym


def fix_degenerate_orbitals(mol, mf) -> None:
    """Rotate degenerate orbital sets of ``mf`` to a fixed form, in place.

    Within each run of orbitals of equal occupation whose energies differ by less
    than :data:`DEGENERATE_HA`, the orbitals of each irreducible representation are
    rotated to diagonalise a fixed, symmetry-less probe operator (a generic quadratic
    polynomial of the coordinates, :func:`_probe_operator`) and the run is sorted by
    (irreducible representation, probe eigenvalue); then each orbital's largest AO
    coefficient is made positive (ties: AO order by atom position, :func:`_ao_order`).
    The SCF energy and density are unchanged.
    """
    from pyscf import lib

    probe, order = _probe_operator(mol), _ao_order(mol)
    adapted = bool(getattr(mf.mol, "symmetry", False)) and mol.groupname != "C1"
    coeffs = mf.mo_coeff if mf.mo_coeff.ndim == 3 else [mf.mo_coeff]
    energies = mf.mo_energy if mf.mo_coeff.ndim == 3 else [mf.mo_energy]
    occs = mf.mo_occ if mf.mo_coeff.ndim == 3 else [mf.mo_occ]
    out_c, out_e = [], []
    for mo, energy, occ in zip(coeffs, energies, occs):
        orbsym = np.asarray(mf.get_orbsym(mo)) if adapted else np.zeros(mo.shape[1], dtype=int)
        c, e, sym = _canonical_set(np.asarray(mo), np.asarray(energy), np.asarray(occ), orbsym, probe, order)
        out_c.append(lib.tag_array(c, orbsym=sym) if adapted else c)
        out_e.append(e)
    if mf.mo_coeff.ndim == 3:
        mf.mo_coeff, mf.mo_energy = np.array(out_c), np.array(out_e)
    else:
        mf.mo_coeff, mf.mo_energy = out_c[0], out_e[0]
