"""Pauli sums with bit-packed X/Z masks.

Conventions
-----------
* Qubit ``q`` is bit ``q`` of an unsigned 64-bit mask (qubit 0 is the least
  significant bit), so at most :data:`MAX_QUBITS` = 64 qubits.
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

#: Largest register the uint64 masks can hold.
MAX_QUBITS = 64

_LETTERS = {(0, 0): "I", (1, 0): "X", (0, 1): "Z", (1, 1): "Y"}
_BITS = {"X": (1, 0), "Y": (1, 1), "Z": (0, 1)}

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


def parity(a) -> np.ndarray:
    """``popcount(a) & 1`` as int64."""
    return popcount(a) & 1


def product_phase(x1, z1, x2, z2) -> np.ndarray:
    """Exponent k (mod 4) of i in sigma(x1, z1) sigma(x2, z2) = i^k sigma(x1^x2, z1^z2)."""
    x3, z3 = x1 ^ x2, z1 ^ z2
    return (popcount(x1 & z1) + popcount(x2 & z2) - popcount(x3 & z3) + 2 * popcount(z1 & x2)) % 4


def anticommutes(x1, z1, x2, z2) -> np.ndarray:
    """True where sigma(x1, z1) and sigma(x2, z2) anticommute."""
    return (popcount(x1 & z2) + popcount(z1 & x2)) % 2 == 1


def qubitwise_commute(x1, z1, x2, z2) -> np.ndarray:
    """True where the strings agree (or one is I) on every qubit."""
    overlap = (x1 | z1) & (x2 | z2)
    return (((x1 ^ x2) | (z1 ^ z2)) & overlap) == 0


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
    merged coefficient is not exactly zero.
    """
    x = np.asarray(x, dtype=np.uint64)
    z = np.asarray(z, dtype=np.uint64)
    c = np.asarray(c)
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


def label_of(x: int, z: int, n_qubits: int) -> str:
    """Sparse label of sigma(x, z), e.g. ``"X0 Y1 Z3"``; ``""`` for the identity."""
    parts = []
    support = int(x) | int(z)
    for q in range(n_qubits):
        if (support >> q) & 1:
            parts.append(f"{_LETTERS[((int(x) >> q) & 1, (int(z) >> q) & 1)]}{q}")
    return " ".join(parts)


def parse_label(label: str) -> tuple[int, int, int]:
    """``"X0 Y1 Z3"`` -> (x mask, z mask, highest qubit + 1).  ``""`` or ``"I"`` is the identity."""
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
        if q >= MAX_QUBITS:
            raise InputError(f"qubit {q} in {label!r} beyond the {MAX_QUBITS}-qubit limit", field="pauli")
        if q in seen:
            raise InputError(f"qubit {q} appears twice in {label!r}", field="pauli")
        seen.add(q)
        bx, bz = _BITS[letter]
        x |= bx << q
        z |= bz << q
        top = max(top, q + 1)
    return x, z, top


def compress_bits(masks: np.ndarray, removed: Iterable[int]) -> np.ndarray:
    """Delete bit positions ``removed`` from each mask, shifting higher bits down."""
    out = np.asarray(masks, dtype=np.uint64).copy()
    for q in sorted(set(int(r) for r in removed), reverse=True):
        low = np.uint64((1 << q) - 1)
        out = (out & low) | ((out >> np.uint64(q + 1)) << np.uint64(q))
    return out


def expand_bits(masks: np.ndarray, inserted: Iterable[int]) -> np.ndarray:
    """Inverse of :func:`compress_bits`: insert zero bits so that they sit at
    positions ``inserted`` of the result."""
    out = np.asarray(masks, dtype=np.uint64).copy()
    for q in sorted(set(int(r) for r in inserted)):
        low = np.uint64((1 << q) - 1)
        out = (out & low) | ((out & ~low) << np.uint64(1))
    return out


