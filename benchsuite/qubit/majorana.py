"""Second-quantised operators -> Pauli sums through Majorana monomials.

Two routes, both vectorised with numpy:

* :func:`spin_free_pauli` -- the molecular Hamiltonian from restricted MO
  integrals (real orbitals, 8-fold symmetric ERIs), the fast route used for
  every registry case.  With c_P, d_P the Majorana operators of spin-orbital
  P (see :mod:`benchsuite.qubit.encodings`) and B_PQ = c_P d_Q,

      sum_PQ t_PQ a+_P a_Q = 1/2 tr t + (i/2) sum_PQ t_PQ B_PQ      (t real symmetric)

  and the Hamiltonian of :mod:`benchsuite.chem.integrals`,
  H = E_c + sum_pq h_pq E_pq + 1/2 sum_pqrs (pq|rs) (E_pq E_rs - delta_qr E_ps),
  becomes (n spatial orbitals, a and b running over same-spin pairs
  (P, Q) of spin-orbitals, G_ab = (pq|rs))

      H = E_0 + (i/2) sum_PQ M_PQ B_PQ - 1/4 sum_{a<b, [B_a, B_b] = 0} G_ab B_a B_b

      M_rs = h_rs + sum_p (pp|rs) - 1/2 sum_q (rq|qs)          (same spin only)
      E_0  = E_c + sum_p h_pp + 1/2 sum_pr (pp|rr) - 1/2 sum_pq (pq|qp) + 1/4 sum_pq (pq|pq)

  (pairs a < b whose bilinears anticommute cancel against b < a, and
  B_a^2 = -1 gives the last constant).  Derived here from the definitions;
  the equality with OpenFermion's ``jordan_wigner``/``bravyi_kitaev`` of the
  same operator is the test of this formula.

* :func:`ladder_words_pauli` -- any operator written as products of creation
  and annihilation operators (used for S^2, S_z and N, and as an internal
  cross-check of the fast route): a+_j = (c_j - i d_j)/2, a_j = (c_j + i d_j)/2,
  each product of k ladder operators expanded into its 2^k Majorana monomials.
"""

from __future__ import annotations

from itertools import product

import numpy as np

from benchsuite.chem.scf import CONV_TOL_HA
from benchsuite.qubit.encodings import MajoranaTable, mode_indices
from benchsuite.qubit.pauli import PauliSum, i_power, merge_terms, weight
from benchsuite.qubit.register import Register

#: Merged Pauli coefficients with |c| <= this (hartree) are dropped.  Rule: the SCF's
#: energy convergence threshold (chem.scf.CONV_TOL_HA = 1e-10 Eh), the accuracy the
#: orbitals, hence the integrals, are determined to; a coefficient below it is not a
#: property of the molecule (N2/STO-3G on unadapted orbitals kept 196 such strings
#: between 1e-12 and 1e-10 Eh, which hid a Z2 symmetry).  The summed |c| of what is
#: dropped bounds the energy shift and is recorded (``dropped_one_norm_ha``).
DROP_TOLERANCE = CONV_TOL_HA


def xz_product(x1, z1, e1, x2, z2, e2, wide: bool = False):
    """(i^e1 X^x1 Z^z1)(i^e2 X^x2 Z^z2) = i^e X^(x1^x2) Z^(z1^z2); returns (x, z, e).
    ``wide``: masks of shape (..., n_words) (see :mod:`benchsuite.qubit.register`)."""
    return x1 ^ x2, z1 ^ z2, e1 + e2 + 2 * weight(z1 & x2, wide)


def xz_to_sigma_phase(x, z, e, wide: bool = False) -> np.ndarray:
    """Exponent k with i^e X^x Z^z = i^k sigma(x, z)."""
    return (e - weight(x & z, wide)) % 4


def _bilinears(table: MajoranaTable, modes_p: np.ndarray, modes_q: np.ndarray, wide: bool = False):
    """XZ forms of B_PQ = c_P d_Q for index arrays of modes."""
    return xz_product(table.x[2 * modes_p], table.z[2 * modes_p], table.phase[2 * modes_p],
                      table.x[2 * modes_q + 1], table.z[2 * modes_q + 1], table.phase[2 * modes_q + 1], wide)


