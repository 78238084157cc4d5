"""Exact energies of an encoded Hamiltonian in a fixed (N, S_z) sector.

This is the independent check of an encoding: it uses only the Pauli sum and
the encoding's map from occupation numbers to basis states, never a
fermionic FCI code.

Method (common practice for sparse-matrix exact diagonalisation):

1. Enumerate the occupation states with ``n_alpha`` alpha and ``n_beta`` beta
   electrons (alpha string x beta string), map each to its computational
   basis state with the encoding's GF(2) map, and apply the Hamiltonian's
   reductions (keeping only states in the reduced symmetry sector and
   deleting the removed qubits).  For a tapered Hamiltonian the states of the
   sector map one to one (up to sign) to tapered basis states, so the
   tapered Pauli sum restricted to them has exactly the spectrum of the
   untapered one in (N, S_z) and the same Z2 sector -- the restriction to the
   right N is exact, not a penalty.
2. Group the Pauli terms by X mask.  sigma(x, z)|b> = i^{|x&z|} (-1)^{|z&b|} |b^x>,
   so each group is one permutation of basis states times a phase vector.
   :class:`ProductSector` does this in occupation space, where each group
   connects a block of alpha strings with a block of beta strings and its
   elements are one small matrix product; each connected pair is stored
   once and the Hermitian matrix is H = L + L^dagger + diag.
3. Diagonalise: dense ``eigh`` for small sectors, Davidson's method with the
   diagonal preconditioner otherwise.  <S^2> of each root comes from S^2 encoded and
   reduced the same way.

Energies are in hartree and include the constant (identity coefficient).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from itertools import combinations

import numpy as np
import scipy.linalg
import scipy.sparse

from benchsuite.errors import InputError, Refused
from benchsuite.qubit import gf2
from benchsuite.qubit.encodings import encoding_matrix, mode_indices
from benchsuite.qubit.hamiltonian import QubitHamiltonian
from benchsuite.qubit.pauli import PauliSum, i_power, parity, popcount

#: Default refusal limit: exact diagonalisation only for registers of at most
#: this many qubits before reductions (2 x active orbitals); the sector
#: dimension, which sets the cost, does not shrink much under tapering.
DEFAULT_MAX_QUBITS = 24

#: Sectors up to this dimension are diagonalised densely.
DENSE_LIMIT = 300


@dataclass(frozen=True)
class SectorResult:
    """Lowest roots of one sector (hartree).

    With ``keep_vectors``, ``vectors[:, k]`` is root k over the basis states
    ``states`` (integers of the Hamiltonian's register, bit q = qubit q), in
    the sector's product order (alpha string major), not sorted.
    """

    energies_ha: np.ndarray
    spin_square: np.ndarray | None
    n_alpha: int
    n_beta: int
    dimension: int
    solver: str
    vectors: np.ndarray | None = None
    states: np.ndarray | None = None

    @property
    def ground_ha(self) -> float:
        return float(self.energies_ha[0])


def strings(n_orbitals: int, n_occupied: int) -> np.ndarray:
    """All orbital-occupation strings (bit p = orbital p) with ``n_occupied`` bits set, ascending."""
    if not 0 <= n_occupied <= n_orbitals:
        return np.zeros(0, dtype=np.uint64)
    out = [sum(1 << p for p in occ) for occ in combinations(range(n_orbitals), n_occupied)]
    return np.sort(np.array(out, dtype=np.uint64))


def sector_states(ham: QubitHamiltonian, n_alpha: int, n_beta: int) -> np.ndarray:
    """Sorted basis states of ``ham``'s register spanning the (n_alpha, n_beta) sector."""
    sa, sb = strings(ham.n_orbitals, n_alpha), strings(ham.n_orbitals, n_beta)
    a = np.repeat(sa, sb.size)
    b = np.tile(sb, sa.size)
    _, states = ham.encode_states(a, b)
    states = np.sort(states)
    if states.size > 1 and np.any(states[1:] == states[:-1]):
        raise AssertionError("two occupation states map to one basis state (internal error)")
    return states


class _Lookup:
    """Index of basis states in a sorted state array (-1 if absent)."""

    def __init__(self, states: np.ndarray, n_qubits: int):
        self.states = states
        self.table = None
        if n_qubits <= 26:
            self.table = np.full(1 << n_qubits, -1, dtype=np.int64)
            self.table[states.astype(np.int64)] = np.arange(states.size)

    def __call__(self, targets: np.ndarray) -> np.ndarray:
        if self.table is not None:
            return self.table[targets.astype(np.int64)]
        pos = np.searchsorted(self.states, targets)
        pos = np.minimum(pos, self.states.size - 1)
        return np.where(self.states[pos] == targets, pos, -1)


class SectorOperator:
    """A Hermitian operator restricted to sector states: H = L + L^dagger + diag(d).

    ``half`` (CSR) holds each connected pair of states once, in either
    orientation, so only half of the off-diagonal elements are stored.
    """

    def __init__(self, half: scipy.sparse.csr_matrix, diagonal: np.ndarray):
        self.half = half
        self.diagonal = diagonal
        self._adjoint = half.T if not np.iscomplexobj(half.data) else half.conj().T

    @property
    def shape(self) -> tuple[int, int]:
        return self.half.shape

    @property
    def dtype(self):
        return np.result_type(self.half.dtype, self.diagonal.dtype)

    @property
    def nnz(self) -> int:
        """Stored nonzeros: both halves plus the diagonal."""
        return 2 * self.half.nnz + self.diagonal.size

    def __matmul__(self, v: np.ndarray) -> np.ndarray:
        d = self.diagonal if v.ndim == 1 else self.diagonal[:, None]
        return self.half @ v + self._adjoint @ v + d * v

    def shifted(self, shift: float) -> "SectorOperator":
        return SectorOperator(self.half, self.diagonal - shift)

    def toarray(self) -> np.ndarray:
        half = self.half.toarray()
        return half + half.conj().T + np.diag(self.diagonal)


def sector_operator(pauli: PauliSum, states: np.ndarray) -> SectorOperator:
    """<s_i| pauli |s_j> over sorted basis states ``states`` (closed under ``pauli``).

    ``pauli`` must be Hermitian (real coefficients).
    """
    if not pauli.is_hermitian():
        raise ValueError("sector_operator needs a Hermitian Pauli sum (real coefficients)")
    op = pauli.real()
    dim = states.size
    look = _Lookup(states, op.n_qubits)
    order = np.argsort(op.x, kind="stable")
    xs, zs, cs = op.x[order], op.z[order], op.coeffs[order]
    starts = np.flatnonzero(np.concatenate([[True], xs[1:] != xs[:-1]]))
    ends = np.append(starts[1:], xs.size)
    weights = cs * i_power(popcount(xs & zs))
    dtype = np.float64 if np.all(weights.imag == 0) else np.complex128
    weights = weights.astype(dtype) if dtype == np.complex128 else weights.real
    rows, cols, vals = [], [], []
    diag = np.zeros(dim, dtype=dtype)
    cols_all = np.arange(dim)
    for s, e in zip(starts, ends):
        x = xs[s]
        z, w = zs[s:e], weights[s:e]
        if x == 0:
            diag += w @ (1 - 2 * parity(z[:, None] & states[None, :]))
            continue
        targets = states ^ x
        j = look(targets)
        ok = (j >= 0) & (targets > states)
        if not np.any(ok):
            continue
        b = states[ok]
        rows.append(j[ok])
        cols.append(cols_all[ok])
        vals.append(w @ (1 - 2 * parity(z[:, None] & b[None, :])))
    return SectorOperator(_half_matrix(rows, cols, vals, dim, dtype), diag)


def _half_matrix(rows, cols, vals, dim: int, dtype) -> scipy.sparse.csr_matrix:
    if not rows:
        return scipy.sparse.csr_matrix((dim, dim), dtype=dtype)
    return scipy.sparse.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                                   shape=(dim, dim))


