"""Z2 symmetries of a Pauli sum and qubit tapering.

Method: Bravyi, Gambetta, Mezzacapo & Temme, "Tapering off qubits to
simulate fermionic Hamiltonians", arXiv:1701.08213 (2017).

* The Pauli strings commuting with every term of H are the GF(2) null space
  of H's binary symplectic matrix (rows (x_t | z_t)); its dimension is
  reported as ``n_pauli_symmetries``.
* Tapering uses the Z-type part of that group: Z^m commutes with every term
  iff |m & x_t| is even, i.e. m lies in the null space of the rows x_t.  A
  computational basis state (the Hartree-Fock state in particular) is an
  eigenstate of every Z-string, so the sector holding the reference is
  defined.  Symmetries with X or Y parts, if any, are counted but not
  tapered (``n_pauli_symmetries > n_z_symmetries`` says so).
* The Z-type generators are put in reduced row echelon form, pivot = highest
  qubit first, so generator i has qubit q_i that no other generator touches;
  U = prod_i (X_{q_i} + Z^{t_i})/sqrt(2) maps Z^{t_i} to X_{q_i}, which is
  then replaced by the generator's eigenvalue on the reference state
  (:class:`benchsuite.qubit.hamiltonian.Reduction`).

The sector picked this way is a choice, not a guarantee: the molecule's
ground state may lie in another Z2 sector (another irreducible
representation).  :func:`z2_sector_scan` finds the lowest energy of each
sector with the reference's electron counts, so a caller can check that
the reference's sector holds the (N, S_z) ground state.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from benchsuite.errors import InputError
from benchsuite.qubit import gf2
from benchsuite.qubit.hamiltonian import Z2_TAPERING, QubitHamiltonian, Reduction
from benchsuite.qubit.pauli import PauliSum, parity
from benchsuite.qubit.register import words_to_ints


#: Sectors whose lowest energies differ by less than this (hartree) count as tied.
SECTOR_TIE_HA = 1e-8


@dataclass(frozen=True)
class Symmetries:
    """Independent Z2 symmetries of a Pauli sum."""

    n_pauli_symmetries: int
    z_generators: tuple[int, ...]
    pivots: tuple[int, ...]

    @property
    def n_z_symmetries(self) -> int:
        return len(self.z_generators)


def _pack(bits: np.ndarray) -> np.ndarray:
    """Boolean rows (R, n_bits) -> packed uint64 rows (R, W), bit b in word b // 64."""
    r, n_bits = bits.shape
    w = gf2.n_words(n_bits)
    out = np.zeros((r, w), dtype=np.uint64)
    for b in range(n_bits):
        out[:, b >> 6] |= bits[:, b].astype(np.uint64) << np.uint64(b & 63)
    return out


def _bits(masks: np.ndarray, n: int) -> np.ndarray:
    """Masks in a register's layout ((k,) narrow or (k, n_words) wide) -> booleans (k, n), column q = qubit q."""
    words = masks.reshape(masks.shape[0], -1)
    q = np.arange(n)
    return ((words[:, q >> 6] >> (q & 63).astype(np.uint64)) & np.uint64(1)).astype(bool)


def find_symmetries(pauli: PauliSum) -> Symmetries:
    """Null-space analysis of ``pauli`` (the identity term is ignored)."""
    op = pauli.without_identity()
    n = op.n_qubits
    k = len(op)
    x_words, z_words = op.x.reshape(k, -1), op.z.reshape(k, -1)
    pairs = np.unique(np.concatenate([x_words, z_words], axis=1), axis=0)
    w = x_words.shape[1]
    full_rows = _pack(np.concatenate([_bits(pairs[:, :w], n), _bits(pairs[:, w:], n)], axis=1))
    n_all = gf2.null_space(full_rows, 2 * n).shape[0] if n else 0
    x_rows = _pack(_bits(np.unique(x_words, axis=0), n))
    z_null = gf2.null_space(x_rows, n)
    if z_null.shape[0] == 0:
        return Symmetries(n_all, (), ())
    basis, pivots = gf2.rref(z_null, n)
    gens = tuple(words_to_ints(basis))  # packed GF(2) rows share the masks' word layout
    return Symmetries(n_all, gens, tuple(pivots))


