"""Linear algebra over GF(2) on bit-packed rows.

A row of ``n_bits`` bits is stored in ``ceil(n_bits / 64)`` uint64 words,
bit ``b`` in word ``b // 64`` at position ``b % 64``.  These kernels serve the
encodings (inverting the occupation -> qubit map) and the Z2 symmetry search
(row reduction and null spaces of binary symplectic matrices).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np


def n_words(n_bits: int) -> int:
    return max(1, (n_bits + 63) // 64)


def get_bit(rows: np.ndarray, b: int) -> np.ndarray:
    """Bit ``b`` of each packed row, as uint64 0/1."""
    return (rows[:, b >> 6] >> np.uint64(b & 63)) & np.uint64(1)


def rref(rows: np.ndarray, n_bits: int, order: Sequence[int] | None = None):
    """Reduced row echelon form of packed rows (shape (R, W)) over GF(2).

    Pivot bits are sought in ``order`` (default: highest bit first).  Returns
    ``(basis, pivots)``: ``basis`` has one row per pivot, and bit
    ``pivots[i]`` is set in ``basis[i]`` and in no other basis row.
    """
    rows = np.array(rows, dtype=np.uint64, copy=True).reshape(-1, n_words(n_bits))
    if rows.size:
        rows = np.unique(rows, axis=0)
        rows = rows[np.any(rows != 0, axis=1)]
    pivots: list[int] = []
    r = 0
    for b in (range(n_bits - 1, -1, -1) if order is None else order):
        if r == rows.shape[0]:
            break
        hits = np.flatnonzero(get_bit(rows[r:], b))
        if hits.size == 0:
            continue
        i = r + int(hits[0])
        if i != r:
            rows[[r, i]] = rows[[i, r]]
        others = get_bit(rows, b).astype(bool)
        others[r] = False
        rows[others] ^= rows[r]
        pivots.append(b)
        r += 1
    return rows[:r].copy(), pivots


def null_space(rows: np.ndarray, n_bits: int) -> np.ndarray:
    """Basis (packed, shape (k, W)) of {v : row . v = 0 mod 2 for every row}."""
    basis, pivots = rref(rows, n_bits)
    pivot_set = set(pivots)
    out = []
    for f in range(n_bits):
        if f in pivot_set:
            continue
        v = np.zeros(n_words(n_bits), dtype=np.uint64)
        v[f >> 6] |= np.uint64(1) << np.uint64(f & 63)
        for row, p in zip(basis, pivots):
            if (int(row[f >> 6]) >> (f & 63)) & 1:
                v[p >> 6] |= np.uint64(1) << np.uint64(p & 63)
        out.append(v)
    return np.array(out, dtype=np.uint64).reshape(-1, n_words(n_bits))


def inverse(matrix: np.ndarray) -> np.ndarray:
    """Inverse of a square 0/1 matrix over GF(2) (raises if singular)."""
    a = np.array(matrix, dtype=np.uint8) & 1
    n = a.shape[0]
    aug = np.concatenate([a, np.eye(n, dtype=np.uint8)], axis=1)
    for col in range(n):
        hits = np.flatnonzero(aug[col:, col])
        if hits.size == 0:
            raise ValueError("matrix is singular over GF(2)")
        i = col + int(hits[0])
        if i != col:
            aug[[col, i]] = aug[[i, col]]
        others = aug[:, col].astype(bool)
        others[col] = False
        aug[others] ^= aug[col]
    return aug[:, n:].copy()


def columns_as_masks(matrix: np.ndarray) -> np.ndarray:
    """Column j of a 0/1 matrix (<= 64 rows) as an integer mask: bit i = matrix[i, j]."""
    m = np.asarray(matrix, dtype=np.uint64)
    weights = np.uint64(1) << np.arange(m.shape[0], dtype=np.uint64)
    return (m * weights[:, None]).sum(axis=0).astype(np.uint64)


def rows_as_masks(matrix: np.ndarray) -> np.ndarray:
    """Row i of a 0/1 matrix (<= 64 columns) as an integer mask: bit j = matrix[i, j]."""
    return columns_as_masks(np.asarray(matrix).T)