#: Wide registers: rows of the pair triangle per chunk of the two-body products, and the number of
#: accumulated strings at which the chunks are merged (bounds the memory of a 120-qubit build).
WIDE_ROWS_PER_CHUNK = 256
WIDE_MERGE_EVERY = 6_000_000


def _pair_products(a_idx, b_idx, gv, bx, bz, be, wide: bool):
    """Strings and coefficients -G_ab/4 B_a B_b of the commuting pairs among (a_idx, b_idx)."""
    xa, za, xb, zb = bx[a_idx], bz[a_idx], bx[b_idx], bz[b_idx]
    commute = (weight(xa & zb, wide) + weight(za & xb, wide)) % 2 == 0
    a_idx, b_idx, gv = a_idx[commute], b_idx[commute], gv[commute]
    x4, z4, e4 = xz_product(xa[commute], za[commute], be[a_idx], xb[commute], zb[commute], be[b_idx], wide)
    k4 = xz_to_sigma_phase(x4, z4, e4, wide)
    if np.any(k4 % 2):
        raise AssertionError("non-Hermitian product of commuting bilinears (internal error)")
    return x4, z4, -0.25 * gv * (1 - k4)  # k4 in {0, 2}: i^k4 = 1 - k4


def _two_body_narrow(g, bx, bz, be, screen):
    """All pairs a < b of the same-spin pair list at once (one-word masks)."""
    nn = g.shape[0]
    g_pairs = np.block([[g, g], [g, g]])
    a_idx, b_idx = np.triu_indices(2 * nn, 1)
    gv = g_pairs[a_idx, b_idx]
    big = np.abs(gv) > screen
    return _pair_products(a_idx[big], b_idx[big], gv[big], bx, bz, be, False)


def _two_body_wide(g, bx, bz, be, screen):
    """Pairs a < b in chunks of :data:`WIDE_ROWS_PER_CHUNK` rows a, merged as they accumulate."""
    nn = g.shape[0]
    n_pairs = 2 * nn
    cols = np.arange(n_pairs)
    parts, held = [], 0
    for a0 in range(0, n_pairs, WIDE_ROWS_PER_CHUNK):
        rows = np.arange(a0, min(a0 + WIDE_ROWS_PER_CHUNK, n_pairs))
        block = np.tile(g[rows % nn], (1, 2))
        keep = (np.abs(block) > screen) & (cols[None, :] > rows[:, None])
        r, b_idx = np.nonzero(keep)
        parts.append(_pair_products(rows[r], b_idx, block[r, b_idx], bx, bz, be, True))
        held += parts[-1][0].shape[0]
        if held > WIDE_MERGE_EVERY and len(parts) > 1:
            parts, held = [merge_terms(*(np.concatenate(p) for p in zip(*parts)))], 0
            held = parts[0][0].shape[0]
    return tuple(np.concatenate(p) for p in zip(*parts))


