"""Qubit Hamiltonians built from MO integrals, with their conventions on record.

A :class:`QubitHamiltonian` is a :class:`~benchsuite.qubit.pauli.PauliSum`
(hartree; the identity coefficient is the constant: nuclear repulsion +
frozen-core energy + the identity part of the encoded electronic operator)
plus everything needed to interpret it: the encoding, the spin-orbital
ordering, the electron counts of the SCF reference and the qubit reductions
applied, in order.  Occupation-number states map to its computational basis
through :meth:`QubitHamiltonian.encode_states`, which is how the Hartree-Fock
bitstring and the exact sector solver find their basis states.

Bitstrings are written qubit 0 first: character q of ``hf_bitstring`` is the
value of qubit q (the integer ``hf_state`` has it as bit q).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from benchsuite.chem.integrals import MOIntegrals
from benchsuite.errors import InputError
from benchsuite.qubit.encodings import (
    MajoranaTable,
    check_encoding,
    check_ordering,
    encode_occupations,
    majorana_table,
    occupation_masks,
)
from benchsuite.qubit.majorana import (
    DROP_TOLERANCE,
    drop_small,
    spin_free_pauli,
    spin_square_pauli,
)
from benchsuite.qubit.pauli import (
    PauliSum,
    bit_of,
    compress_bits,
    expand_bits,
    i_power,
    is_zero,
    parity,
    product_phase,
    with_bit,
)
from benchsuite.qubit.register import Register

SPIN_PARITY_DROP = "spin-parity-qubits-dropped"
DROP_TOLERANCE_RULE = ("Pauli strings with |c| <= drop_tolerance dropped after merging; drop_tolerance = the SCF "
                       "energy convergence threshold (1e-10 Eh by default); dropped_one_norm_ha = their summed "
                       "|c| at the build, a bound on the energy shift")
Z2_TAPERING = "z2-tapering"


@dataclass(frozen=True)
class Reduction:
    """One step that removed qubits by fixing Z-type symmetries to eigenvalues.

    ``generators[i]`` is a Z-string mask (qubit numbering before this step)
    whose eigenvalue on the kept states is ``eigenvalues[i]`` (+1 or -1);
    ``qubits[i]`` is the qubit it removes: set in ``generators[i]`` and in no
    other generator.  With ``clifford`` the operator is first rotated by
    U = prod_i (X_{q_i} + Z^{t_i})/sqrt(2) (Bravyi, Gambetta, Mezzacapo &
    Temme, arXiv:1701.08213 (2017)), which turns Z^{t_i} into X_{q_i}; then
    X_{q_i} is replaced by its eigenvalue.  Without it the generator is the
    single-qubit Z_{q_i} itself and Z_{q_i} is replaced (the parity
    encoding with its spin-parity qubits dropped).  A basis state |b> of the symmetry
    sector maps to the reduced basis state b with the removed bits deleted
    (with the Clifford, U|b> = +-|b_reduced> (x) |X eigenstates>).
    """

    kind: str
    n_qubits_before: int
    generators: tuple[int, ...]
    qubits: tuple[int, ...]
    eigenvalues: tuple[int, ...]
    clifford: bool

    @property
    def n_removed(self) -> int:
        return len(self.qubits)

    @property
    def register(self) -> Register:
        return Register(self.n_qubits_before)

    def _generator_masks(self) -> np.ndarray:
        return self.register.masks(self.generators)

    def keep_states(self, states: np.ndarray) -> np.ndarray:
        """Boolean mask of basis states (masks of the register before this step) in this step's sector."""
        wide = self.register.wide
        keep = np.ones(states.shape[:1] if wide else states.shape, dtype=bool)
        for g, s in zip(self._generator_masks(), self.eigenvalues):
            keep &= (1 - 2 * parity(states & g, wide)) == s
        return keep

    def reduce_states(self, states: np.ndarray) -> np.ndarray:
        return compress_bits(states, self.qubits, self.n_qubits_before)

    def apply(self, op: PauliSum, tol: float = DROP_TOLERANCE) -> PauliSum:
        """The operator restricted to this sector, on the remaining qubits.

        Raises ``ValueError`` if ``op`` does not commute with every generator.
        """
        if op.n_qubits != self.n_qubits_before:
            raise ValueError(f"operator on {op.n_qubits} qubits, reduction expects {self.n_qubits_before}")
        wide = op.wide
        x, z, c = op.x.copy(), op.z.copy(), op.coeffs.astype(np.complex128)
        gens = self._generator_masks()
        for g in gens:
            if np.any(parity(x & g, wide)):
                raise ValueError("operator does not commute with the symmetry being fixed")
        if self.clifford:
            zero = self.register.masks([0])[0]
            for g, q in zip(gens, self.qubits):
                xq = self.register.qubit_mask([q])
                hit = bit_of(z, q, wide)
                # U_i P U_i = -P X_q Z^t for P anticommuting with X_q (P commutes with Z^t).
                xh, zh = x[hit], z[hit]
                k1 = product_phase(xh, zh, xq, zero, wide)
                x1 = xh ^ xq
                k2 = product_phase(x1, zh, zero, g, wide)
                x[hit], z[hit] = x1, zh ^ g
                c[hit] = -c[hit] * i_power(k1 + k2)
        x, z, c = self._fix_removed(x, z, c, wide)
        n_before = self.n_qubits_before
        return PauliSum(n_before - len(self.qubits), compress_bits(x, self.qubits, n_before),
                        compress_bits(z, self.qubits, n_before), c, merge=True, tol=tol)

    def _fix_removed(self, x, z, c, wide: bool):
        """Replace the fixed Pauli (X after the Clifford, else Z) on each removed qubit by its eigenvalue."""
        fixed_x = self.clifford
        for q, s in zip(self.qubits, self.eigenvalues):
            on = bit_of(x if fixed_x else z, q, wide)
            if np.any(bit_of(z if fixed_x else x, q, wide)):
                raise ValueError(f"operator is not diagonal in the fixed Pauli on qubit {q}")
            c = np.where(on, c * s, c)
            if fixed_x:
                x = with_bit(x, q, on, wide)
            else:
                z = with_bit(z, q, on, wide)
        return x, z, c

    def lift(self, op: PauliSum) -> PauliSum:
        """Terms of a reduced operator written on the register before this step.

        sigma(x, z) on the reduced qubits becomes sigma(x', z') with zero bits
        inserted at the removed qubits, plus a flip of removed qubit q_i where
        |t_i & x'| is odd, so that b -> b ^ x' stays in the symmetry sector.
        On sector states |b>, <b ^ x'| sigma(x', z') |b> equals the reduced
        element <b_R ^ x| sigma(x, z) |b_R>: the lift relabels terms, it does
        not undo the reduction.
        """
        n = self.n_qubits_before
        wide = self.register.wide
        x = expand_bits(op.x, self.qubits, n)
        z = expand_bits(op.z, self.qubits, n)
        for g, q in zip(self._generator_masks(), self.qubits):
            x = with_bit(x, q, parity(x & g, wide).astype(bool), wide)
        return PauliSum(n, x, z, op.coeffs, merge=False)

    def labels(self) -> list[str]:
        return [" ".join(f"Z{q}" for q in range(self.n_qubits_before) if (g >> q) & 1)
                for g in self.generators]

    def as_dict(self) -> dict:
        return {"kind": self.kind, "n_qubits_before": self.n_qubits_before,
                "n_qubits_after": self.n_qubits_before - len(self.qubits),
                "generators": self.labels(), "removed_qubits": list(self.qubits),
                "eigenvalues": list(self.eigenvalues), "clifford": self.clifford}


