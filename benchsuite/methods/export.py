"""The exact problem a method sees, written for codes outside benchsuite.

Three formats (:data:`FORMATS`), each from a built
:class:`~benchsuite.methods.problem.PreparedProblem` and its
:class:`~benchsuite.methods.fingerprint.ProblemFingerprint`:

* ``fcidump`` -- the active-space integrals as FCIDUMP (Knowles & Handy 1989),
  written by ``pyscf.tools.fcidump``: chemists' (pq|rs), h_pq with the frozen
  core folded in, ECORE = nuclear repulsion + frozen-core energy; independent
  of the encoding.  The file is standard FCIDUMP; the fingerprint goes beside it.
* ``pauli-json`` -- the encoded Pauli sum as JSON (:func:`pauli_document`):
  terms, constant, every convention, the Hartree-Fock bitstring, the sector and
  the fingerprint inside the document.
* ``openfermion`` -- the Pauli sum in OpenFermion's plain-text operator format
  (``QubitOperator:`` then ``str(QubitOperator)``), read back by
  ``openfermion.utils.load_operator(file_name, data_directory, plain_text=True)``;
  the fingerprint goes beside it.

"Beside it" is the file ``<FILE>.fingerprint.json`` (:func:`sidecar_path`):
the fingerprint document plus the case, basis, space and format.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

from benchsuite.methods.fingerprint import ProblemFingerprint

FORMATS = ("fcidump", "pauli-json", "openfermion")
PAULI_SCHEMA = "benchsuite-pauli-sum/1"
SIGN_CONVENTION = ("H = constant_ha * I + sum_k coeff_k * P_k (hartree); P_k is the tensor product of the "
                   "single-qubit Paulis named in label_k (qubits not named: identity); the energy to report is the "
                   "lowest eigenvalue of H on states of the sector, total energy (constant included)")


@dataclass(frozen=True)
class ProblemExport:
    """One export: the file's text, its format, the fingerprint and the sidecar document (None for
    ``pauli-json``, which carries the fingerprint inside)."""

    format: str
    text: str
    fingerprint: ProblemFingerprint
    sidecar: dict | None


def problem_figures(prepared) -> dict:
    """``n_qubits``, ``n_terms`` (non-identity strings), ``one_norm_ha`` and ``qwc_groups`` of the
    problem's Pauli sum, as the runner records them for a task
    (:func:`benchsuite.qubit.metrics.register_figures`)."""
    from benchsuite.qubit.metrics import register_figures

    return register_figures(prepared.problem.hamiltonian.pauli)


def _identity(prepared, fp: ProblemFingerprint) -> dict:
    p = prepared.problem
    return {"case": p.case, "basis": p.basis, "space": p.space, "encoding": prepared.encoding.label,
            "fingerprint": fp.token}


def sector(problem) -> dict:
    """The sector the answer must lie in, on this register."""
    return {"n_electrons": problem.n_electrons, "n_alpha": problem.n_alpha, "n_beta": problem.n_beta,
            "multiplicity": problem.multiplicity, "s_z": (problem.n_alpha - problem.n_beta) / 2,
            "meaning": "lowest state with this electron number and S_z = (n_alpha - n_beta)/2 of total spin "
                       "S = (multiplicity - 1)/2; after reductions the register holds only the Z2 sector they fix"}


def pauli_document(prepared, fp: ProblemFingerprint) -> dict:
    """The ``pauli-json`` document: identity fields, fingerprint, sector, conventions, terms."""
    p = prepared.problem
    ham = p.hamiltonian
    terms = [{"label": label, "coeff": float(c)} for label, c in ham.without_constant()]
    return {"schema": PAULI_SCHEMA, **_identity(prepared, fp), "fingerprint_document": fp.to_dict(),
            "n_qubits": p.n_qubits, "n_orbitals": p.n_orbitals, "sector": sector(p),
            "hf_bitstring": p.hf_bitstring, "hf_energy_ha": float(ham.basis_state_energy(ham.hf_state())),
            "constant_ha": float(ham.constant_ha), "n_terms": len(terms),
            "conventions": {**ham.conventions(), "sign_convention": SIGN_CONVENTION,
                            "coefficients": "real (the Hamiltonian is real symmetric in this basis)",
                            "hf_bitstring": "character q = occupation of qubit q (qubit 0 first)"},
            "terms": terms}


def openfermion_text(prepared) -> str:
    """OpenFermion's plain-text operator format of the Pauli sum (real coefficients)."""
    from openfermion import QubitOperator

    op = QubitOperator()
    for label, coeff in prepared.problem.views.pauli_terms():
        op += QubitOperator(label, coeff)
    return "QubitOperator:\n" + str(op)


def export_problem(prepared, fp: ProblemFingerprint, fmt: str) -> ProblemExport:
    """The problem in format ``fmt`` (one of :data:`FORMATS`)."""
    if fmt == "pauli-json":
        return ProblemExport(fmt, json.dumps(pauli_document(prepared, fp), indent=1, allow_nan=False) + "\n",
                             fp, None)
    text = prepared.problem.views.fcidump_text() if fmt == "fcidump" else openfermion_text(prepared)
    side = {**_identity(prepared, fp), "format": fmt, "fingerprint_document": fp.to_dict()}
    if fmt == "fcidump":
        side["note"] = ("the integrals do not depend on the encoding; the fingerprint's encoding component is "
                        "the one results are recorded under")
    else:
        side["sector"], side["hf_bitstring"] = sector(prepared.problem), prepared.problem.hf_bitstring
        side["conventions"] = prepared.problem.hamiltonian.conventions()
    return ProblemExport(fmt, text, fp, side)


def sidecar_path(path: Path) -> Path:
    """Where the fingerprint of a ``fcidump`` or ``openfermion`` export goes."""
    path = Path(path)
    return path.with_name(path.name + ".fingerprint.json")
