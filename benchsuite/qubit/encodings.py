"""Fermion-to-qubit encodings as GF(2) maps, and their Majorana operators.

Every encoding here is linear over GF(2): an occupation vector n (n_j = 1 if
spin-orbital j is occupied) is stored as the qubit basis state b = A n (mod 2).

* Jordan-Wigner: A = identity, b_j = n_j.
* Parity: b_i = n_0 + ... + n_i (A lower triangular, all ones).
* Bravyi-Kitaev: b_i = sum of n_k for (i AND (i+1)) <= k <= i, the
  Fenwick-tree form of the Bravyi-Kitaev matrix of Seeley, Richard & Love,
  J. Chem. Phys. 137, 224109 (2012), truncated to the first n modes when n
  is not a power of two (OpenFermion's ``bravyi_kitaev``; its
  ``bravyi_kitaev_tree`` balances the tree differently for such n).

Majorana operators.  With a_j = (c_j + i d_j)/2 and a_j^dagger = (c_j - i d_j)/2
(c_j = gamma_{2j}, d_j = gamma_{2j+1}), and the fermionic sign convention
a_j^dagger |n> = (-1)^{n_0 + ... + n_{j-1}} |n + e_j> (modes ordered by index),

    c_j = X^{u_j} Z^{p_j},     d_j = i X^{u_j} Z^{p_j XOR r_j}

in the XZ form of :mod:`benchsuite.qubit.pauli`, where u_j is column j of A
(the qubits that change when n_j flips: the update set plus j itself),
p_j = XOR of rows k < j of A^-1 (the qubits whose parity is n_0 + ... +
n_{j-1}), and r_j = row j of A^-1 (the qubits whose parity is n_j).  For
Jordan-Wigner this is c_j = Z_0..Z_{j-1} X_j, d_j = Z_0..Z_{j-1} Y_j, and
for Bravyi-Kitaev it reproduces the update, parity and remainder sets of
Seeley, Richard & Love (2012).

Spin-orbital ordering (recorded on every Hamiltonian): ``interleaved``
puts spatial orbital p's alpha and beta spin-orbitals at modes 2p and 2p+1;
``blocked`` puts alpha at p and beta at n + p (n spatial orbitals).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from benchsuite.errors import InputError
from benchsuite.qubit import gf2
from benchsuite.qubit.pauli import bit_of, pack_bits
from benchsuite.qubit.register import Register

ENCODINGS = ("jordan-wigner", "bravyi-kitaev", "parity")
ORDERINGS = ("interleaved", "blocked")


def check_encoding(encoding: str) -> str:
    if encoding not in ENCODINGS:
        raise InputError(f"unknown encoding {encoding!r}; choose one of {', '.join(ENCODINGS)}",
                         field="--encoding")
    return encoding


def check_ordering(ordering: str) -> str:
    if ordering not in ORDERINGS:
        raise InputError(f"unknown spin-orbital ordering {ordering!r}; choose one of "
                         f"{', '.join(ORDERINGS)}", field="--ordering")
    return ordering


#: Label part of an encoding whose spin-parity qubits are dropped; runs stored before the option's
#: rename wrote :data:`LEGACY_DROP_LABEL` (read, never written).
DROP_LABEL = "sp-dropped"
LEGACY_DROP_LABEL = "2qr"


def current_label(label: str | None) -> str | None:
    """A stored encoding label in the current form (old runs wrote ``+2qr`` for the dropped qubits)."""
    if label is None:
        return None
    name_part, slash, ordering = label.partition("/")
    parts = [DROP_LABEL if p == LEGACY_DROP_LABEL else p for p in name_part.split("+")]
    return "+".join(parts) + slash + ordering


def check_register(encoding: str, ordering: str, drop_spin_parity_qubits: bool = False) -> None:
    """Encoding, ordering and the spin-parity qubit removal's requirements; InputError on any mismatch."""
    check_encoding(encoding)
    check_ordering(ordering)
    if drop_spin_parity_qubits and encoding != "parity":
        raise InputError(f"--drop-spin-parity-qubits needs --encoding parity (got {encoding})",
                         field="--drop-spin-parity-qubits")
    if drop_spin_parity_qubits and ordering != "blocked":
        raise InputError("--drop-spin-parity-qubits needs --ordering blocked (alpha spin-orbitals "
                         "first, so that two qubits hold the N_alpha and N parities)",
                         field="--drop-spin-parity-qubits")