@dataclass(frozen=True)
class QubitHamiltonian:
    """An encoded molecular Hamiltonian and its conventions.

    ``n_alpha``/``n_beta`` are the SCF reference's active electrons (the
    reference occupies the lowest ``n_beta`` orbitals doubly and the next
    ``n_alpha - n_beta`` with alpha spin).  ``reductions`` are applied in
    order to the full register of ``2 * n_orbitals`` qubits.  ``tolerance`` is the
    drop tolerance (hartree) of the build and of every reduction;
    ``dropped_one_norm_ha`` the summed |c| of the strings the build dropped.
    """

    pauli: PauliSum
    encoding: str
    ordering: str
    n_orbitals: int
    n_alpha: int
    n_beta: int
    reductions: tuple[Reduction, ...] = ()
    tolerance: float = DROP_TOLERANCE
    notes: tuple[str, ...] = field(default=(), compare=False)
    dropped_one_norm_ha: float = field(default=0.0, compare=False)

    @property
    def n_qubits(self) -> int:
        return self.pauli.n_qubits

    @property
    def n_modes(self) -> int:
        return 2 * self.n_orbitals

    @property
    def n_electrons(self) -> int:
        return self.n_alpha + self.n_beta

    @property
    def constant_ha(self) -> float:
        return float(np.real(self.pauli.identity_coeff()))

    @property
    def table(self) -> MajoranaTable:
        return majorana_table(self.encoding, self.n_modes)

    # -- states ---------------------------------------------------------------
    def encode_states(self, alpha_strings, beta_strings) -> tuple[np.ndarray, np.ndarray]:
        """Basis states of this register for occupation strings.

        Bit p of ``alpha_strings[i]`` says spatial orbital p holds an alpha
        electron.  Returns ``(keep, states)``: which inputs lie in the sector
        of every reduction, and the basis-state integers of those.
        """
        occ = occupation_masks(alpha_strings, beta_strings, self.n_orbitals, self.ordering)
        states = encode_occupations(occ, self.table)
        keep = np.ones(states.shape[0], dtype=bool)
        for red in self.reductions:
            inside = red.keep_states(states)
            keep_idx = np.flatnonzero(keep)
            keep[keep_idx[~inside]] = False
            states = red.reduce_states(states[inside])
        return keep, states

    def hf_state(self) -> int:
        """Basis state (Python integer, bit q = qubit q) of the SCF reference determinant.

        Raises ``ValueError`` if a reduction fixed a sector that excludes it.
        """
        if self.n_alpha > 64:
            raise ValueError(f"{self.n_alpha} alpha electrons: occupation strings hold at most 64")
        a = np.array([(1 << self.n_alpha) - 1], dtype=np.uint64)
        b = np.array([(1 << self.n_beta) - 1], dtype=np.uint64)
        keep, states = self.encode_states(a, b)
        if not keep[0]:
            raise ValueError("the reference determinant lies outside this Hamiltonian's symmetry sector")
        return self.pauli.register.ints(states[:1])[0]

    def hf_bitstring(self) -> str:
        """The reference state as '0'/'1' characters, qubit 0 first."""
        return bitstring(self.hf_state(), self.n_qubits)

    def basis_state_energy(self, states) -> np.ndarray | float:
        """<b|H|b> (hartree) of computational basis states (integers or bitstrings)."""
        return diagonal_energy(self.pauli, states)

    # -- operators ------------------------------------------------------------
    def transform(self, op_full: PauliSum) -> PauliSum:
        """Apply this Hamiltonian's reductions to another operator of the full register."""
        for red in self.reductions:
            op_full = red.apply(op_full, self.tolerance)
        return op_full

    def spin_square(self) -> PauliSum:
        """S^2 in this encoding, ordering and reduced register (ValueError if a
        tapered symmetry does not commute with S^2)."""
        return self.transform(spin_square_pauli(self.n_orbitals, self.ordering, self.table, self.tolerance))

    def lift(self, op: PauliSum) -> PauliSum:
        """A reduced-register operator relabelled onto the full register (see :meth:`Reduction.lift`)."""
        for red in reversed(self.reductions):
            op = red.lift(op)
        return op

    def without_constant(self) -> PauliSum:
        return self.pauli.without_identity()

    def conventions(self) -> dict:
        """What every output records about how this Hamiltonian was made."""
        return {
            "encoding": self.encoding,
            "ordering": self.ordering,
            "ordering_meaning": ("mode 2p = orbital p alpha, 2p+1 = orbital p beta" if self.ordering == "interleaved"
                                 else f"modes 0..{self.n_orbitals - 1} alpha, {self.n_orbitals}.."
                                      f"{2 * self.n_orbitals - 1} beta"),
            "operator_convention": "a+_p a_q ordering; a+_j |n> = (-1)^(n_0+...+n_{j-1}) |n + e_j>",
            "integrals": "chemists' (pq|rs), restricted real orbitals, frozen core in the constant",
            "qubit_order": "qubit q = bit q of a basis-state integer; bitstrings qubit 0 first",
            "label_format": "sparse, e.g. 'X0 Y1 Z3'; identity in constant_ha",
            "units": "hartree",
            "drop_tolerance": self.tolerance,
            "drop_tolerance_rule": DROP_TOLERANCE_RULE,
            "dropped_one_norm_ha": self.dropped_one_norm_ha,
            "reductions": [r.as_dict() for r in self.reductions],
        }