def reference_eigenvalues(generators, state: int) -> tuple[int, ...]:
    """Eigenvalue (+1/-1) of each Z-string generator (Python int masks, any width) on a basis state."""
    return tuple(1 - 2 * ((int(g) & int(state)).bit_count() & 1) for g in generators)


def taper(ham: QubitHamiltonian, eigenvalues: tuple[int, ...] | str = "hf",
          symmetries: Symmetries | None = None, max_qubits: int | None = None) -> QubitHamiltonian:
    """Remove one qubit per independent Z-type symmetry.

    ``eigenvalues``: ``"hf"`` (default) for the reference (Hartree-Fock)
    state's sector; ``"lowest"`` for the sector holding the lowest (N, S_z)
    state, found by :func:`z2_sector_scan` (exact diagonalisation, refused
    above ``max_qubits``; ties within :data:`SECTOR_TIE_HA` go to the
    reference's sector); or an explicit tuple of +1/-1.  The returned
    Hamiltonian records the generators, removed qubits and eigenvalues.  Its
    ``hf_state`` is the reference in the tapered register, which exists only
    in the reference's sector.
    """
    sym = symmetries or find_symmetries(ham.pauli)
    if eigenvalues == "hf":
        eigenvalues = reference_eigenvalues(sym.z_generators, ham.hf_state())
    elif eigenvalues == "lowest":
        rows = z2_sector_scan(ham, sym, max_qubits)
        e_min = min(row[1] for row in rows)
        hf = reference_eigenvalues(sym.z_generators, ham.hf_state())
        # Degenerate sectors (e.g. the two components of a Pi state) tie; prefer the reference's.
        tied = [row[0] for row in rows if row[1] <= e_min + SECTOR_TIE_HA]
        eigenvalues = hf if hf in tied else tied[0]
    elif isinstance(eigenvalues, str):
        raise InputError(f"unknown tapering sector {eigenvalues!r}; use 'hf', 'lowest' or eigenvalues",
                         field="--taper-sector")
    if len(eigenvalues) != sym.n_z_symmetries or any(e not in (1, -1) for e in eigenvalues):
        raise ValueError(f"need {sym.n_z_symmetries} eigenvalues of +1/-1, got {eigenvalues}")
    red = Reduction(kind=Z2_TAPERING, n_qubits_before=ham.n_qubits, generators=sym.z_generators,
                    qubits=sym.pivots, eigenvalues=tuple(int(e) for e in eigenvalues), clifford=True)
    notes = ham.notes + (f"{sym.n_pauli_symmetries} independent Pauli symmetries, "
                         f"{sym.n_z_symmetries} Z-type tapered",)
    return replace(ham, pauli=red.apply(ham.pauli, ham.tolerance), reductions=ham.reductions + (red,),
                   notes=notes)


def z2_sector_scan(ham: QubitHamiltonian, symmetries: Symmetries | None = None,
                   max_qubits: int | None = None) -> list[tuple[tuple[int, ...], float, int]]:
    """Lowest energy of each Z2 sector that the reference's (N, S_z) states reach.

    Returns ``(eigenvalues, lowest energy in hartree, sector dimension)`` per
    sector, each solved on the Hamiltonian tapered to that sector.  The
    reference's sector is the right one for a method started from
    Hartree-Fock only if its energy is the minimum of this list.
    """
    from benchsuite.qubit.sector import check_qubit_limit, sector_eigen, sector_states

    check_qubit_limit(ham.n_modes, max_qubits)
    sym = symmetries or find_symmetries(ham.pauli)
    states = sector_states(ham, ham.n_alpha, ham.n_beta)
    g = np.array(sym.z_generators, dtype=np.uint64)
    signs = 1 - 2 * parity(states[:, None] & g[None, :]) if g.size else np.zeros((states.size, 0), int)
    rows = []
    for combo in np.unique(signs, axis=0):
        eig = tuple(int(e) for e in combo)
        res = sector_eigen(taper(ham, eig, sym), max_qubits=max_qubits, spin=False)
        rows.append((eig, res.ground_ha, res.dimension))
    return rows
