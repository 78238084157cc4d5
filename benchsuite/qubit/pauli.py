"""Pauli sums with bit-packed X/Z masks, on registers of any width.

Conventions
-----------
* Qubit ``q`` is bit ``q`` of a mask (qubit 0 is the least significant bit).
  The mask layout is the register's (:mod:`benchsuite.qubit.register`): up to
  64 qubits one ``uint64`` per mask (arrays of shape ``(k,)``, the fast path);
  wider registers ``n_words = ceil(n / 64)`` words per mask (shape
  ``(k, n_words)``, word w = qubits 64w .. 64w+63).  Functions that take
  masks and count bits have a ``wide`` flag saying which layout they get.
* A term is ``(x, z, c)``: the Pauli string sigma(x, z) = prod_q sigma_q with
  sigma_q = I (x_q = 0, z_q = 0), X (1, 0), Z (0, 1) or Y (1, 1) -- a genuine
  Y, not the product XZ -- times the coefficient ``c``.
* Equivalently sigma(x, z) = i^{|x & z|} X^x Z^z, where the "XZ form"
  X^x Z^z acts on a computational basis state |b> (bit q of the integer b is
  qubit q) as X^x Z^z |b> = (-1)^{|z & b|} |b XOR x>.  ``|m|`` is the number
  of set bits.
* Product: sigma(x1, z1) sigma(x2, z2) = i^k sigma(x1 ^ x2, z1 ^ z2) with
  k = |x1 & z1| + |x2 & z2| - |x3 & z3| + 2 |z1 & x2|  (mod 4).
  Two strings anticommute iff |x1 & z2| + |z1 & x2| is odd (symplectic form).
* Labels are sparse with ascending qubit indices, ``"X0 Y1 Z3"``; the
  identity is ``""``.  Terms are kept in a canonical order, ascending
  (x, z) as integers, so the identity (if present) comes first.
* Coefficients are ``float64`` when every one is real, else ``complex128``.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator

import numpy as np

from benchsuite.errors import InputError
from benchsuite.qubit.register import WORD_QUBITS, Register

_LETTERS = {(0, 0): "I", (1, 0): "X", (0, 1): "Z", (1, 1): "Y"}
_BITS = {"X": (1, 0), "Y": (1, 1), "Z": (0, 1)}
_LETTER_CODES = np.array(["I", "X", "Z", "Y"])  # index x + 2 z

if hasattr(np, "bitwise_count"):
    def popcount(a) -> np.ndarray:
        """Number of set bits of each element of a uint64 array."""
        return np.bitwise_count(np.asarray(a, dtype=np.uint64)).astype(np.int64)
else:  # numpy < 2.0
    _BYTE_COUNTS = np.array([bin(i).count("1") for i in range(256)], dtype=np.int64)

    def popcount(a) -> np.ndarray:
        """Number of set bits of each element of a uint64 array."""
        a = np.ascontiguousarray(a, dtype=np.uint64)
        return _BYTE_COUNTS[a.view(np.uint8)].reshape(a.shape + (8,)).sum(axis=-1)


def weight(m, wide: bool = False) -> np.ndarray:
    """Set bits of each mask: per element (one word), or summed over the last (word) axis when ``wide``."""
    return popcount(m).sum(axis=-1) if wide else popcount(m)


def is_zero(m, wide: bool = False) -> np.ndarray:
    """True where a mask has no bit set."""
    m = np.asarray(m)
    return ~np.any(m, axis=-1) if wide else m == 0


def parity(a, wide: bool = False) -> np.ndarray:
    """``weight(a) & 1`` as int64."""
    return weight(a, wide) & 1


def product_phase(x1, z1, x2, z2, wide: bool = False) -> np.ndarray:
    """Exponent k (mod 4) of i in sigma(x1, z1) sigma(x2, z2) = i^k sigma(x1^x2, z1^z2)."""
    x3, z3 = x1 ^ x2, z1 ^ z2
    return (weight(x1 & z1, wide) + weight(x2 & z2, wide) - weight(x3 & z3, wide)
            + 2 * weight(z1 & x2, wide)) % 4


def anticommutes(x1, z1, x2, z2, wide: bool = False) -> np.ndarray:
    """True where sigma(x1, z1) and sigma(x2, z2) anticommute."""
    return (weight(x1 & z2, wide) + weight(z1 & x2, wide)) % 2 == 1


def qubitwise_commute(x1, z1, x2, z2, wide: bool = False) -> np.ndarray:
    """True where the strings agree (or one is I) on every qubit."""
    overlap = (x1 | z1) & (x2 | z2)
    return is_zero(((x1 ^ x2) | (z1 ^ z2)) & overlap, wide)


_I_POWERS = np.array([1, 1j, -1, -1j])


def i_power(k) -> np.ndarray:
    """i**k for integer arrays k."""
    return _I_POWERS[np.asarray(k) % 4]


def _as_coeffs(c) -> np.ndarray:
    c = np.asarray(c)
    if np.iscomplexobj(c):
        if c.size and np.all(c.imag == 0):
            return np.ascontiguousarray(c.real, dtype=np.float64)
        return np.ascontiguousarray(c, dtype=np.complex128)
    return np.ascontiguousarray(c, dtype=np.float64)


def merge_terms(x, z, c, tol: float = 0.0):
    """Sum coefficients of equal (x, z), drop |c| <= tol, canonical order.

    Returns ``(x, z, c)`` sorted by (x, z).  ``tol = 0`` keeps every term whose
    merged coefficient is not exactly zero.  Masks of shape ``(k, n_words)``
    (wide registers) go through :func:`merge_wide_terms`.
    """
    x = np.asarray(x, dtype=np.uint64)
    z = np.asarray(z, dtype=np.uint64)
    c = np.asarray(c)
    if x.ndim == 2:
        return merge_wide_terms(x, z, c, tol)
    if x.size == 0:
        return x, z, _as_coeffs(c)
    if int(np.max(x | z)) < (1 << 32):
        order = np.argsort((x << np.uint64(32)) | z, kind="stable")
    else:
        order = np.lexsort((z, x))
    xs, zs, cs = x[order], z[order], c[order]
    start = np.ones(xs.size, dtype=bool)
    start[1:] = (xs[1:] != xs[:-1]) | (zs[1:] != zs[:-1])
    idx = np.flatnonzero(start)
    summed = np.add.reduceat(cs, idx)
    keep = np.abs(summed) > tol
    return xs[idx][keep], zs[idx][keep], _as_coeffs(summed[keep])


#: Odd 64-bit multipliers of the row hash of :func:`merge_wide_terms` (golden-ratio and
#: xxHash primes; any odd constants would do, equality is checked exactly afterwards).
_HASH_PRIMES = (0x9E3779B97F4A7C15, 0xC2B2AE3D27D4EB4F, 0x165667B19E3779F9, 0x27D4EB2F165667C5,
                0x85EBCA77C2B2AE63, 0xFF51AFD7ED558CCD)


def _row_hash(rows: np.ndarray) -> np.ndarray:
    h = np.zeros(rows.shape[0], dtype=np.uint64)
    with np.errstate(over="ignore"):
        for w in range(rows.shape[1]):
            mixed = rows[:, w] * np.uint64(_HASH_PRIMES[w % len(_HASH_PRIMES)])
            h = (h ^ mixed ^ (mixed >> np.uint64(29))) * np.uint64(_HASH_PRIMES[(w + 3) % len(_HASH_PRIMES)])
    return h


def _canonical_order(x: np.ndarray, z: np.ndarray) -> np.ndarray:
    """Order of wide masks ascending as integers (x first, then z); most significant word last."""
    n_words = x.shape[1]
    keys = [z[:, w] for w in range(n_words)] + [x[:, w] for w in range(n_words)]
    return np.lexsort(keys)


def merge_wide_terms(x: np.ndarray, z: np.ndarray, c: np.ndarray, tol: float = 0.0):
    """:func:`merge_terms` for ``(k, n_words)`` masks.

    Equal rows are found by sorting a 64-bit hash of (x, z) (one key, far faster than a
    lexicographic sort of 2 n_words keys) and checked word by word: if two different rows
    share a hash, the exact lexicographic sort is used instead.  The merged (fewer) rows
    are then put in canonical order.
    """
    c = np.asarray(c)
    if x.shape[0] == 0:
        return x.reshape(0, x.shape[1]), z.reshape(0, z.shape[1]), _as_coeffs(c)
    rows = np.concatenate([x, z], axis=1)
    h = _row_hash(rows)
    order = np.argsort(h, kind="stable")
    hs, rs = h[order], rows[order]
    same_hash = hs[1:] == hs[:-1]
    same_row = np.all(rs[1:] == rs[:-1], axis=1)
    if np.any(same_hash & ~same_row):  # a hash collision: fall back to the exact sort
        order = _canonical_order(x, z)
        rs = rows[order]
        same_row = np.all(rs[1:] == rs[:-1], axis=1)
    start = np.concatenate([[True], ~same_row])
    idx = np.flatnonzero(start)
    summed = np.add.reduceat(c[order], idx)
    keep = np.abs(summed) > tol
    merged, summed = rs[idx][keep], summed[keep]
    n_words = x.shape[1]
    mx, mz = merged[:, :n_words], merged[:, n_words:]
    canon = _canonical_order(mx, mz)
    return (np.ascontiguousarray(mx[canon]), np.ascontiguousarray(mz[canon]), _as_coeffs(summed[canon]))



def unpack_bits(masks, n_qubits: int) -> np.ndarray:
    """``(k, n_qubits)`` 0/1 uint8 matrix of k masks in either layout (column q = qubit q)."""
    m = np.asarray(masks, dtype=np.uint64).astype("<u8", copy=False)
    m = np.ascontiguousarray(m.reshape(m.shape[0] if m.ndim else 1, -1))
    bits = np.unpackbits(m.view(np.uint8).reshape(m.shape[0], -1), axis=1, bitorder="little")
    return bits[:, :n_qubits]


def pack_bits(bits: np.ndarray, register: Register) -> np.ndarray:
    """Inverse of :func:`unpack_bits`: a ``(k, n_qubits)`` 0/1 matrix as masks in ``register``'s layout."""
    bits = np.asarray(bits, dtype=np.uint8)
    k, n = bits.shape
    padded = np.zeros((k, WORD_QUBITS * register.n_words), dtype=np.uint8)
    padded[:, :n] = bits
    words = np.packbits(padded, axis=1, bitorder="little").view("<u8").astype(np.uint64)
    return words if register.wide else words[:, 0].copy()