def bitstring(state: int, n_qubits: int) -> str:
    return "".join(str((int(state) >> q) & 1) for q in range(n_qubits))


def _as_states(states, register: Register) -> np.ndarray:
    if isinstance(states, str):
        states = [states]
    arr = list(states) if not isinstance(states, (int, np.integer)) else [states]
    out = []
    for s in arr:
        if isinstance(s, str):
            out.append(sum(1 << q for q, ch in enumerate(s) if ch == "1"))
        else:
            out.append(int(s))
    return register.masks(out)


def diagonal_energy(pauli: PauliSum, states):
    """<b|P|b> summed over the diagonal (X-free) terms, for each basis state b.

    Accepts an integer, a bitstring (qubit 0 first) or a sequence of either;
    returns a float for a single state.
    """
    single = isinstance(states, (int, np.integer, str))
    wide = pauli.wide
    b = _as_states(states, pauli.register)
    diag = is_zero(pauli.x, wide)
    z, c = pauli.z[diag], pauli.coeffs[diag]
    if wide:
        signs = np.stack([1 - 2 * parity(z & row, True) for row in b])
    else:
        signs = 1 - 2 * parity(z[None, :] & b[:, None])
    e = np.real(signs @ c)
    return float(e[0]) if single else e


def encode_integrals(mo: MOIntegrals, encoding: str = "jordan-wigner", ordering: str = "interleaved",
                     tol: float = DROP_TOLERANCE) -> QubitHamiltonian:
    """The active-space Hamiltonian of ``mo`` as a Pauli sum (no reductions).

    Built directly from the integrals through Majorana monomials
    (:func:`benchsuite.qubit.majorana.spin_free_pauli`), never through a
    fermion-operator object.  2 * n_orbitals qubits, any width the register accepts
    (:class:`~benchsuite.qubit.register.Register`).
    """
    check_encoding(encoding)
    check_ordering(ordering)
    table = majorana_table(encoding, Register(2 * mo.n_orbitals).n_qubits)
    full = spin_free_pauli(mo.h1_ha, mo.eri_ha, mo.constant_ha, table, ordering, tol=0.0)
    pauli, dropped = drop_small(full, tol)
    return QubitHamiltonian(pauli=pauli, encoding=encoding, ordering=ordering, n_orbitals=mo.n_orbitals,
                            n_alpha=mo.n_alpha, n_beta=mo.n_beta, tolerance=tol, dropped_one_norm_ha=dropped)


