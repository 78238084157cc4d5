"""Built-in methods on a register past 64 qubits.

H2O/STO-3G (7 orbitals) padded with 27 decoupled orbitals (one-electron energy 10 Eh, no
two-electron integrals) gives a 68-qubit Jordan-Wigner problem with the same Hartree-Fock
energy.  Independent route: PySCF's RHF energy of the unpadded molecule.  Code that holds a
one-word state refuses the problem with a reason (status ``error``, no traceback); the
Hartree-Fock bitstring energy needs no state and is still computed.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from benchsuite.errors import Refused
from benchsuite.methods.base import QubitProblem, SectorState, resolve_options
from benchsuite.methods.builtin import builtin_classes
from benchsuite.qubit.hamiltonian import encode_integrals
from benchsuite.qubit.measurement import ShotPlan
from benchsuite.runner import execute

N_PADDED = 34  # 68 qubits: two mask words


def _padded_problem(registry, ladder_cache, n_orbitals: int):
    from benchsuite.chem.space import case_integrals

    ints, scf, _ = case_integrals(registry.case("h2o"), None, cache=ladder_cache)
    n, extra = ints.n_orbitals, n_orbitals - ints.n_orbitals
    h1 = np.zeros((n_orbitals, n_orbitals))
    h1[:n, :n] = ints.h1_ha
    h1[np.arange(n, n_orbitals), np.arange(n, n_orbitals)] = 10.0
    eri = np.zeros((n_orbitals,) * 4)
    eri[:n, :n, :n, :n] = ints.eri_ha
    big = replace(ints, h1_ha=h1, eri_ha=eri, mo_energy_ha=np.concatenate([ints.mo_energy_ha, np.full(extra, 10.0)]))
    problem = QubitProblem(case="h2o-padded", basis="sto-3g", space="padded", hamiltonian=encode_integrals(big),
                           integrals=big, multiplicity=1)
    return problem, scf.energy_ha


@pytest.fixture(scope="module")
def padded(registry, ladder_cache):
    problem, scf_ha = _padded_problem(registry, ladder_cache, N_PADDED)
    assert problem.n_qubits == 68 and problem.hamiltonian.pauli.wide
    return problem, scf_ha


def test_hf_bitstring_energy_without_a_state(padded):
    """<HF|H|HF> on 68 qubits = PySCF's RHF energy of H2O/STO-3G; no one-word state is returned."""
    problem, scf_ha = padded
    out = execute(builtin_classes()["hf-bitstring"](), problem, isolate=False)
    assert out.status == "ok", out.message
    assert out.energy_ha == pytest.approx(scf_ha, abs=1e-8)


@pytest.mark.parametrize("name", ["exact-sector", "uccsd-vqe", "upccgsd-vqe", "adapt-vqe"])
def test_state_methods_refuse_with_a_reason(padded, name):
    problem, _ = padded
    method = builtin_classes()[name]()
    out = execute(method, problem, resolve_options(method, {}), isolate=False)
    assert out.status == "error"
    assert "refused" in out.message and ("68 qubits" in out.message or "determinants" in out.message)
    assert "Traceback" not in out.message and 'File "' not in out.message


def test_measurement_stage_refuses_before_a_dense_vector(padded):
    """--shots on a 68-qubit register: refused (2^68 amplitudes are never allocated)."""
    problem, _ = padded
    out = execute(builtin_classes()["hf-bitstring"](), problem, isolate=False, shots=ShotPlan(1000))
    assert out.status == "error" and "measurement stage refused" in out.message


def test_sector_state_refuses_two_word_registers():
    with pytest.raises(Refused, match="68 qubits"):
        SectorState(np.array([3], dtype=np.uint64), np.array([1.0]), 68)


def test_ucc_refuses_a_determinant_space_past_its_limit(registry, ladder_cache):
    """30 orbitals, 5 + 5 electrons: C(30, 5)^2 = 20,307,960,036 determinants on a one-word (60-qubit)
    register; refused before any string is made."""
    from benchsuite.methods.ucc import check_state_size

    problem, _ = _padded_problem(registry, ladder_cache, 30)
    assert not problem.hamiltonian.pauli.wide
    with pytest.raises(Refused, match="20,307,960,036 determinants"):
        check_state_size(problem)
