"""The qubit register: its width, how its bit masks are laid out, and who may hold a state on it.

One :class:`Register` is made (and validated) wherever a qubit count enters
(:class:`~benchsuite.qubit.pauli.PauliSum`, the encodings, the Hamiltonian
build, the problem a method sees); every limit on the width is asked of it.

Mask layout
-----------
Qubit ``q`` is bit ``q`` of a mask.  A register of at most
:data:`WORD_QUBITS` = 64 qubits ("narrow") keeps one ``uint64`` per mask, so an
array of k masks has shape ``(k,)`` -- the single-word fast path every code
that holds a state relies on.  A wider register keeps ``n_words = ceil(n / 64)``
words per mask, shape ``(k, n_words)``: word ``w`` holds qubits
``64 w .. 64 w + 63``, qubit ``q`` at bit ``q % 64`` of word ``q // 64``
(little-endian words).  As a Python integer a mask is
``sum(word[w] << 64 w)`` in both layouts.

Limits
------
* :data:`MAX_REGISTER_QUBITS`: the widest register accepted at all (a bound
  on input, so that a mistyped count ends in exit code 2, not in memory
  exhaustion).  Pauli sums, encodings, metrics and exports take any width up
  to it.
* Code that holds a state (a state vector, a determinant list with one-word
  masks) states its own limit with :meth:`Register.require`; a register
  over it is refused with :class:`RegisterTooWide`, an
  :class:`~benchsuite.errors.InputError` whose text is the one-line reason.
  The runner records a refused method as status ``error`` with that reason
  and no traceback.
"""

from __future__ import annotations

import operator
from dataclasses import dataclass

import numpy as np

from benchsuite.errors import InputError, Refused

#: Qubits in one mask word (uint64).
WORD_QUBITS = 64

#: Widest register accepted anywhere (2048 spin-orbitals; no Hamiltonian of that width is built in
#: memory today: its ~n^4 / 8 strings would not fit).
MAX_REGISTER_QUBITS = 4096


class RegisterTooWide(Refused):
    """A register wider than the code asked to hold it can take; ``str()`` is the reason."""


@dataclass(frozen=True)
class Register:
    """``n_qubits`` qubits, validated once (a non-negative integer up to :data:`MAX_REGISTER_QUBITS`)."""

    n_qubits: int

    def __post_init__(self):
        try:
            n = operator.index(self.n_qubits)
        except TypeError:
            raise InputError(f"qubit count {self.n_qubits!r} is not an integer", field="n_qubits") from None
        if not 0 <= n <= MAX_REGISTER_QUBITS:
            raise InputError(f"{n} qubits: a register holds 0 to {MAX_REGISTER_QUBITS}", field="n_qubits")
        object.__setattr__(self, "n_qubits", int(n))

    @property
    def n_words(self) -> int:
        """uint64 words per mask (1 for a narrow register)."""
        return max(1, -(-self.n_qubits // WORD_QUBITS))

    @property
    def wide(self) -> bool:
        """More than one word per mask: masks are ``(k, n_words)`` arrays."""
        return self.n_qubits > WORD_QUBITS

    def require(self, limit: int, holder: str, why: str = "") -> None:
        """Refuse (:class:`RegisterTooWide`) if this register is wider than ``limit`` qubits for ``holder``."""
        if self.n_qubits > limit:
            reason = f" ({why})" if why else ""
            raise RegisterTooWide(f"{holder} refused: the register has {self.n_qubits} qubits, more than its "
                                  f"limit of {limit}{reason}", field="n_qubits")

    def require_single_word(self, holder: str) -> None:
        """Refuse registers whose masks need more than one 64-bit word (state-holding code)."""
        self.require(WORD_QUBITS, holder, "its basis states are single 64-bit words")

    # -- masks ----------------------------------------------------------------
    def empty_masks(self, k: int) -> np.ndarray:
        """``k`` zero masks in this register's layout."""
        return np.zeros((k, self.n_words) if self.wide else k, dtype=np.uint64)

    def masks(self, values) -> np.ndarray:
        """Python integers (bit q = qubit q) as masks in this register's layout."""
        values = [int(v) for v in values]
        if not self.wide:
            return np.array(values, dtype=np.uint64).reshape(len(values))
        return ints_to_words(values, self.n_words)

    def ints(self, masks) -> list[int]:
        """Masks in this register's layout as Python integers."""
        masks = np.asarray(masks, dtype=np.uint64)
        if not self.wide:
            return [int(v) for v in masks.reshape(-1).tolist()]
        return words_to_ints(masks)

    def qubit_mask(self, qubits) -> np.ndarray:
        """One mask (shape ``()`` narrow, ``(n_words,)`` wide) with the given qubits set."""
        value = 0
        for q in qubits:
            value |= 1 << int(q)
        return self.masks([value])[0]


def ints_to_words(values, n_words: int) -> np.ndarray:
    """Python integers -> ``(k, n_words)`` uint64 words, word w = bits 64w .. 64w+63."""
    word = (1 << WORD_QUBITS) - 1
    obj = np.array([int(v) for v in values] + [0], dtype=object)[:-1]
    out = np.empty((obj.size, n_words), dtype=np.uint64)
    for w in range(n_words):
        out[:, w] = ((obj >> (WORD_QUBITS * w)) & word).astype(np.uint64) if obj.size else 0
    return out


def words_to_ints(masks: np.ndarray) -> list[int]:
    """``(k, n_words)`` uint64 words -> Python integers."""
    masks = np.asarray(masks, dtype=np.uint64)
    total = np.zeros(masks.shape[0], dtype=object)
    for w in range(masks.shape[1]):
        total = total + (masks[:, w].astype(object) << (WORD_QUBITS * w))
    return [int(v) for v in total]