def check_qubit_limit(n_qubits: int, max_qubits: int | None) -> None:
    """Refused (an InputError) if exact diagonalisation of an ``n_qubits`` register is beyond the limit."""
    limit = DEFAULT_MAX_QUBITS if max_qubits is None else max_qubits
    if n_qubits > limit:
        raise Refused(f"exact diagonalisation refused: {n_qubits} qubits exceed the limit of {limit} "
                      f"(raise it with --max-exact-qubits)", field="--max-exact-qubits")


def _orthonormal_additions(v: np.ndarray, new: np.ndarray, floor: float = 1e-8) -> np.ndarray:
    """Columns of ``new`` made orthonormal to ``v`` and to each other (Gram-Schmidt
    applied twice per vector); directions with less than ``floor`` of new content
    are dropped."""
    kept = []
    basis = v
    for col in new.T:
        t = col / np.linalg.norm(col)
        for _ in range(2):
            t = t - basis @ (basis.conj().T @ t)
        norm = np.linalg.norm(t)
        if norm < floor:
            continue
        t = t / norm
        kept.append(t)
        basis = np.concatenate([basis, t[:, None]], axis=1)
    if not kept:
        return np.zeros((v.shape[0], 0), dtype=v.dtype)
    return np.stack(kept, axis=1)


