"""The method contract: a :class:`QubitProblem` in, a :class:`MethodResult` out.

A method is any object with

* ``name`` (str): how it is selected (``--method NAME``);
* ``description`` (str): one line for ``benchsuite methods``;
* ``options`` (tuple of :class:`Option`): typed options with defaults;
* ``variational`` (bool): its energy is an upper bound of the exact sector
  energy (a result below it by more than 1e-6 Eh is recorded ``below-exact``);
* ``stochastic`` (bool): it reports a standard error;
* ``run(problem, options) -> MethodResult``: ``options`` is a plain dict of
  validated option values (defaults filled in).

A class with these attributes, or a factory returning such an object, is a
plugin; see :mod:`benchsuite.methods.discovery`.

Units: hartree for every energy, seconds for every time.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field
from typing import Any, Callable, Protocol, runtime_checkable

import numpy as np

from benchsuite.chem.integrals import MOIntegrals
from benchsuite.errors import InputError
from benchsuite.qubit.hamiltonian import QubitHamiltonian
from benchsuite.qubit.register import Register


@dataclass(frozen=True)
class QubitProblem:
    """Everything a method under test may use.

    ``hamiltonian`` is the encoded Pauli sum with its conventions
    (``hamiltonian.conventions()``); ``integrals`` are the same active-space
    MO integrals it was built from (for methods that work with fermions);
    ``hf_bitstring`` is the reference determinant on this register, qubit 0
    first.  ``n_alpha``/``n_beta`` fix the electron-number and S_z sector the
    answer must lie in.  ``time_budget_s`` is advisory inside the method; the
    runner enforces it from outside.
    """

    case: str
    basis: str
    space: str
    hamiltonian: QubitHamiltonian
    integrals: MOIntegrals
    multiplicity: int
    seed: int = 0
    time_budget_s: float | None = None

    @property
    def n_qubits(self) -> int:
        return self.hamiltonian.n_qubits

    @property
    def n_alpha(self) -> int:
        return self.integrals.n_alpha

    @property
    def n_beta(self) -> int:
        return self.integrals.n_beta

    @property
    def n_electrons(self) -> int:
        return self.n_alpha + self.n_beta

    @property
    def n_orbitals(self) -> int:
        return self.integrals.n_orbitals

    @property
    def hf_bitstring(self) -> str:
        return self.hamiltonian.hf_bitstring()

    @property
    def views(self):
        """Exact declared-spin energy, OpenFermion / SciPy / plain-pair forms, FCIDUMP text
        (:class:`benchsuite.methods.views.ProblemViews`)."""
        from benchsuite.methods.views import ProblemViews

        return ProblemViews(self)


@dataclass(frozen=True)
class SectorState:
    """A state of the electron-number / S_z sector, in the problem's qubit basis.

    ``basis_states[k]`` is a computational basis state of the encoded register
    (integer, bit q = qubit q; the same basis the Pauli sum acts on, after any
    reductions) and ``amplitudes[k]`` its amplitude; normalised.  For
    Jordan-Wigner these are occupation-number states with the sign convention
    a+_{p1} a+_{p2} ... |vac>, p1 < p2 < ... in the register's mode order.
    """

    basis_states: np.ndarray
    amplitudes: np.ndarray
    n_qubits: int

    def __post_init__(self):
        # Basis states are single uint64 words: refuse a wider register with its reason.
        Register(self.n_qubits).require_single_word("a SectorState")

    def dense(self) -> np.ndarray:
        """The full 2^n statevector (for small registers and diagnostics only)."""
        vec = np.zeros(1 << self.n_qubits, dtype=complex)
        vec[self.basis_states.astype(np.int64)] = self.amplitudes
        return vec


@dataclass
class Resources:
    """Cost figures where a method knows them.

    ``two_qubit_gates``/``circuit_depth`` follow the compilation named in
    ``compilation`` (for the built-in ansatzes: each Pauli-string exponential
    exp(-i t P) as a CNOT staircase, 2(w-1) CNOTs for weight w, exponentials
    in sequence, no cancellation between neighbours; depth counted in
    two-qubit layers).
    """

    n_parameters: int | None = None
    two_qubit_gates: int | None = None
    circuit_depth: int | None = None
    compilation: str | None = None
    shots: int | None = None
    function_evaluations: int | None = None

    def to_dict(self) -> dict:
        return {k: v for k, v in asdict(self).items() if v is not None}


@dataclass
class MethodResult:
    """What a method returns.  ``energy_ha`` is the total energy (constant included)."""

    energy_ha: float
    stderr_ha: float | None = None
    converged: bool = True
    iterations: int = 0
    parameters: list[float] | None = None
    resources: Resources = field(default_factory=Resources)
    metadata: dict = field(default_factory=dict)
    state: Any = None


@dataclass(frozen=True)
class Option:
    """A typed option, validated when it is resolved (before any reference is computed).

    ``kind`` is one of int, float, bool, str.  Bounds apply to int and float values:
    ``minimum``/``maximum`` inclusive, ``greater_than`` strict (``greater_than=0.0``: positive).
    ``choices`` lists the allowed values.  ``check(value)`` returns None when the value is
    acceptable, else a short reason (e.g. "must be a power of two"); it runs last.
    """

    name: str
    kind: type
    default: Any
    help: str = ""
    choices: tuple | None = None
    minimum: float | None = None
    maximum: float | None = None
    greater_than: float | None = None
    check: Callable[[Any], str | None] | None = field(default=None, compare=False)

    def parse(self, method: str, value: Any) -> Any:
        """Convert a command-line string or a Python value and validate it; InputError names
        method and option."""
        value = self._convert(method, value)
        reason = self.problem(value)
        if reason:
            raise InputError(f"option '{self.name}' of method '{method}' {reason}, got {value!r}",
                             field=f"{method}.{self.name}")
        return value

    def _convert(self, method: str, value: Any) -> Any:
        try:
            if isinstance(value, str) and self.kind is not str:
                if self.kind is bool:
                    low = value.strip().lower()
                    if low not in ("true", "false", "1", "0", "yes", "no"):
                        raise ValueError(value)
                    value = low in ("true", "1", "yes")
                else:
                    value = self.kind(value)
            elif self.kind is float and isinstance(value, int) and not isinstance(value, bool):
                value = float(value)
            if not isinstance(value, self.kind) or (self.kind is not bool and isinstance(value, bool)):
                raise TypeError(value)
        except (TypeError, ValueError):
            raise InputError(f"option '{self.name}' of method '{method}' must be {self.kind.__name__}, "
                             f"got {value!r}", field=f"{method}.{self.name}") from None
        return value

    def problem(self, value: Any) -> str | None:
        """Why ``value`` (already of ``kind``) is not acceptable, or None."""
        if self.kind is float and not math.isfinite(value):
            return "must be finite"
        if self.choices is not None and value not in self.choices:
            return f"must be one of {list(self.choices)}"
        if self.minimum is not None and value < self.minimum:
            return f"must be >= {self.minimum}"
        if self.maximum is not None and value > self.maximum:
            return f"must be <= {self.maximum}"
        if self.greater_than is not None and value <= self.greater_than:
            return f"must be > {self.greater_than}"
        if self.check is not None:
            try:
                return self.check(value) or None
            except Exception as exc:  # a plugin's check that raises is a reason, not a crash
                return f"failed its check ({type(exc).__name__}: {exc})"
        return None

    def describe(self) -> dict:
        """The option as plain data for ``benchsuite methods``."""
        out = {"name": self.name, "type": self.kind.__name__, "default": self.default, "help": self.help}
        for key in ("choices", "minimum", "maximum", "greater_than"):
            value = getattr(self, key)
            if value is not None:
                out[key] = list(value) if key == "choices" else value
        if self.check is not None:
            out["check"] = getattr(self.check, "__doc__", None) or getattr(self.check, "__name__", "custom")
        return out


def resolve_options(method: "Method", given: dict[str, Any]) -> dict[str, Any]:
    """Defaults overlaid with ``given``; an unknown or mistyped option is an input error."""
    known = {o.name: o for o in method.options}
    unknown = sorted(set(given) - set(known))
    if unknown:
        raise InputError(f"method '{method.name}' has no option {unknown[0]!r}; "
                         f"its options: {sorted(known) or 'none'}", field=f"{method.name}.{unknown[0]}")
    out = {name: opt.default for name, opt in known.items()}
    for name, value in given.items():
        out[name] = known[name].parse(method.name, value)
    return out


@runtime_checkable
class Method(Protocol):
    name: str
    description: str
    options: tuple[Option, ...]
    variational: bool
    stochastic: bool

    def run(self, problem: QubitProblem, options: dict[str, Any]) -> MethodResult: ...


# -- signs of life -------------------------------------------------------------------------

#: Callables hearing :func:`report_progress`'s record (a dict); none by default.  A run's worker
#: process appends one that forwards the record, throttled, to the parent's progress display.
PROGRESS_LISTENERS: list = []


def report_progress(iteration: int | None = None, energy_ha: float | None = None,
                    gradient_norm: float | None = None, stage: str | None = None) -> None:
    """Tell the run how a long method is getting on; cheap enough to call every iteration.

    ``iteration``: the method's own count (ADAPT: operators added; an optimiser: its iterations);
    ``energy_ha``: the current energy in hartree; ``gradient_norm``: the norm the method stops on
    (Eh per unit parameter); ``stage``: a few words (``"re-optimising"``).  Any may be left out.
    Outside a run (no listener) this does nothing; a listener that fails is dropped, never
    raised into the method.
    """
    record = {k: v for k, v in (("iteration", iteration), ("energy_ha", energy_ha),
                                ("gradient_norm", gradient_norm), ("stage", stage)) if v is not None}
    for listener in list(PROGRESS_LISTENERS):
        try:
            listener(record)
        except Exception:
            PROGRESS_LISTENERS.remove(listener)
