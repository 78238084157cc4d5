"""Build the :class:`~benchsuite.methods.base.QubitProblem` of a (case, basis,
encoding) and its primary reference, both in the same orbital space."""

from __future__ import annotations

import time
from dataclasses import dataclass

from benchsuite.chem.cache import DiskCache
from benchsuite.chem.ladder import DEFAULT_MAX_DETERMINANTS, Ladder, reference_ladder
from benchsuite.chem.space import prepare
from benchsuite.errors import InputError
from benchsuite.methods.base import QubitProblem
from benchsuite.qubit.encodings import DROP_LABEL, LEGACY_DROP_LABEL, check_register
from benchsuite.qubit.hamiltonian import (
    QubitHamiltonian,
    drop_spin_parity_qubits,
    encode_integrals,
)
from benchsuite.qubit.register import Register
from benchsuite.registry.case import Basis, Case


@dataclass(frozen=True)
class Encoding:
    """How the problem is put on qubits.

    ``drop_spin_parity_qubits`` (parity encoding, blocked ordering): remove the two qubits holding
    the N_alpha and N parities (Bravyi, Gambetta, Mezzacapo & Temme, arXiv:1701.08213 (2017)).
    ``label`` reads ``name[+sp-dropped][+tapered]/ordering``.
    """

    name: str = "jordan-wigner"
    ordering: str = "interleaved"
    taper: bool = False
    drop_spin_parity_qubits: bool = False

    def check(self) -> "Encoding":
        check_register(self.name, self.ordering, self.drop_spin_parity_qubits)
        return self

    @property
    def label(self) -> str:
        extra = ([DROP_LABEL] if self.drop_spin_parity_qubits else []) + (["tapered"] if self.taper else [])
        return "+".join([self.name] + extra) + f"/{self.ordering}"

    @classmethod
    def from_label(cls, label: str) -> "Encoding":
        """The encoding of a stored label (the current form or the one written before the rename)."""
        name_part, _, ordering = label.partition("/")
        name, *extras = name_part.split("+")
        dropped = DROP_LABEL in extras or LEGACY_DROP_LABEL in extras
        return cls(name, ordering or "interleaved", "tapered" in extras, dropped)

    @classmethod
    def from_fields(cls, doc: dict) -> "Encoding":
        """The encoding of stored settings fields (``two_qubit_reduction`` read as the old name)."""
        doc = dict(doc)
        if "two_qubit_reduction" in doc:
            doc["drop_spin_parity_qubits"] = bool(doc.pop("two_qubit_reduction"))
        return cls(**{k: v for k, v in doc.items() if k in cls.__dataclass_fields__})


def encode(ints, enc: Encoding, taper_sector: str = "hf", max_qubits: int | None = None) -> QubitHamiltonian:
    """The encoded Hamiltonian with the requested reductions applied in order (tapering in the
    Hartree-Fock state's Z2 sector, or with ``taper_sector="lowest"`` the one holding the lowest
    (N, S_z) state, found by exact diagonalisation up to ``max_qubits``)."""
    return encode_timed(ints, enc, taper_sector, max_qubits)[1]


def encode_timed(ints, enc: Encoding, taper_sector: str = "hf", max_qubits: int | None = None):
    """``(unreduced, reduced, encoding seconds, reduction seconds)``: the encoded Hamiltonian before
    and after the reductions, with the time of the encoding step alone and of the reductions."""
    from benchsuite.qubit.tapering import taper

    t0 = time.perf_counter()
    full = encode_integrals(ints, enc.name, enc.ordering)
    t1 = time.perf_counter()
    ham = full
    if enc.drop_spin_parity_qubits:
        ham = drop_spin_parity_qubits(ham)
    if enc.taper:
        ham = taper(ham, taper_sector, max_qubits=max_qubits)
    return full, ham, t1 - t0, time.perf_counter() - t1


@dataclass
class EncodedCase:
    """One case on qubits, as :func:`encode_case` builds it for the methods and ``hamiltonian``.

    ``full`` is the encoded Hamiltonian before reductions, ``hamiltonian`` after them;
    ``build_seconds`` times the encoding step alone (integrals excluded), ``reduction_seconds`` the
    reductions.  ``scf`` and ``space`` are the SCF summary and orbital space of the integrals.
    """

    prep: object
    integrals: object
    scf: object
    space: object
    full: QubitHamiltonian
    hamiltonian: QubitHamiltonian
    build_seconds: float
    reduction_seconds: float


def check_case_register(case: Case, basis: Basis | str | None, enc: Encoding):
    """The checks every build makes before any SCF: register, orbital space, the register width
    (:class:`~benchsuite.qubit.register.Register`; any width up to its bound, methods that hold a
    state refuse wider ones themselves).  Returns the prepared case (:func:`benchsuite.chem.space.prepare`)."""
    enc.check()
    prep = prepare(case, basis)
    try:
        Register(2 * prep.space.n_orbitals)
    except InputError as exc:
        raise InputError(exc.detail, case.path, "basis") from None
    return prep


def encode_case(case: Case, prep, enc: Encoding, cache: DiskCache | None = None, taper_sector: str = "hf",
                max_qubits: int | None = None) -> EncodedCase:
    """Integrals of a checked case (``prep`` from :func:`check_case_register`) and its encoded
    Hamiltonian, before and after the reductions of ``enc``."""
    from benchsuite.chem import space as chem_space

    ints, scf, space = chem_space.case_integrals(case, prep.basis, cache=cache, prep=prep)
    full, ham, build_s, reduce_s = encode_timed(ints, enc, taper_sector, max_qubits)
    return EncodedCase(prep, ints, scf, space, full, ham, build_s, reduce_s)


@dataclass
class PreparedProblem:
    problem: QubitProblem
    ladder: Ladder
    encoding: Encoding

    @property
    def reference(self):
        """The primary rung (FCI or CASCI), or None if it was skipped."""
        rung = self.ladder.primary
        return rung if rung is not None and rung.status == "ok" else None


def build_problem(case: Case, basis: Basis | str | None = None, enc: Encoding = Encoding(),
                  cache: DiskCache | None = None, seed: int = 0, time_budget_s: float | None = None,
                  max_determinants: int = DEFAULT_MAX_DETERMINANTS) -> PreparedProblem:
    """Integrals, reference ladder and encoded Hamiltonian of one case, validated first."""
    prep = check_case_register(case, basis, enc)
    ladder = reference_ladder(case, prep.basis, cache=cache, max_determinants=max_determinants, prep=prep)
    built = encode_case(case, prep, enc, cache)
    problem = QubitProblem(case=case.name, basis=prep.basis.label, space=built.space.label,
                           hamiltonian=built.hamiltonian, integrals=built.integrals,
                           multiplicity=case.multiplicity, seed=seed, time_budget_s=time_budget_s)
    return PreparedProblem(problem=problem, ladder=ladder, encoding=enc)