def davidson(op: SectorOperator, n_roots: int, guess: int | None = None, tol: float = 1e-7,
             max_iter: int = 400, extra_roots: int = 4, extra_tol: float = 1e-3):
    """Lowest ``n_roots`` eigenpairs by Davidson's method with the diagonal
    preconditioner (E. R. Davidson, J. Comput. Phys. 17, 87 (1975)).

    ``n_roots + extra_roots`` roots are tracked and the extra ones converged
    loosely (residual ``extra_tol``), not only the requested ones:
    near-degenerate low states of another symmetry than the start vectors
    are otherwise easily passed over.  Start space: unit vectors on
    the lowest diagonal elements (and ``guess``) plus one dense vector with
    generic components, so that no symmetry sector is absent.  Thick restart
    keeps twice the tracked Ritz vectors.  Converged when every requested
    residual norm ||H x - theta x|| <= ``tol``; the eigenvalue error is then
    of order tol^2 / gap.
    """
    dim = op.shape[0]
    diag = np.real(op.diagonal)
    k = min(dim, n_roots + extra_roots)
    n_start = min(dim - 1, 2 * k)
    start = list(np.argsort(diag, kind="stable")[:n_start])
    if guess is not None and guess not in start:
        start = [guess] + start[:-1]
    v = np.zeros((dim, len(start) + 1), dtype=op.dtype)
    v[start, np.arange(len(start))] = 1.0
    v[:, -1] = np.cos(1.0 + 0.61803398875 * np.arange(dim))  # generic: overlaps every sector
    empty = np.zeros((dim, 0), dtype=op.dtype)
    v = _orthonormal_additions(empty, v)
    av = op @ v
    max_space = max(8 * k, 40)
    for it in range(1, max_iter + 1):
        t = v.conj().T @ av
        theta_all, s_all = scipy.linalg.eigh(0.5 * (t + t.conj().T))
        theta, s = theta_all[:k], s_all[:, :k]
        x, ax = v @ s, av @ s
        r = ax - x * theta
        norms = np.linalg.norm(r, axis=0)
        limits = np.where(np.arange(k) < n_roots, tol, max(tol, extra_tol))
        if np.all(norms <= limits):
            return theta[:n_roots], x[:, :n_roots], it
        todo = np.flatnonzero(norms > limits)
        corr = np.empty((dim, todo.size), dtype=op.dtype)
        for col, i in enumerate(todo):
            denom = theta[i] - diag
            small = np.abs(denom) < 1e-8
            denom[small] = np.where(denom[small] < 0, -1e-8, 1e-8)
            corr[:, col] = r[:, i] / denom
        if v.shape[1] + todo.size > max_space:
            keep = min(v.shape[1], 2 * k)
            v, av = v @ s_all[:, :keep], av @ s_all[:, :keep]
        q = _orthonormal_additions(v, corr)
        if q.shape[1] == 0:
            q = _orthonormal_additions(v, r[:, todo])
        if q.shape[1] == 0:
            raise RuntimeError("Davidson stagnated: no new direction (internal error)")
        v = np.concatenate([v, q], axis=1)
        av = np.concatenate([av, op @ q], axis=1)
    raise RuntimeError(f"Davidson did not converge in {max_iter} iterations (residuals {norms})")


