"""Speed of the UCC kernels (pytest-benchmark; ratios from the same run, no wall-clock asserts).

Run the figures with ``pytest tests/methods/test_ucc_speed.py -m speed --benchmark-enable``.
With benchmarks disabled (the default run) every test still executes its
code once and checks the result; the ratio test then skips, having no
timings.

Textbook route (the anchor named in the methods issue): OpenFermion's
``uccsd_singlet_generator`` (44 spin-adapted amplitudes for LiH/STO-3G) ->
``jordan_wigner`` -> ``get_sparse_operator`` -> ``expm_multiply`` on the
2^12 Hartree-Fock vector -> <psi|H|psi> with the prebuilt sparse JW
Hamiltonian; one energy per call.  Ours: one energy *and* the full analytic
gradient of the 92-parameter spin-orbital UCCSD product in determinant space.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest

from benchsuite.methods.base import resolve_options
from benchsuite.methods.ucc import UCCSDVQE
from tests.methods.dense_route import (
    central_differences,
    fci_energy,
    hf_vector,
    integrals_for,
    make_problem,
    openfermion_hamiltonian,
    random_angles,
    uccsd_objects,
)

pytestmark = pytest.mark.speed

REQUIRED_RATIO = 1000.0


def textbook_energy(amplitudes, n_qubits, n_electrons, hamiltonian, reference) -> float:
    import openfermion as of
    from scipy.sparse.linalg import expm_multiply

    generator = of.uccsd_singlet_generator(amplitudes, n_qubits, n_electrons)
    matrix = of.get_sparse_operator(of.jordan_wigner(generator), n_qubits)
    psi = expm_multiply(matrix.tocsc(), reference)
    return float(np.real(np.vdot(psi, hamiltonian @ psi)))


def _textbook_inputs():
    import openfermion as of

    ints = integrals_for("lih")
    nq, ne = 2 * ints.n_orbitals, ints.n_electrons
    h = openfermion_hamiltonian("lih", "interleaved")
    amplitudes = random_angles(of.uccsd_singlet_paramsize(nq, ne), seed=0, scale=0.05)
    return ints, (amplitudes, nq, ne, h, hf_vector(ints, "interleaved"))


def test_textbook_route_one_energy(benchmark):
    ints, args = _textbook_inputs()
    assert args[0].size == 44
    energy = benchmark.pedantic(textbook_energy, args=args, rounds=3, iterations=1)
    assert fci_energy(ints) - 1e-9 <= energy < 0.0
    assert abs(energy - ints.reference_energy_ha()) > 1e-4


def test_uccsd_energy_and_gradient_lih(benchmark):
    ints = integrals_for("lih")
    _, _, ham, product, _ = uccsd_objects("lih")
    theta = random_angles(product.n_parameters, seed=0, scale=0.05)
    energy, grad, _ = benchmark(product.energy_and_gradient, theta, ham)
    benchmark.extra_info["n_parameters"] = product.n_parameters
    benchmark.extra_info["kernel"] = product.backend
    assert product.n_parameters == 92
    some = [0, 20, 50, 91]
    assert np.max(np.abs(grad[some] - central_differences(product, ham, theta, some))) < 1e-6
    assert energy >= fci_energy(ints) - 1e-9


def _best_of(fn, args, rounds: int) -> float:
    best = math.inf
    for _ in range(rounds):
        start = time.perf_counter()
        fn(*args)
        best = min(best, time.perf_counter() - start)
    return best


def test_energy_gradient_at_least_1000_times_faster_than_textbook_energy(benchmark):
    """Self-contained: the anchor is timed here (best of 3 textbook energies), ours by the benchmark."""
    if benchmark.disabled:
        pytest.skip("a ratio needs timings (--benchmark-enable)")
    _, args = _textbook_inputs()
    textbook_s = _best_of(textbook_energy, args, rounds=3)
    _, _, ham, product, _ = uccsd_objects("lih")
    theta = random_angles(product.n_parameters, seed=0, scale=0.05)
    benchmark(product.energy_and_gradient, theta, ham)
    ours_s = float(benchmark.stats.stats.min)
    ratio = textbook_s / ours_s
    benchmark.extra_info.update(textbook_s=textbook_s, ours_s=ours_s, ratio=ratio)
    print(f"\ntextbook energy {textbook_s:.3f} s, ours energy+gradient {ours_s * 1e3:.3f} ms, ratio {ratio:.0f}")
    assert ratio >= REQUIRED_RATIO


@pytest.mark.parametrize("name", ["h4-chain", "lih", "h2o"])
def test_uccsd_vqe_convergence_time(benchmark, name):
    """Full UCCSD-VQE to gradient norm < 1e-6 (issue: H4 chain <= 5 s, LiH <= 10 s, H2O <= 60 s;
    reported by the benchmark, not asserted)."""
    problem = make_problem(name)
    method = UCCSDVQE()
    options = resolve_options(method, {})
    result = benchmark.pedantic(method.run, args=(problem, options), rounds=3, iterations=1)
    benchmark.extra_info.update(n_parameters=result.resources.n_parameters, iterations=result.iterations,
                                gradient_norm=result.metadata["gradient_norm"])
    assert result.converged and result.metadata["gradient_norm"] < 1e-6
    assert 0.0 <= result.energy_ha - fci_energy(problem.integrals) < 1.6e-3