def encoding_matrix(encoding: str, n_modes: int) -> np.ndarray:
    """The 0/1 matrix A (n_modes x n_modes) with qubit state b = A n mod 2."""
    check_encoding(encoding)
    i = np.arange(n_modes)[:, None]
    k = np.arange(n_modes)[None, :]
    if encoding == "jordan-wigner":
        a = i == k
    elif encoding == "parity":
        a = k <= i
    else:
        a = ((i & (i + 1)) <= k) & (k <= i)
    return a.astype(np.uint8)


@dataclass(frozen=True)
class MajoranaTable:
    """XZ-form masks of the 2n Majorana operators of one encoding.

    Operator ``m`` (m = 2j for c_j, 2j+1 for d_j) is i^{phase[m]} X^{x[m]} Z^{z[m]}.
    ``columns`` are the columns of A (bit i = A[i, j]) for encoding occupations.
    """

    encoding: str
    n_modes: int
    x: np.ndarray
    z: np.ndarray
    phase: np.ndarray
    columns: np.ndarray


@lru_cache(maxsize=64)
def majorana_table(encoding: str, n_modes: int) -> MajoranaTable:
    """The Majorana strings of ``encoding`` on ``n_modes`` qubits, masks in the register's layout
    (:mod:`benchsuite.qubit.register`: ``(2 n_modes,)`` up to 64 modes, ``(2 n_modes, n_words)`` beyond)."""
    reg = Register(n_modes)
    a = encoding_matrix(encoding, n_modes)
    a_inv = gf2.inverse(a)
    cols = pack_bits(a.T, reg)                       # mask j: column j of A
    rows_inv = pack_bits(a_inv, reg)                 # mask j: row j of A^-1
    prefix = np.cumsum(a_inv, axis=0) % 2            # XOR of rows 0..j of A^-1
    below = np.zeros_like(a_inv)                     # p_j = XOR of rows k < j of A^-1
    below[1:] = prefix[:-1]
    below_m = pack_bits(below, reg)
    x = np.repeat(cols, 2, axis=0)
    z = np.empty_like(x)
    z[0::2] = below_m
    z[1::2] = below_m ^ rows_inv
    phase = np.tile(np.array([0, 1], dtype=np.int64), n_modes)
    for arr in (x, z, phase, cols):
        arr.setflags(write=False)
    return MajoranaTable(encoding, n_modes, x, z, phase, cols)


def mode_indices(n_orbitals: int, ordering: str) -> tuple[np.ndarray, np.ndarray]:
    """Mode (spin-orbital) index of each spatial orbital's alpha and beta spin-orbital."""
    check_ordering(ordering)
    p = np.arange(n_orbitals)
    if ordering == "interleaved":
        return 2 * p, 2 * p + 1
    return p, n_orbitals + p


def occupation_masks(alpha_strings, beta_strings, n_orbitals: int, ordering: str) -> np.ndarray:
    """Mode occupation masks (bit j = n_j) for pairs of alpha and beta strings.

    ``alpha_strings``/``beta_strings`` are integer arrays of equal length whose
    bit p says spatial orbital p is occupied with that spin (uint64: orbitals 0..63 can be
    occupied).  The masks are in the layout of the ``2 n_orbitals``-qubit register.
    """
    ia, ib = mode_indices(n_orbitals, ordering)
    a = np.asarray(alpha_strings, dtype=np.uint64)
    b = np.asarray(beta_strings, dtype=np.uint64)
    reg = Register(2 * n_orbitals)
    one = np.uint64(1)
    if reg.wide:
        a, b = np.broadcast_arrays(a.reshape(-1), b.reshape(-1))
        bits = np.zeros((a.size, reg.n_qubits), dtype=np.uint8)
        for p in range(min(n_orbitals, 64)):
            bits[:, ia[p]] = (a >> np.uint64(p)) & one
            bits[:, ib[p]] = (b >> np.uint64(p)) & one
        return pack_bits(bits, reg)
    out = np.zeros(np.broadcast(a, b).shape, dtype=np.uint64)
    for p in range(n_orbitals):
        sp = np.uint64(p)
        out |= ((a >> sp) & one) << np.uint64(ia[p])
        out |= ((b >> sp) & one) << np.uint64(ib[p])
    return out


def encode_occupations(occupations, table: MajoranaTable) -> np.ndarray:
    """Qubit basis states b = A n (mod 2) of mode occupation masks n (either layout)."""
    occ = np.asarray(occupations, dtype=np.uint64)
    out = np.zeros_like(occ)
    wide = Register(table.n_modes).wide
    for j in range(table.n_modes):
        bit = bit_of(occ, j, wide).astype(np.uint64)
        out ^= (bit[..., None] if wide else bit) * table.columns[j]
    return out