def lowest_eigenpairs(op: SectorOperator, n_roots: int, guess: int | None = None, shift: float = 0.0):
    """Lowest ``n_roots`` eigenpairs; ``shift`` (the constant) is removed from
    the diagonal during the solve and added back."""
    dim = op.shape[0]
    k = min(n_roots, dim)
    shifted = op.shifted(shift)
    if dim <= DENSE_LIMIT:
        w, v = scipy.linalg.eigh(shifted.toarray(), subset_by_index=[0, k - 1])
        return w + shift, v, "dense eigh"
    w, v, iters = davidson(shifted, k, guess)
    return w + shift, v, f"Davidson ({iters} iterations)"


class ProductSector:
    """The (n_alpha, n_beta) sector of a Hamiltonian's register, in product order.

    State k = (alpha string k // n_b, beta string k % n_b) over ascending
    strings; ``keep`` marks the states inside every reduction's symmetry
    sector and ``states`` are their basis-state integers on the (reduced)
    register.  :meth:`operator` assembles any operator of that register.

    Assembly works in occupation space: a lifted term sigma(x, z) of the full
    register maps occupation n to n ^ y with y = A^-1 x and has the phase
    i^{|x&z|} (-1)^{|z'&n|} with z' = A^T z (b = A n).  Splitting y and z'
    into alpha and beta strings, each X group connects a block of alpha
    strings times a block of beta strings, and its elements are the small
    matrix product sum_t w_t s_alpha,t(i) s_beta,t(j) (one BLAS call).
    """

    def __init__(self, ham: QubitHamiltonian, n_alpha: int, n_beta: int):
        self.ham = ham
        self.n_alpha, self.n_beta = n_alpha, n_beta
        n = ham.n_orbitals
        self.sa, self.sb = strings(n, n_alpha), strings(n, n_beta)
        self.index_a = np.full(1 << n, -1, dtype=np.int64)
        self.index_a[self.sa.astype(np.int64)] = np.arange(self.sa.size)
        self.index_b = np.full(1 << n, -1, dtype=np.int64)
        self.index_b[self.sb.astype(np.int64)] = np.arange(self.sb.size)
        a = np.repeat(self.sa, self.sb.size)
        b = np.tile(self.sb, self.sa.size)
        self.keep, self.states = ham.encode_states(a, b)
        self.new_index = np.cumsum(self.keep) - 1
        self.dimension = int(self.keep.sum())
        self.all_kept = bool(self.keep.all())

    def product_index(self, alpha: int, beta: int) -> int | None:
        ia, ib = self.index_a[alpha], self.index_b[beta]
        if ia < 0 or ib < 0 or not self.keep[ia * self.sb.size + ib]:
            return None
        return int(self.new_index[ia * self.sb.size + ib])

    def _mode_space(self, op: PauliSum):
        """Lifted terms of ``op`` as (alpha flip, beta flip, alpha z', beta z', weight)."""
        ham = self.ham
        full = ham.lift(op)
        if not full.is_hermitian():
            raise ValueError("sector assembly needs a Hermitian Pauli sum (real coefficients)")
        table = ham.table
        a_inv_cols = _inverse_columns(ham.encoding, ham.n_modes)
        y = np.zeros(len(full), dtype=np.uint64)
        zp = np.zeros(len(full), dtype=np.uint64)
        one = np.uint64(1)
        for i in range(ham.n_modes):
            y ^= ((full.x >> np.uint64(i)) & one) * a_inv_cols[i]
            zp |= parity(table.columns[i] & full.z).astype(np.uint64) << np.uint64(i)
        ia, ib = mode_indices(ham.n_orbitals, ham.ordering)
        ya, yb, za, zb = (np.zeros(len(full), dtype=np.uint64) for _ in range(4))
        for p in range(ham.n_orbitals):
            sp = np.uint64(p)
            ya |= ((y >> np.uint64(ia[p])) & one) << sp
            yb |= ((y >> np.uint64(ib[p])) & one) << sp
            za |= ((zp >> np.uint64(ia[p])) & one) << sp
            zb |= ((zp >> np.uint64(ib[p])) & one) << sp
        w = np.real(full.coeffs) * i_power(popcount(full.x & full.z))
        if np.all(w.imag == 0):
            w = w.real
        return ya, yb, za, zb, w

    @staticmethod
    def _block(strings_: np.ndarray, index: np.ndarray, flip: int, half: bool):
        """Strings that stay in the sector under ``flip``: (source idx, target idx).

        With ``half`` only sources occupying the lowest bit of ``flip`` are
        kept, so each pair {n, n ^ flip} appears once.
        """
        f = np.uint64(flip)
        ok = 2 * popcount(strings_ & f) == bin(flip).count("1")
        if half:
            low = np.uint64(flip & -flip)
            ok &= (strings_ & low) != 0
        ok = np.flatnonzero(ok)
        return ok, index[(strings_[ok] ^ f).astype(np.int64)]

    def operator(self, op: PauliSum) -> SectorOperator:
        """``op`` (an operator of the Hamiltonian's register, commuting with N_alpha,
        N_beta and its symmetries) restricted to this sector."""
        ya, yb, za, zb, w = self._mode_space(op)
        if ya.size == 0:
            dim = self.dimension
            return SectorOperator(scipy.sparse.csr_matrix((dim, dim)), np.zeros(dim))
        order = np.lexsort((yb, ya))
        ya, yb, za, zb, w = ya[order], yb[order], za[order], zb[order], w[order]
        starts = np.flatnonzero(np.concatenate([[True], (ya[1:] != ya[:-1]) | (yb[1:] != yb[:-1])]))
        ends = np.append(starts[1:], ya.size)
        n_b = np.int64(self.sb.size)
        dtype = w.dtype
        diag = np.zeros(self.sa.size * self.sb.size, dtype=dtype)
        cache: dict[tuple, tuple] = {}
        plan = []
        total = 0
        for s, e in zip(starts, ends):
            fa, fb = int(ya[s]), int(yb[s])
            # The pair {n, n ^ y} is taken once: halve on the alpha flip if any, else on beta.
            key_a, key_b = ("a", fa, fa != 0), ("b", fb, fa == 0 and fb != 0)
            for key in (key_a, key_b):
                if key not in cache:
                    strings_, index = (self.sa, self.index_a) if key[0] == "a" else (self.sb, self.index_b)
                    cache[key] = self._block(strings_, index, key[1], key[2])
            size = cache[key_a][0].size * cache[key_b][0].size
            if size:
                plan.append((s, e, key_a, key_b, total))
                if fa or fb:
                    total += size
        rows = np.empty(total, dtype=np.int64)
        cols = np.empty(total, dtype=np.int64)
        vals = np.empty(total, dtype=dtype)
        for s, e, key_a, key_b, at in plan:
            (src_a, dst_a), (src_b, dst_b) = cache[key_a], cache[key_b]
            sign_a = 1 - 2 * parity(za[s:e, None] & self.sa[src_a][None, :])
            sign_b = 1 - 2 * parity(zb[s:e, None] & self.sb[src_b][None, :])
            block = ((sign_a * w[s:e, None]).T @ sign_b).ravel()
            src = (src_a[:, None] * n_b + src_b[None, :]).ravel()
            if key_a[1] == 0 and key_b[1] == 0:
                diag[src] += block
                continue
            stop = at + src.size
            cols[at:stop] = src
            rows[at:stop] = (dst_a[:, None] * n_b + dst_b[None, :]).ravel()
            vals[at:stop] = block
        if not self.all_kept:
            inside = self.keep[rows] & self.keep[cols]
            rows, cols, vals = self.new_index[rows[inside]], self.new_index[cols[inside]], vals[inside]
        dim = self.dimension
        index_type = np.int32 if dim < 2 ** 31 else np.int64
        half = scipy.sparse.coo_matrix((vals, (rows.astype(index_type), cols.astype(index_type))),
                                       shape=(dim, dim)).tocsr()
        return SectorOperator(half, diag[self.keep])