class PauliSum:
    """A linear combination of Pauli strings on ``n_qubits`` qubits.

    Arrays ``x``, ``z`` (uint64 masks) and ``coeffs`` are in canonical order
    with no duplicates once :meth:`simplify` has run (constructors that merge
    say so).  Instances are treated as immutable.
    """

    __slots__ = ("n_qubits", "x", "z", "coeffs")

    def __init__(self, n_qubits: int, x, z, coeffs, merge: bool = True, tol: float = 0.0):
        if not 0 <= n_qubits <= MAX_QUBITS:
            raise InputError(f"{n_qubits} qubits: the Pauli masks hold at most {MAX_QUBITS}",
                             field="n_qubits")
        x = np.atleast_1d(np.asarray(x, dtype=np.uint64))
        z = np.atleast_1d(np.asarray(z, dtype=np.uint64))
        c = np.atleast_1d(np.asarray(coeffs))
        if not (x.shape == z.shape == c.shape) or x.ndim != 1:
            raise ValueError("x, z and coeffs must be 1-d arrays of equal length")
        if x.size and n_qubits < 64 and int(np.max(x | z)) >> n_qubits:
            raise ValueError(f"a mask acts beyond qubit {n_qubits - 1}")
        if merge:
            x, z, c = merge_terms(x, z, c, tol)
        else:
            c = _as_coeffs(c)
        self.n_qubits = int(n_qubits)
        self.x, self.z, self.coeffs = x, z, c

    # -- construction -------------------------------------------------------
    @classmethod
    def zero(cls, n_qubits: int) -> "PauliSum":
        return cls(n_qubits, [], [], np.zeros(0))

    @classmethod
    def identity(cls, n_qubits: int, coeff: complex = 1.0) -> "PauliSum":
        return cls(n_qubits, [0], [0], [coeff])

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
        return cls(n, np.array(xs, dtype=np.uint64), np.array(zs, dtype=np.uint64),
                   np.array(cs, dtype=np.complex128))

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
        n = top if n_qubits is None else n_qubits
        return cls(n, np.array(xs, dtype=np.uint64), np.array(zs, dtype=np.uint64),
                   np.array(cs, dtype=np.complex128))

    def to_openfermion(self):
        """As an ``openfermion.QubitOperator`` (imported here: a test-side dependency)."""
        from openfermion import QubitOperator

        op = QubitOperator()
        for x, z, c in zip(self.x.tolist(), self.z.tolist(), self.coeffs.tolist()):
            term = tuple((q, _LETTERS[((x >> q) & 1, (z >> q) & 1)]) for q in range(self.n_qubits)
                         if ((x | z) >> q) & 1)
            op.terms[term] = op.terms.get(term, 0) + c
        return op

    # -- views --------------------------------------------------------------
    def __len__(self) -> int:
        return int(self.x.size)

    def __iter__(self) -> Iterator[tuple[str, complex]]:
        for x, z, c in zip(self.x.tolist(), self.z.tolist(), self.coeffs.tolist()):
            yield label_of(x, z, self.n_qubits), c

    def labels(self) -> list[str]:
        return [label for label, _ in self]

    def __repr__(self) -> str:
        head = ", ".join(f"{c:.6g}*[{lab}]" for lab, c in list(self)[:4])
        more = f", ... ({len(self)} terms)" if len(self) > 4 else ""
        return f"PauliSum({self.n_qubits} qubits: {head}{more})"

    @property
    def is_real(self) -> bool:
        return not np.iscomplexobj(self.coeffs)

    def identity_coeff(self) -> complex | float:
        """Coefficient of the identity string (0 if absent)."""
        hit = np.flatnonzero((self.x == 0) & (self.z == 0))
        return self.coeffs[hit].sum().item() if hit.size else 0.0

    def without_identity(self) -> "PauliSum":
        keep = (self.x != 0) | (self.z != 0)
        return PauliSum(self.n_qubits, self.x[keep], self.z[keep], self.coeffs[keep], merge=False)

    def one_norm(self, include_identity: bool = False) -> float:
        """Sum of |c|; by default without the identity's coefficient."""
        keep = slice(None) if include_identity else (self.x != 0) | (self.z != 0)
        return float(np.abs(self.coeffs[keep]).sum())

    def is_hermitian(self, tol: float = 1e-12) -> bool:
        """Every Pauli string is Hermitian, so the sum is iff its coefficients are real."""
        return self.is_real or float(np.max(np.abs(self.coeffs.imag), initial=0.0)) <= tol

    def real(self) -> "PauliSum":
        """The same sum with coefficients' imaginary parts dropped (use after :meth:`is_hermitian`)."""
        return PauliSum(self.n_qubits, self.x, self.z, np.real(self.coeffs), merge=False)

    # -- algebra ------------------------------------------------------------
    def simplify(self, tol: float = 1e-12) -> "PauliSum":
        """Merge duplicate strings and drop terms with |c| <= tol."""
        return PauliSum(self.n_qubits, self.x, self.z, self.coeffs, merge=True, tol=tol)

    def _check_width(self, other: "PauliSum") -> int:
        if not isinstance(other, PauliSum):
            raise TypeError(f"cannot combine PauliSum with {type(other).__name__}")
        return max(self.n_qubits, other.n_qubits)

    def __add__(self, other):
        if np.isscalar(other):
            other = PauliSum.identity(self.n_qubits, other)
        n = self._check_width(other)
        return PauliSum(n, np.concatenate([self.x, other.x]), np.concatenate([self.z, other.z]),
                        np.concatenate([self.coeffs, other.coeffs]))

    __radd__ = __add__

    def __neg__(self):
        return PauliSum(self.n_qubits, self.x, self.z, -self.coeffs, merge=False)

    def __sub__(self, other):
        return self + (-other)

    def __rsub__(self, other):
        return (-self) + other

    def scale(self, factor: complex) -> "PauliSum":
        return PauliSum(self.n_qubits, self.x, self.z, self.coeffs * factor)

    def __mul__(self, other):
        if np.isscalar(other):
            return self.scale(other)
        n = self._check_width(other)
        x1, z1 = self.x[:, None], self.z[:, None]
        x2, z2 = other.x[None, :], other.z[None, :]
        k = product_phase(x1, z1, x2, z2)
        c = self.coeffs[:, None] * other.coeffs[None, :] * i_power(k)
        return PauliSum(n, (x1 ^ x2).ravel(), (z1 ^ z2).ravel(), c.ravel())

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
        """Boolean array: which terms commute with sigma(x, z)."""
        return ~anticommutes(self.x, self.z, np.uint64(x), np.uint64(z))

    def remove_qubits(self, qubits: Iterable[int]) -> "PauliSum":
        """Drop qubits on which every term is the identity (raises otherwise)."""
        qubits = sorted(set(int(q) for q in qubits))
        mask = np.uint64(sum(1 << q for q in qubits))
        if np.any((self.x | self.z) & mask):
            raise ValueError(f"terms act on qubits {qubits} being removed")
        return PauliSum(self.n_qubits - len(qubits), compress_bits(self.x, qubits),
                        compress_bits(self.z, qubits), self.coeffs)