def spin_free_pauli(h1: np.ndarray, eri: np.ndarray, constant: float, table: MajoranaTable,
                    ordering: str, tol: float = DROP_TOLERANCE, screen: float = 1e-14) -> PauliSum:
    """Pauli sum of the restricted-orbital molecular Hamiltonian (hartree).

    ``h1`` (n, n) and ``eri`` (n, n, n, n) in chemists' notation (pq|rs) over
    real spatial orbitals; ``constant`` is added to the identity.  Pair
    products whose |(pq|rs)| <= ``screen`` are skipped (their contribution is
    below ``screen`` per term); merged coefficients with |c| <= ``tol`` are
    dropped.  The result has real coefficients (checked).
    """
    n = h1.shape[0]
    if table.n_modes != 2 * n:
        raise ValueError(f"Majorana table for {table.n_modes} modes, integrals for {2 * n}")
    h1 = np.asarray(h1, dtype=float)
    eri = np.asarray(eri, dtype=float)
    if not np.allclose(h1, h1.T, atol=1e-10) or not np.allclose(eri, eri.transpose(1, 0, 2, 3), atol=1e-10):
        raise ValueError("integrals must be real and symmetric (restricted real orbitals)")
    ia, ib = mode_indices(n, ordering)
    wide = Register(2 * n).wide
    coul = np.einsum("pprs->rs", eri)
    exch = np.einsum("rqqs->rs", eri)
    m = h1 + coul - 0.5 * exch
    e0 = (constant + np.trace(h1) + 0.5 * np.einsum("pprr->", eri)
          - 0.5 * np.einsum("pqqp->", eri) + 0.25 * np.einsum("pqpq->", eri))

    # Same-spin pairs a = (spin, p, q) -> modes (P, Q).
    pp, qq = np.divmod(np.arange(n * n), n)
    big_p = np.concatenate([ia[pp], ib[pp]])
    big_q = np.concatenate([ia[qq], ib[qq]])
    bx, bz, be = _bilinears(table, big_p, big_q, wide)
    m_pairs = np.concatenate([m.ravel(), m.ravel()])
    quad_k = (1 + be - weight(bx & bz, wide)) % 4
    if np.any(quad_k % 2):
        raise AssertionError("non-Hermitian one-body term (internal error)")
    quad_c = 0.5 * m_pairs * (1 - quad_k)  # quad_k in {0, 2}: i^quad_k = 1 - quad_k

    g = eri.reshape(n * n, n * n)
    x4, z4, quart_c = (_two_body_wide if wide else _two_body_narrow)(g, bx, bz, be, screen)

    zero = np.zeros((1,) + bx.shape[1:], np.uint64)
    x = np.concatenate([zero, bx, x4])
    z = np.concatenate([zero, bz, z4])
    c = np.concatenate([[e0], quad_c, quart_c])
    return PauliSum(2 * n, x, z, c, merge=True, tol=tol)


def drop_small(pauli: PauliSum, tol: float = DROP_TOLERANCE) -> tuple[PauliSum, float]:
    """``pauli`` without its non-identity strings of |c| <= ``tol``, and their summed |c| (hartree).

    The identity is always kept.  The summed |c| bounds how far any energy moves.
    """
    small = (np.abs(pauli.coeffs) <= tol) & ~pauli.identity_terms()
    dropped = float(np.abs(pauli.coeffs[small]).sum())
    return pauli.take(~small), dropped


def ladder_words_pauli(table: MajoranaTable, modes, daggers, coeffs,
                       tol: float = DROP_TOLERANCE) -> PauliSum:
    """Pauli sum of sum_w coeffs[w] * prod_t op(modes[w, t], daggers[w, t]).

    ``modes`` and ``daggers`` have shape (W, k): word w is the ordered product
    (left to right) of k ladder operators, a+_j where ``daggers`` is true and
    a_j otherwise.  Coefficients may be complex; the result is merged.
    """
    modes = np.atleast_2d(np.asarray(modes, dtype=np.int64))
    daggers = np.atleast_2d(np.asarray(daggers, dtype=bool))
    coeffs = np.asarray(coeffs, dtype=np.complex128).reshape(-1)
    n_ladder_words, k = modes.shape
    wide = Register(table.n_modes).wide
    xs, zs, cs = [], [], []
    for choice in product((0, 1), repeat=k):
        x = np.zeros((n_ladder_words,) + table.x.shape[1:], dtype=np.uint64)
        z = np.zeros_like(x)
        e = np.zeros(n_ladder_words, dtype=np.int64)
        amp = coeffs * (0.5 ** k)
        for t, ch in enumerate(choice):
            idx = 2 * modes[:, t] + ch
            x, z, e = xz_product(x, z, e, table.x[idx], table.z[idx], table.phase[idx], wide)
            if ch:  # d_j enters a+_j with -i and a_j with +i
                amp = amp * np.where(daggers[:, t], -1j, 1j)
        xs.append(x)
        zs.append(z)
        cs.append(amp * i_power(xz_to_sigma_phase(x, z, e, wide)))
    if not xs:
        return PauliSum.identity(table.n_modes, complex(coeffs.sum()))
    return PauliSum(table.n_modes, np.concatenate(xs), np.concatenate(zs), np.concatenate(cs),
                    merge=True, tol=tol)


