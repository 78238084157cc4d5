"""Self-consistent field with convergence and stability recorded.

RHF for closed shells, ROHF for open shells (restricted orbitals, so the qubit
Hamiltonian and every rung share one orbital set); UHF on request.

Stability: PySCF's internal stability analysis (a second-order rotation
within the same SCF class that lowers the energy means a saddle point).  An
unstable or unconverged SCF is restarted from the orbitals that follow the
instability, up to ``max_retries`` times; whatever remains wrong is recorded
in :class:`ScfSummary.flags` and carried into every output.  For RHF the
external RHF -> UHF stability is recorded too: it is expected to fail at
stretched bonds and is information, not a defect of the restricted reference.
"""

from __future__ import annotations

import time
from dataclasses import asdict, dataclass, field

import numpy as np

from benchsuite.errors import InputError
from benchsuite.registry.case import Basis, Case

SCF_KINDS = ("rhf", "rohf", "uhf")
CONV_TOL_HA = 1e-10


@dataclass
class ScfSummary:
    """What the SCF did.  ``energy_ha`` is the total energy (nuclear repulsion included)."""

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

    @property
    def trustworthy(self) -> bool:
        return self.converged and self.stable

    def to_dict(self) -> dict:
        return asdict(self)

    @classmethod
    def from_dict(cls, d: dict) -> "ScfSummary":
        return cls(**d)


def build_mole(case: Case, basis: Basis, verbose: int = 0):
    """The PySCF molecule, in bohr.  A basis missing an element is an input error."""
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
    mol.symmetry = False
    mol.build()
    return mol


def default_scf_kind(case: Case) -> str:
    return "rohf" if case.is_open_shell else "rhf"


def _make(mol, kind: str):
    from pyscf import scf

    mf = {"rhf": scf.RHF, "rohf": scf.ROHF, "uhf": scf.UHF}[kind](mol)
    mf.conv_tol = CONV_TOL_HA
    mf.max_cycle = 200
    mf.verbose = 0
    return mf


def run_scf(mol, kind: str, max_retries: int = 3):
    """Run and stabilise one SCF.  Returns ``(mf, ScfSummary)``."""
    if kind not in SCF_KINDS:
        raise InputError(f"unknown SCF kind {kind!r}; choose from {SCF_KINDS}", field="--scf")
    if kind == "rhf" and mol.spin != 0:
        raise InputError("RHF needs a closed shell; use ROHF or UHF", field="--scf")
    t0 = time.perf_counter()
    mf = _make(mol, kind)
    mf.kernel()
    attempts, cycles = 1, _cycles(mf)
    stable = _internal_stable(mf)
    while (not mf.converged or not stable[0]) and attempts <= max_retries:
        mo = stable[1] if not stable[0] else mf.mo_coeff
        mf.kernel(mf.make_rdm1(mo, mf.mo_occ))
        attempts += 1
        cycles += _cycles(mf)
        stable = _internal_stable(mf)
    external = _external_stable(mf) if kind == "rhf" else None
    flags = []
    if not mf.converged:
        flags.append(f"{kind.upper()} not converged after {attempts} attempt(s)")
    if not stable[0]:
        flags.append(f"{kind.upper()} internally unstable after {attempts} attempt(s)")
    s2 = float(mf.spin_square()[0]) if kind != "rhf" else 0.0
    summary = ScfSummary(method=kind, energy_ha=float(mf.e_tot), converged=bool(mf.converged),
                         stable=bool(stable[0]), stable_external=external, attempts=attempts,
                         iterations=cycles, s2=s2, seconds=time.perf_counter() - t0, flags=flags)
    return mf, summary


def _cycles(mf) -> int:
    return int(getattr(mf, "cycles", 0) or 0)


def _internal_stable(mf) -> tuple[bool, np.ndarray]:
    mo_i, _, stable_i, _ = mf.stability(internal=True, external=False, return_status=True)
    return bool(stable_i), mo_i


def _external_stable(mf) -> bool:
    _, _, _, stable_e = mf.stability(internal=False, external=True, return_status=True)
    return bool(stable_e)