def bit_of(m, q: int, wide: bool = False) -> np.ndarray:
    """Bit ``q`` of each mask, as bool."""
    m = np.asarray(m, dtype=np.uint64)
    if wide:
        return ((m[..., q // WORD_QUBITS] >> np.uint64(q % WORD_QUBITS)) & np.uint64(1)).astype(bool)
    return ((m >> np.uint64(q)) & np.uint64(1)).astype(bool)


def with_bit(m, q: int, on, wide: bool = False) -> np.ndarray:
    """Copy of masks ``m`` with bit ``q`` XORed where ``on`` is true (``on`` per mask)."""
    out = np.array(m, dtype=np.uint64, copy=True)
    on = np.asarray(on).astype(np.uint64)
    if wide:
        out[..., q // WORD_QUBITS] ^= on << np.uint64(q % WORD_QUBITS)
    else:
        out ^= on << np.uint64(q)
    return out


def labels_of(x, z, n_qubits: int, chunk: int = 100_000) -> list[str]:
    """Sparse labels (``"X0 Y1 Z3"``, identity ``""``) of masks in either layout, vectorised."""
    tokens = np.array([[f"{letter}{q}" for q in range(n_qubits)] for letter in _LETTER_CODES], dtype=object)
    out: list[str] = []
    for rows in _letter_rows(x, z, n_qubits, chunk):
        code, r, q = rows
        toks = iter(tokens[code[r, q], q].tolist())
        counts = np.bincount(r, minlength=code.shape[0]).tolist()
        out.extend(" ".join(next(toks) for _ in range(n)) for n in counts)
    return out


def _letter_rows(x, z, n_qubits: int, chunk: int):
    """Chunks of ``(letter codes (k, n) = x + 2 z, row indices, qubit indices)`` of non-identity letters."""
    x = np.asarray(x, dtype=np.uint64)
    z = np.asarray(z, dtype=np.uint64)
    for s in range(0, x.shape[0], chunk):
        code = unpack_bits(x[s:s + chunk], n_qubits) + 2 * unpack_bits(z[s:s + chunk], n_qubits)
        r, q = np.nonzero(code)
        yield code, r, q


def label_of(x: int, z: int, n_qubits: int) -> str:
    """Sparse label of sigma(x, z) for integer masks, e.g. ``"X0 Y1 Z3"``; ``""`` for the identity."""
    parts = []
    support = int(x) | int(z)
    for q in range(n_qubits):
        if (support >> q) & 1:
            parts.append(f"{_LETTERS[((int(x) >> q) & 1, (int(z) >> q) & 1)]}{q}")
    return " ".join(parts)


def parse_label(label: str) -> tuple[int, int, int]:
    """``"X0 Y1 Z3"`` -> (x mask, z mask, highest qubit + 1) as Python integers (any width).
    ``""`` or ``"I"`` is the identity."""
    x = z = 0
    top = 0
    text = label.strip()
    if text in ("", "I"):
        return 0, 0, 0
    seen = set()
    for token in text.replace(",", " ").split():
        letter, digits = token[0].upper(), token[1:]
        if letter == "I" and digits.isdigit():
            continue
        if letter not in _BITS or not digits.isdigit():
            raise InputError(f"bad Pauli factor {token!r} in {label!r} (expected e.g. 'X0 Y1 Z3')",
                             field="pauli")
        q = int(digits)
        if q in seen:
            raise InputError(f"qubit {q} appears twice in {label!r}", field="pauli")
        seen.add(q)
        bx, bz = _BITS[letter]
        x |= bx << q
        z |= bz << q
        top = max(top, q + 1)
    Register(top)  # the width bound, checked in one place
    return x, z, top


def compress_bits(masks: np.ndarray, removed: Iterable[int], n_qubits: int | None = None) -> np.ndarray:
    """Delete bit positions ``removed`` from each mask, shifting higher bits down.

    One-word masks (shape ``(k,)``) by shifts; ``(k, n_words)`` masks need ``n_qubits`` (the width
    before) and come back in the layout of the narrower register.
    """
    masks = np.asarray(masks, dtype=np.uint64)
    removed = sorted(set(int(r) for r in removed))
    if masks.ndim == 2:
        keep = np.setdiff1d(np.arange(n_qubits), removed)
        return pack_bits(unpack_bits(masks, n_qubits)[:, keep], Register(keep.size))
    out = masks.copy()
    for q in reversed(removed):
        low = np.uint64((1 << q) - 1)
        out = (out & low) | ((out >> np.uint64(q + 1)) << np.uint64(q))
    return out


def expand_bits(masks: np.ndarray, inserted: Iterable[int], n_qubits: int | None = None) -> np.ndarray:
    """Inverse of :func:`compress_bits`: insert zero bits so that they sit at positions
    ``inserted`` of the result.  ``n_qubits`` is the width after; needed when either side is wide."""
    masks = np.asarray(masks, dtype=np.uint64)
    inserted = sorted(set(int(r) for r in inserted))
    if masks.ndim == 2 or (n_qubits is not None and Register(n_qubits).wide):
        kept = np.setdiff1d(np.arange(n_qubits), inserted)
        bits = np.zeros((masks.shape[0], n_qubits), dtype=np.uint8)
        bits[:, kept] = unpack_bits(masks, kept.size)
        return pack_bits(bits, Register(n_qubits))
    out = masks.copy()
    for q in inserted:
        low = np.uint64((1 << q) - 1)
        out = (out & low) | ((out & ~low) << np.uint64(1))
    return out


def as_layout(masks, register: Register) -> np.ndarray:
    """Masks (either layout, fitting the register) in ``register``'s layout: pads or drops zero words."""
    m = np.asarray(masks, dtype=np.uint64)
    if m.ndim == 2 and not register.wide:
        if m.shape[1] > 1 and np.any(m[:, 1:]):
            raise ValueError(f"a mask acts beyond qubit {register.n_qubits - 1}")
        return np.ascontiguousarray(m[:, 0]) if m.shape[1] else np.zeros(m.shape[0], np.uint64)
    if register.wide:
        m = m[:, None] if m.ndim == 1 else m.reshape(1, 1) if m.ndim == 0 else m
        w = register.n_words
        if m.shape[1] < w:
            m = np.concatenate([m, np.zeros((m.shape[0], w - m.shape[1]), np.uint64)], axis=1)
        elif m.shape[1] > w:
            if np.any(m[:, w:]):
                raise ValueError(f"a mask acts beyond qubit {register.n_qubits - 1}")
            m = m[:, :w]
        return np.ascontiguousarray(m)
    return m


class PauliSum:
    """A linear combination of Pauli strings on ``n_qubits`` qubits (any width; see the module docstring).

    Arrays ``x``, ``z`` (masks in the register's layout: ``(k,)`` up to 64 qubits,
    ``(k, n_words)`` beyond) and ``coeffs`` are in canonical order with no
    duplicates once :meth:`simplify` has run (constructors that merge say so).
    Instances are treated as immutable.
    """

    __slots__ = ("register", "n_qubits", "x", "z", "coeffs")

    def __init__(self, n_qubits: int, x, z, coeffs, merge: bool = True, tol: float = 0.0):
        reg = n_qubits if isinstance(n_qubits, Register) else Register(n_qubits)
        x = np.asarray(x, dtype=np.uint64)
        z = np.asarray(z, dtype=np.uint64)
        c = np.atleast_1d(np.asarray(coeffs))
        if x.ndim == 0:
            x, z = x.reshape(1), z.reshape(1)
        x, z = as_layout(x, reg), as_layout(z, reg)
        if not (x.shape == z.shape and x.shape[0] == c.shape[0]) or c.ndim != 1:
            raise ValueError("x, z and coeffs must hold the same number of terms")
        _check_top(x | z, reg)
        if merge:
            x, z, c = merge_terms(x, z, c, tol)
        else:
            c = _as_coeffs(c)
        self.register = reg
        self.n_qubits = reg.n_qubits
        self.x, self.z, self.coeffs = x, z, c

    @property
    def wide(self) -> bool:
        return self.register.wide

    # -- construction -------------------------------------------------------
    @classmethod
    def zero(cls, n_qubits: int) -> "PauliSum":
        return cls(n_qubits, np.zeros(0, np.uint64), np.zeros(0, np.uint64), np.zeros(0))

    @classmethod
    def identity(cls, n_qubits: int, coeff: complex = 1.0) -> "PauliSum":
        return cls(n_qubits, [0], [0], [coeff])

    @classmethod
    def from_int_masks(cls, n_qubits: int, xs, zs, coeffs) -> "PauliSum":
        """From Python-integer masks (any width); duplicates are summed."""
        reg = Register(n_qubits)
        return cls(reg, reg.masks(xs), reg.masks(zs), np.array(coeffs, dtype=np.complex128))

    @classmethod
    def from_terms(cls, terms: Iterable[tuple[str, complex]], n_qubits: int | None = None) -> "PauliSum":
        """From ``(label, coefficient)`` pairs; duplicates are summed."""
        xs, zs, cs, top = [], [], [], 0
        for label, coeff in terms:
            x, z, t = parse_label(label)
            xs.append(x)
            zs.append(z)
            cs.append(complex(coeff))
            top = max(top, t)
        n = top if n_qubits is None else n_qubits
        if top > n:
            raise InputError(f"a label acts on qubit {top - 1} of a {n}-qubit register", field="pauli")
        return cls.from_int_masks(n, xs, zs, cs)

    @classmethod
    def from_openfermion(cls, op, n_qubits: int | None = None) -> "PauliSum":
        """From an ``openfermion.QubitOperator`` (terms: tuples of (qubit, 'X'|'Y'|'Z'))."""
        xs, zs, cs, top = [], [], [], 0
        for term, coeff in op.terms.items():
            x = z = 0
            for q, letter in term:
                bx, bz = _BITS[letter]
                x |= bx << q
                z |= bz << q
                top = max(top, q + 1)
            xs.append(x)
            zs.append(z)
            cs.append(complex(coeff))
        return cls.from_int_masks(top if n_qubits is None else n_qubits, xs, zs, cs)

    def openfermion_terms(self) -> list[tuple]:
        """Each string as OpenFermion's term tuple ``((qubit, letter), ...)``, qubits ascending."""
        out: list[tuple] = []
        for code, r, q in _letter_rows(self.x, self.z, self.n_qubits, 100_000):
            letters = iter(zip(q.tolist(), _LETTER_CODES[code[r, q]].tolist()))
            counts = np.bincount(r, minlength=code.shape[0]).tolist()
            out.extend(tuple(next(letters) for _ in range(n)) for n in counts)
        return out

    def to_openfermion(self):
        """As an ``openfermion.QubitOperator`` (imported here: a test-side dependency)."""
        from openfermion import QubitOperator

        op = QubitOperator()
        for term, c in zip(self.openfermion_terms(), self.coeffs.tolist()):
            op.terms[term] = op.terms.get(term, 0) + c
        return op

    # -- views --------------------------------------------------------------
    def __len__(self) -> int:
        return int(self.x.shape[0])

    def __iter__(self) -> Iterator[tuple[str, complex]]:
        return iter(zip(self.labels(), self.coeffs.tolist()))

    def labels(self) -> list[str]:
        return labels_of(self.x, self.z, self.n_qubits)

    def __repr__(self) -> str:
        head = ", ".join(f"{c:.6g}*[{lab}]" for lab, c in zip(labels_of(self.x[:4], self.z[:4], self.n_qubits),
                                                              self.coeffs[:4].tolist()))
        more = f", ... ({len(self)} terms)" if len(self) > 4 else ""
        return f"PauliSum({self.n_qubits} qubits: {head}{more})"

    @property
    def is_real(self) -> bool:
        return not np.iscomplexobj(self.coeffs)

    def identity_terms(self) -> np.ndarray:
        """Boolean array: which terms are the identity string."""
        return is_zero(self.x | self.z, self.wide)

    def weights(self) -> np.ndarray:
        """Number of qubits each string acts on."""
        return weight(self.x | self.z, self.wide)

    def identity_coeff(self) -> complex | float:
        """Coefficient of the identity string (0 if absent)."""
        hit = np.flatnonzero(self.identity_terms())
        return self.coeffs[hit].sum().item() if hit.size else 0.0

    def take(self, keep) -> "PauliSum":
        """The terms selected by a boolean or index array (no merge)."""
        return PauliSum(self.register, self.x[keep], self.z[keep], self.coeffs[keep], merge=False)

    def without_identity(self) -> "PauliSum":
        return self.take(~self.identity_terms())

    def n_strings(self) -> int:
        """Pauli strings other than the identity."""
        return int(np.count_nonzero(~self.identity_terms()))

    def one_norm(self, include_identity: bool = False) -> float:
        """Sum of |c|; by default without the identity's coefficient."""
        keep = slice(None) if include_identity else ~self.identity_terms()
        return float(np.abs(self.coeffs[keep]).sum())

    def is_hermitian(self, tol: float = 1e-12) -> bool:
        """Every Pauli string is Hermitian, so the sum is iff its coefficients are real."""
        return self.is_real or float(np.max(np.abs(self.coeffs.imag), initial=0.0)) <= tol

    def real(self) -> "PauliSum":
        """The same sum with coefficients' imaginary parts dropped (use after :meth:`is_hermitian`)."""
        return PauliSum(self.register, self.x, self.z, np.real(self.coeffs), merge=False)

    def on(self, n_qubits: int) -> "PauliSum":
        """The same strings on a register of ``n_qubits`` >= the highest qubit acted on (no merge)."""
        reg = Register(n_qubits)
        return PauliSum(reg, as_layout(self.x, reg), as_layout(self.z, reg), self.coeffs, merge=False)

    # -- algebra ------------------------------------------------------------
    def simplify(self, tol: float = 1e-12) -> "PauliSum":
        """Merge duplicate strings and drop terms with |c| <= tol."""
        return PauliSum(self.register, self.x, self.z, self.coeffs, merge=True, tol=tol)

    def _aligned(self, other: "PauliSum") -> tuple["PauliSum", "PauliSum"]:
        if not isinstance(other, PauliSum):
            raise TypeError(f"cannot combine PauliSum with {type(other).__name__}")
        n = max(self.n_qubits, other.n_qubits)
        return (self if self.n_qubits == n else self.on(n)), (other if other.n_qubits == n else other.on(n))

    def __add__(self, other):
        if np.isscalar(other):
            other = PauliSum.identity(self.n_qubits, other)
        a, b = self._aligned(other)
        return PauliSum(a.register, np.concatenate([a.x, b.x]), np.concatenate([a.z, b.z]),
                        np.concatenate([a.coeffs, b.coeffs]))

    __radd__ = __add__

    def __neg__(self):
        return PauliSum(self.register, self.x, self.z, -self.coeffs, merge=False)

    def __sub__(self, other):
        return self + (-other)

    def __rsub__(self, other):
        return (-self) + other

    def scale(self, factor: complex) -> "PauliSum":
        return PauliSum(self.register, self.x, self.z, self.coeffs * factor)

    def __mul__(self, other):
        if np.isscalar(other):
            return self.scale(other)
        a, b = self._aligned(other)
        x1, z1, x2, z2 = a.x[:, None], a.z[:, None], b.x[None, :], b.z[None, :]
        k = product_phase(x1, z1, x2, z2, a.wide)
        c = a.coeffs[:, None] * b.coeffs[None, :] * i_power(k)
        tail = (a.register.n_words,) if a.wide else ()
        return PauliSum(a.register, (x1 ^ x2).reshape((-1,) + tail), (z1 ^ z2).reshape((-1,) + tail), c.ravel())

    def __rmul__(self, other):
        if np.isscalar(other):
            return self.scale(other)
        return NotImplemented

    def allclose(self, other: "PauliSum", atol: float = 1e-10) -> bool:
        """Equal within ``atol`` on every coefficient (a string absent counts as 0)."""
        return self.max_difference(other) <= atol

    def max_difference(self, other: "PauliSum") -> float:
        """Largest |c_self - c_other| over the union of strings."""
        diff = self - other
        return float(np.max(np.abs(diff.coeffs), initial=0.0))

    def commutes_with(self, x: int, z: int) -> np.ndarray:
        """Boolean array: which terms commute with sigma(x, z) (integer masks)."""
        mx, mz = self.register.masks([x, z])
        return ~anticommutes(self.x, self.z, mx, mz, self.wide)

    def remove_qubits(self, qubits: Iterable[int]) -> "PauliSum":
        """Drop qubits on which every term is the identity (raises otherwise)."""
        qubits = sorted(set(int(q) for q in qubits))
        support = self.x | self.z
        if any(np.any(bit_of(support, q, self.wide)) for q in qubits):
            raise ValueError(f"terms act on qubits {qubits} being removed")
        n = self.n_qubits
        return PauliSum(n - len(qubits), compress_bits(self.x, qubits, n), compress_bits(self.z, qubits, n),
                        self.coeffs)


def _check_top(support: np.ndarray, reg: Register) -> None:
    """ValueError if a mask sets a bit at or above ``reg.n_qubits``."""
    if support.shape[0] == 0:
        return
    n = reg.n_qubits
    if not reg.wide:
        if n < WORD_QUBITS and int(np.max(support)) >> n:
            raise ValueError(f"a mask acts beyond qubit {n - 1}")
        return
    spare = WORD_QUBITS * reg.n_words - n
    if spare and int(np.max(support[:, -1])) >> (WORD_QUBITS - spare):
        raise ValueError(f"a mask acts beyond qubit {n - 1}")
