"""Build the :class:`~benchsuite.methods.base.QubitProblem` of a (case, basis,
encoding) and its primary reference, both in the same orbital space."""

from __future__ import annotations

from dataclasses import dataclass

from benchsuite.chem.cache import DiskCache
from benchsuite.chem.ladder import DEFAULT_MAX_DETERMINANTS, Ladder, reference_ladder
from benchsuite.chem.space import case_integrals, prepare
from benchsuite.errors import InputError
from benchsuite.methods.base import QubitProblem
from benchsuite.qubit.encodings import check_register
from benchsuite.qubit.hamiltonian import QubitHamiltonian, encode_integrals, two_qubit_reduction
from benchsuite.qubit.pauli import MAX_QUBITS
from benchsuite.registry.case import Basis, Case


@dataclass(frozen=True)
class Encoding:
    """How the problem is put on qubits."""

    name: str = "jordan-wigner"
    ordering: str = "interleaved"
    taper: bool = False
    two_qubit_reduction: bool = False

    def check(self) -> "Encoding":
        check_register(self.name, self.ordering, self.two_qubit_reduction)
        return self

    @property
    def label(self) -> str:
        extra = (["2qr"] if self.two_qubit_reduction else []) + (["tapered"] if self.taper else [])
        return "+".join([self.name] + extra) + f"/{self.ordering}"


def encode(ints, enc: Encoding) -> QubitHamiltonian:
    """The encoded Hamiltonian with the requested reductions applied in order."""
    from benchsuite.qubit.tapering import taper

    ham = encode_integrals(ints, enc.name, enc.ordering)
    if enc.two_qubit_reduction:
        ham = two_qubit_reduction(ham)
    if enc.taper:
        ham = taper(ham)
    return ham


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
    enc.check()
    prep = prepare(case, basis)
    if 2 * prep.space.n_orbitals > MAX_QUBITS:
        raise InputError(f"{2 * prep.space.n_orbitals} qubits needed; at most {MAX_QUBITS} are supported",
                         case.path, "basis")
    ladder = reference_ladder(case, prep.basis, cache=cache, max_determinants=max_determinants, prep=prep)
    ints, _, space = case_integrals(case, prep.basis, cache=cache, prep=prep)
    ham = encode(ints, enc)
    problem = QubitProblem(case=case.name, basis=prep.basis.label, space=space.label, hamiltonian=ham,
                           integrals=ints, multiplicity=case.multiplicity, seed=seed,
                           time_budget_s=time_budget_s)
    return PreparedProblem(problem=problem, ladder=ladder, encoding=enc)