@lru_cache(maxsize=32)
def _inverse_columns(encoding: str, n_modes: int) -> np.ndarray:
    """Columns of A^-1 as masks: flipping qubit i flips the occupations in column i."""
    cols = gf2.columns_as_masks(gf2.inverse(encoding_matrix(encoding, n_modes)))
    cols.setflags(write=False)
    return cols


#: A root whose <S^2> is this close to S(S+1) has the requested spin.
SPIN_TOLERANCE = 1e-6
#: First weight (hartree) of the spin penalty lambda (S^2 - S(S+1)); quadrupled while a root has the wrong spin.
SPIN_PENALTY_HA = 1.0


def _sector_numbers(ham: QubitHamiltonian, n_electrons, two_sz) -> tuple[int, int]:
    n = ham.n_electrons if n_electrons is None else int(n_electrons)
    tsz = ham.n_alpha - ham.n_beta if two_sz is None else int(two_sz)
    if (n + tsz) % 2 or abs(tsz) > n:
        raise InputError(f"no sector with {n} electrons and 2*Sz = {tsz}", field="sector")
    na, nb = (n + tsz) // 2, (n - tsz) // 2
    if na > ham.n_orbitals or nb > ham.n_orbitals:
        raise InputError(f"{na} alpha / {nb} beta electrons do not fit in {ham.n_orbitals} orbitals",
                         field="sector")
    return na, nb


