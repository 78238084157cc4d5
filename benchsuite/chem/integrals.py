"""Molecular-orbital integrals in the orbital space a method sees.

Conventions (every consumer relies on them)
-------------------------------------------
* Spatial orbitals are the restricted SCF orbitals (RHF, or ROHF for open
  shells) in PySCF's order, ascending orbital energy.  The first ``n_core``
  are frozen (doubly occupied, folded into the constant); the next
  ``n_orbitals`` are active; the rest are discarded.
* ``h1_ha[p, q]`` = <p|h|q> + sum over frozen core c of [2 (pq|cc) - (pc|cq)],
  the one-electron operator dressed by the frozen core's mean field.
* ``eri_ha[p, q, r, s]`` = (pq|rs) in chemists' notation,
  the integral of phi_p(1) phi_q(1) phi_r(2) phi_s(2) / r12, real orbitals,
  stored full (n, n, n, n) with its 8-fold symmetry.
* ``constant_ha`` = nuclear repulsion + frozen-core energy.  The electronic
  Hamiltonian in the active space is
  H = constant + sum_pq h_pq E_pq + 1/2 sum_pqrs (pq|rs) (E_pq E_rs - delta_qr E_ps).
* Active electrons: ``n_alpha`` >= ``n_beta``.  In the SCF reference the
  lowest ``n_beta`` active orbitals are doubly occupied and the next
  ``n_alpha - n_beta`` singly occupied with alpha spin.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class MOIntegrals:
    h1_ha: np.ndarray
    eri_ha: np.ndarray
    constant_ha: float
    nuclear_repulsion_ha: float
    core_energy_ha: float
    n_alpha: int
    n_beta: int
    n_core: int
    mo_energy_ha: np.ndarray

    @property
    def n_orbitals(self) -> int:
        return self.h1_ha.shape[0]

    @property
    def n_electrons(self) -> int:
        return self.n_alpha + self.n_beta

    @property
    def n_spin_orbitals(self) -> int:
        return 2 * self.n_orbitals

    def reference_energy_ha(self) -> float:
        """Energy of the SCF determinant evaluated with these integrals.

        For the restricted (RHF/ROHF) orbitals the integrals come from, this
        equals the SCF total energy; it is the check that the constant and
        the integral ordering are right.
        """
        na, nb = self.n_alpha, self.n_beta
        h, g = self.h1_ha, self.eri_ha
        diag_j = np.einsum("iijj->ij", g)
        diag_k = np.einsum("ijji->ij", g)
        e = self.constant_ha + np.trace(h[:na, :na]) + np.trace(h[:nb, :nb])
        e += 0.5 * (diag_j[:na, :na].sum() - diag_k[:na, :na].sum())
        e += 0.5 * (diag_j[:nb, :nb].sum() - diag_k[:nb, :nb].sum())
        e += diag_j[:na, :nb].sum()
        return float(e)

    def arrays(self) -> dict[str, np.ndarray]:
        """Plain arrays for an NPZ file (no pickled objects)."""
        return {
            "h1_ha": self.h1_ha, "eri_ha": self.eri_ha, "mo_energy_ha": self.mo_energy_ha,
            "scalars": np.array([self.constant_ha, self.nuclear_repulsion_ha, self.core_energy_ha]),
            "counts": np.array([self.n_alpha, self.n_beta, self.n_core], dtype=np.int64),
        }

    @classmethod
    def from_arrays(cls, a: dict[str, np.ndarray]) -> "MOIntegrals":
        const, enuc, ecore = (float(x) for x in a["scalars"])
        na, nb, ncore = (int(x) for x in a["counts"])
        return cls(h1_ha=np.asarray(a["h1_ha"]), eri_ha=np.asarray(a["eri_ha"]), constant_ha=const,
                   nuclear_repulsion_ha=enuc, core_energy_ha=ecore, n_alpha=na, n_beta=nb,
                   n_core=ncore, mo_energy_ha=np.asarray(a["mo_energy_ha"]))


def build_mo_integrals(mol, mo_coeff: np.ndarray, mo_energy: np.ndarray, n_core: int,
                       n_orbitals: int) -> MOIntegrals:
    """Integrals over orbitals ``n_core : n_core + n_orbitals`` of ``mo_coeff``.

    ``mol`` is a built ``pyscf.gto.Mole``; ``mo_coeff`` (n_ao, n_mo) are the
    restricted SCF orbitals.  The frozen-core energy and mean field are folded
    into ``constant_ha`` and ``h1_ha`` as described in the module docstring.
    """
    from pyscf import ao2mo, scf

    hcore_ao = scf.hf.get_hcore(mol)
    c_core = mo_coeff[:, :n_core]
    c_act = mo_coeff[:, n_core:n_core + n_orbitals]
    e_nuc = float(mol.energy_nuc())
    if n_core:
        dm_core = 2.0 * c_core @ c_core.T
        vj, vk = scf.hf.get_jk(mol, dm_core)
        veff = vj - 0.5 * vk
        e_core = float(np.einsum("ij,ji->", hcore_ao + 0.5 * veff, dm_core))
    else:
        veff = np.zeros_like(hcore_ao)
        e_core = 0.0
    h1 = c_act.T @ (hcore_ao + veff) @ c_act
    eri = ao2mo.restore(1, ao2mo.kernel(mol, c_act), n_orbitals)
    n_alpha, n_beta = mol.nelec
    return MOIntegrals(
        h1_ha=np.ascontiguousarray(h1), eri_ha=np.ascontiguousarray(eri),
        constant_ha=e_nuc + e_core, nuclear_repulsion_ha=e_nuc, core_energy_ha=e_core,
        n_alpha=int(n_alpha) - n_core, n_beta=int(n_beta) - n_core, n_core=n_core,
        mo_energy_ha=np.asarray(mo_energy[n_core:n_core + n_orbitals], dtype=float),
    )