def spin_square_words(n_orbitals: int, ordering: str):
    """Ladder words of S^2 = S_- S_+ + S_z + S_z^2 (hbar = 1).

    S_+ = sum_p a+_{p alpha} a_{p beta}, S_- its adjoint, S_z = 1/2 sum_p (n_{p alpha} - n_{p beta}).
    Returns ``(modes, daggers, coeffs)`` for 4-operator words followed by the
    2-operator words, as two tuples.
    """
    ia, ib = mode_indices(n_orbitals, ordering)
    p, q = np.divmod(np.arange(n_orbitals ** 2), n_orbitals)
    four_modes, four_coeffs = [], []
    # S_- S_+ = sum_pq a+_{pb} a_{pa} a+_{qa} a_{qb}
    four_modes.append(np.stack([ib[p], ia[p], ia[q], ib[q]], axis=1))
    four_coeffs.append(np.ones(p.size))
    # S_z^2 = 1/4 sum_pq (n_pa - n_pb)(n_qa - n_qb)
    for sp, sq, sign in ((ia, ia, 1), (ia, ib, -1), (ib, ia, -1), (ib, ib, 1)):
        four_modes.append(np.stack([sp[p], sp[p], sq[q], sq[q]], axis=1))
        four_coeffs.append(np.full(p.size, 0.25 * sign))
    four = (np.concatenate(four_modes), np.tile([True, False, True, False], (5 * p.size, 1)),
            np.concatenate(four_coeffs))
    r = np.arange(n_orbitals)
    two = (np.concatenate([np.stack([ia[r], ia[r]], 1), np.stack([ib[r], ib[r]], 1)]),
           np.tile([True, False], (2 * n_orbitals, 1)),
           np.concatenate([np.full(n_orbitals, 0.5), np.full(n_orbitals, -0.5)]))
    return four, two


def spin_square_pauli(n_orbitals: int, ordering: str, table: MajoranaTable,
                      tol: float = DROP_TOLERANCE) -> PauliSum:
    """S^2 encoded like the Hamiltonian (same encoding and ordering)."""
    four, two = spin_square_words(n_orbitals, ordering)
    s2 = ladder_words_pauli(table, *four, tol=0.0) + ladder_words_pauli(table, *two, tol=0.0)
    return s2.simplify(tol).real()


def number_pauli(modes, table: MajoranaTable, tol: float = DROP_TOLERANCE) -> PauliSum:
    """Sum of n_j over the given modes, encoded."""
    modes = np.asarray(modes, dtype=np.int64)
    words = np.stack([modes, modes], axis=1)
    return ladder_words_pauli(table, words, np.tile([True, False], (modes.size, 1)),
                              np.ones(modes.size), tol=tol).real()


def integral_words(h1: np.ndarray, eri: np.ndarray, constant: float, ordering: str):
    """The Hamiltonian as spin-orbital ladder words (slow, explicit; for cross-checks).

    H = constant + sum_{pq,s} h_pq a+_{ps} a_{qs}
        + 1/2 sum_{pqrs,s,t} (pq|rs) a+_{ps} a+_{rt} a_{st} a_{qs}.
    Returns ``(two, four)`` word tuples and the constant.
    """
    n = h1.shape[0]
    ia, ib = mode_indices(n, ordering)
    spins = (ia, ib)
    p, q = np.divmod(np.arange(n * n), n)
    two_modes = np.concatenate([np.stack([s[p], s[q]], 1) for s in spins])
    two = (two_modes, np.tile([True, False], (two_modes.shape[0], 1)), np.tile(h1.ravel(), 2))
    idx = np.indices((n, n, n, n)).reshape(4, -1)
    pi, qi, ri, si = idx
    vals = 0.5 * eri.reshape(-1)
    four_modes, four_vals = [], []
    for s in spins:
        for t in spins:
            four_modes.append(np.stack([s[pi], t[ri], t[si], s[qi]], 1))
            four_vals.append(vals)
    modes4 = np.concatenate(four_modes)
    four = (modes4, np.tile([True, True, False, False], (modes4.shape[0], 1)), np.concatenate(four_vals))
    return two, four, constant