def sector_eigen(ham: QubitHamiltonian, n_electrons: int | None = None, two_sz: int | None = None,
                 n_roots: int = 1, max_qubits: int | None = None, spin: bool = True,
                 keep_vectors: bool = False, multiplicity: int | None = None) -> SectorResult:
    """Lowest ``n_roots`` energies of ``ham`` with ``n_electrons`` and 2 S_z = ``two_sz``.

    Defaults: the reference's N and S_z.  Refuses (InputError) registers
    wider than ``max_qubits`` (default :data:`DEFAULT_MAX_QUBITS`) before any
    work; the limit applies to the unreduced register 2 x n_orbitals.
    ``spin_square`` is None when S^2 does not commute with a tapered symmetry.

    ``multiplicity`` (2S + 1, with S >= |S_z|): the lowest roots *of that spin* only,
    found with the penalty H + lambda (S^2 - S(S+1))^2 (:class:`SpinPenalised`), which moves
    every state of another spin up and leaves the right-spin ones where they are (S^2
    commutes with H); lambda starts at :data:`SPIN_PENALTY_HA` and is quadrupled until every
    root has <S^2> within :data:`SPIN_TOLERANCE` of S(S+1).  (When the plain lowest roots
    already have that spin they are returned without a penalty.)  Energies are
    then <H> of those roots.  ValueError if S^2 has no form on a tapered register.
    """
    check_qubit_limit(ham.n_modes, max_qubits)
    na, nb = _sector_numbers(ham, n_electrons, two_sz)
    sector = ProductSector(ham, na, nb)
    if sector.dimension == 0:
        raise InputError(f"the ({na} alpha, {nb} beta) sector is excluded by this Hamiltonian's "
                         "reductions (they fix the reference's symmetry eigenvalues)", field="sector")
    op = sector.operator(ham.pauli)
    guess = sector.product_index((1 << ham.n_alpha) - 1, (1 << ham.n_beta) - 1)
    s2_op = None
    if spin or multiplicity is not None:
        try:
            s2_op = sector.operator(ham.spin_square())
        except ValueError:
            if multiplicity is not None:
                raise ValueError("S^2 does not commute with a tapered symmetry: the spin cannot be "
                                 "targeted on this register") from None
    if multiplicity is None:
        energies, vectors, solver = lowest_eigenpairs(op, n_roots, guess, shift=ham.constant_ha)
    else:
        energies, vectors, solver = _lowest_of_spin(op, s2_op, multiplicity, na - nb, n_roots, guess,
                                                    ham.constant_ha)
    s2 = None
    if s2_op is not None:
        s2 = np.real(np.einsum("ik,ik->k", vectors.conj(), s2_op @ vectors))
    return SectorResult(energies_ha=np.asarray(energies), spin_square=s2 if spin or multiplicity else None,
                        n_alpha=na, n_beta=nb, dimension=sector.dimension, solver=solver,
                        vectors=vectors if keep_vectors else None,
                        states=sector.states if keep_vectors else None)