def drop_spin_parity_qubits(ham: QubitHamiltonian) -> QubitHamiltonian:
    """Remove the two qubits that hold N_alpha and N parities in the parity encoding.

    With blocked ordering, parity qubit n-1 holds (N_alpha mod 2) and qubit
    2n-1 holds (N mod 2); the Hamiltonian acts on them only through Z, which
    is replaced by (-1)^{N_alpha} and (-1)^N of the reference (Bravyi,
    Gambetta, Mezzacapo & Temme, arXiv:1701.08213 (2017), sec. on the parity
    mapping).  Needs the parity encoding, blocked ordering and no earlier
    reduction.
    """
    if ham.encoding != "parity":
        raise InputError(f"dropping the spin-parity qubits needs the parity encoding, not {ham.encoding}",
                         field="--drop-spin-parity-qubits")
    if ham.ordering != "blocked":
        raise InputError("dropping the spin-parity qubits needs blocked spin-orbital ordering "
                         "(all alpha, then all beta); use --ordering blocked", field="--drop-spin-parity-qubits")
    if ham.reductions:
        raise InputError("dropping the spin-parity qubits must come before any other reduction",
                         field="--drop-spin-parity-qubits")
    n = ham.n_orbitals
    red = Reduction(kind=SPIN_PARITY_DROP, n_qubits_before=ham.n_qubits,
                    generators=(1 << (n - 1), 1 << (2 * n - 1)), qubits=(n - 1, 2 * n - 1),
                    eigenvalues=((-1) ** ham.n_alpha, (-1) ** ham.n_electrons), clifford=False)
    return replace(ham, pauli=red.apply(ham.pauli, ham.tolerance), reductions=ham.reductions + (red,))
