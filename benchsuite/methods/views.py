"""The problem in the forms a solver's own code wants (for plugin authors).

``problem.views`` (a :class:`ProblemViews` of a
:class:`~benchsuite.methods.base.QubitProblem`) gives

* :meth:`ProblemViews.exact_energy_ha` -- the exact energy (hartree, constant
  included) of the lowest state with the declared electron number and spin
  S = (multiplicity - 1) / 2, from the encoded Pauli sum alone;
* :meth:`ProblemViews.qubit_operator` -- the Pauli sum as an
  ``openfermion.QubitOperator`` (the constant as the identity term);
* :meth:`ProblemViews.sector_matrix` -- the Hamiltonian restricted to the
  problem's (n_alpha, n_beta) sector as a SciPy CSR matrix with the basis
  states its rows stand for;
* :meth:`ProblemViews.pauli_terms` -- plain ``(label, coefficient)`` pairs,
  labels sparse and qubit 0 first (``"X0 Y1 Z3"``), the identity as ``""``;
* :meth:`ProblemViews.fcidump_text` -- the active-space integrals as FCIDUMP
  text (the open format of Knowles & Handy 1989, written by ``pyscf.tools.fcidump``).

Units: hartree throughout.  Each view is computed when asked for; keep the
result if you need it twice.
"""

from __future__ import annotations

import io
from dataclasses import dataclass

import numpy as np
import scipy.sparse

from benchsuite.qubit.hamiltonian import QubitHamiltonian, encode_integrals
from benchsuite.qubit.sector import ProductSector, sector_eigen

#: |<S^2> - S(S+1)| below which a root has the declared spin (as the reference ladder checks it).
SPIN_TOLERANCE = 1e-6

#: Largest number of sector roots searched for one of the declared spin.
MAX_SPIN_ROOTS = 64


@dataclass(frozen=True)
class SectorMatrix:
    """The Hamiltonian (hartree, constant on the diagonal) in one (n_alpha, n_beta) sector.

    ``matrix[i, j] = <b_i| H |b_j>`` over the computational basis states
    ``states[i]`` of the problem's register (integers, bit q = qubit q, after any
    reductions), in the sector's product order (alpha string major).
    """

    matrix: scipy.sparse.csr_matrix
    states: np.ndarray
    n_alpha: int
    n_beta: int

    @property
    def dimension(self) -> int:
        return int(self.matrix.shape[0])


class ProblemViews:
    """Views of one problem (see the module docstring)."""

    def __init__(self, problem):
        self.problem = problem

    @property
    def _ham(self) -> QubitHamiltonian:
        return self.problem.hamiltonian

    def exact_energy_ha(self) -> float:
        """Lowest energy (Eh) of the declared N and spin S, in the S_z = S sector of the encoded register.

        Roots are found with ⟨S²⟩; the first whose ⟨S²⟩ is S(S+1) within
        :data:`SPIN_TOLERANCE` is returned.  When a reduction does not commute
        with S² (some tapered registers) the unreduced register built from the same
        integrals is used: reductions keep the spectrum of the sector.
        """
        ham = self._ham
        try:
            ham.spin_square()
        except ValueError:
            ints = self.problem.integrals
            ham = encode_integrals(ints, ham.encoding, ham.ordering)
        spin = (self.problem.multiplicity - 1) / 2
        n_roots = 4
        while True:
            res = sector_eigen(ham, self.problem.n_electrons, self.problem.multiplicity - 1, n_roots=n_roots)
            good = np.flatnonzero(np.abs(res.spin_square - spin * (spin + 1)) < SPIN_TOLERANCE)
            if good.size:
                return float(res.energies_ha[good[0]])
            if n_roots >= min(MAX_SPIN_ROOTS, res.dimension):
                raise ValueError(f"no root of spin S = {spin:g} among the lowest {n_roots} of the sector")
            n_roots *= 2

    def qubit_operator(self):
        """The encoded Pauli sum as an ``openfermion.QubitOperator`` (qubit q = OpenFermion qubit q)."""
        return self._ham.pauli.to_openfermion()

    def sector_matrix(self) -> SectorMatrix:
        """The Hamiltonian in the problem's (n_alpha, n_beta) sector as a Hermitian CSR matrix."""
        p = self.problem
        sector = ProductSector(self._ham, p.n_alpha, p.n_beta)
        op = sector.operator(self._ham.pauli)
        full = (op.half + op.half.conj().T + scipy.sparse.diags(op.diagonal)).tocsr()
        return SectorMatrix(full, np.asarray(sector.states), p.n_alpha, p.n_beta)

    def pauli_terms(self) -> list[tuple[str, float]]:
        """``(label, coefficient in Eh)`` pairs of the encoded Pauli sum; the constant is the ``""`` term.

        Coefficients are real floats (the Hamiltonian is Hermitian and real in this basis).
        """
        return [(label, float(np.real(c))) for label, c in self._ham.pauli]

    def fcidump_text(self, tol: float = 1e-15) -> str:
        """The active-space integrals as FCIDUMP text: chemists' (pq|rs), h_pq with the frozen
        core folded in, and the constant (nuclear repulsion + core energy, Eh) as ECORE; MS2 is
        n_alpha - n_beta.  Orbital symmetry labels are all 1 (no point group)."""
        from pyscf.tools import fcidump

        ints = self.problem.integrals
        n = ints.n_orbitals
        out = io.StringIO()
        fcidump.write_head(out, n, ints.n_electrons, ms=ints.n_alpha - ints.n_beta)
        fcidump.write_eri(out, ints.eri_ha, n, tol=tol)
        fcidump.write_hcore(out, ints.h1_ha, n, tol=tol)
        out.write(f" {ints.constant_ha:.16g}  0  0  0  0\n")
        return out.getvalue()