class SpinPenalised:
    """H + lambda (S^2 - t)^2 on a sector, for the lowest states with <S^2> = t.

    Every state of another spin S' moves up by lambda (S'(S'+1) - t)^2 >= lambda (2S + 2)^2
    above or below; states of the target spin stay put (S^2 commutes with H).  The
    ``diagonal`` (Davidson's preconditioner) is H's diagonal plus lambda (diag S^2 - t)^2,
    an approximation; products and :meth:`toarray` are exact.
    """

    def __init__(self, op: SectorOperator, s2_op: SectorOperator, target: float, weight: float,
                 shift: float = 0.0):
        self.op, self.s2_op, self.target, self.weight, self.shift = op, s2_op, target, weight, shift
        self.diagonal = op.diagonal - shift + weight * (np.real(s2_op.diagonal) - target) ** 2

    @property
    def shape(self) -> tuple[int, int]:
        return self.op.shape

    @property
    def dtype(self):
        return np.result_type(self.op.dtype, self.s2_op.dtype)

    def __matmul__(self, v: np.ndarray) -> np.ndarray:
        w = self.s2_op @ v - self.target * v
        return self.op @ v - self.shift * v + self.weight * (self.s2_op @ w - self.target * w)

    def shifted(self, shift: float) -> "SpinPenalised":
        return SpinPenalised(self.op, self.s2_op, self.target, self.weight, self.shift + shift)

    def toarray(self) -> np.ndarray:
        s2 = self.s2_op.toarray() - self.target * np.eye(self.shape[0])
        return self.op.toarray() - self.shift * np.eye(self.shape[0]) + self.weight * (s2 @ s2)


def _lowest_of_spin(op: SectorOperator, s2_op: SectorOperator, multiplicity: int, two_sz: int, n_roots: int,
                    guess, shift: float, max_rounds: int = 6):
    """Lowest ``n_roots`` eigenpairs of ``op`` with <S^2> = S(S+1) (see :func:`sector_eigen`)."""
    if multiplicity < 1 or multiplicity - 1 < abs(two_sz) or (multiplicity - 1 - two_sz) % 2:
        raise InputError(f"multiplicity {multiplicity} has no state with 2*Sz = {two_sz}", field="multiplicity")
    target = 0.25 * (multiplicity - 1) * (multiplicity + 1)
    energies, vectors, solver = lowest_eigenpairs(op, n_roots, guess, shift=shift)
    s2 = np.real(np.einsum("ik,ik->k", vectors.conj(), s2_op @ vectors))
    if np.all(np.abs(s2 - target) <= SPIN_TOLERANCE):     # the plain lowest roots have the spin already
        return energies, vectors, solver
    weight = SPIN_PENALTY_HA
    for _ in range(max_rounds):
        _, vectors, solver = lowest_eigenpairs(SpinPenalised(op, s2_op, target, weight), n_roots, guess,
                                               shift=shift)
        s2 = np.real(np.einsum("ik,ik->k", vectors.conj(), s2_op @ vectors))
        if np.all(np.abs(s2 - target) <= SPIN_TOLERANCE):
            energies = np.real(np.einsum("ik,ik->k", vectors.conj(), op @ vectors))
            return energies, vectors, f"{solver}, spin penalty {weight:g} (S^2 - {target:g})^2 Eh"
        weight *= 4.0
    raise RuntimeError(f"no root with <S^2> = {target} found (last <S^2>: {s2}); is the spin in this sector?")


def fock_space_lowest(pauli: PauliSum, max_qubits: int = 16) -> float:
    """Lowest eigenvalue over the whole Fock space (every electron number) -- for
    showing why sector restriction matters; dense, small registers only."""
    check_qubit_limit(pauli.n_qubits, max_qubits)
    states = np.arange(1 << pauli.n_qubits, dtype=np.uint64)
    mat = sector_operator(pauli, states).toarray()
    return float(scipy.linalg.eigvalsh(mat, subset_by_index=[0, 0])[0])
