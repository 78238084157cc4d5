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

import numpy as np
import pytest

from benchsuite.methods.base import resolve_options
from benchsuite.methods.ucc import UCCSDVQE
from tests.methods.test_ucc_dense import (
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
_TIMES: dict[str, float] = {}


def _record(benchmark, key: str) -> None:
    if not benchmark.disabled and benchmark.stats is not None:
        _TIMES[key] = float(benchmark.stats.stats.min)


def textbook_energy(amplitudes, n_qubits, n_electrons, hamiltonian, reference) -> float:
    import openfermion as of
    from scipy.sparse.linalg import expm_multiply

    generator = of.uccsd_singlet_generator(amplitudes, n_qubits, n_electrons)
    matrix = of.get_sparse_operator(of.jordan_wigner(generator), n_qubits)
    psi = expm_multiply(matrix.tocsc(), reference)
    return float(np.real(np.vdot(psi, hamiltonian @ psi)))


def test_textbook_route_one_energy(benchmark):
    import openfermion as of

    ints = integrals_for("lih")
    nq, ne = 2 * ints.n_orbitals, ints.n_electrons
    h = openfermion_hamiltonian("lih", "interleaved")
    hf = hf_vector(ints, "interleaved")
    amplitudes = random_angles(of.uccsd_singlet_paramsize(nq, ne), seed=0, scale=0.05)
    assert amplitudes.size == 44
    energy = benchmark.pedantic(textbook_energy, args=(amplitudes, nq, ne, h, hf), rounds=3, iterations=1)
    _record(benchmark, "textbook")
    e_fci = fci_energy(ints)
    assert e_fci - 1e-9 <= energy < 0.0
    assert abs(energy - ints.reference_energy_ha()) > 1e-4


def test_uccsd_energy_and_gradient_lih(benchmark):
    ints = integrals_for("lih")
    _, _, ham, product, _ = uccsd_objects("lih")
    theta = random_angles(product.n_parameters, seed=0, scale=0.05)
    energy, grad, _ = benchmark(product.energy_and_gradient, theta, ham)
    _record(benchmark, "ours")
    benchmark.extra_info["n_parameters"] = product.n_parameters
    benchmark.extra_info["kernel"] = product.backend
    assert product.n_parameters == 92
    some = [0, 20, 50, 91]
    assert np.max(np.abs(grad[some] - central_differences(product, ham, theta, some))) < 1e-6
    assert energy >= fci_energy(ints) - 1e-9


def test_energy_gradient_at_least_1000_times_faster_than_textbook_energy(benchmark):
    if benchmark.disabled or "textbook" not in _TIMES or "ours" not in _TIMES:
        pytest.skip("needs both benchmarks of this module in the same run (--benchmark-enable)")
    ratio = _TIMES["textbook"] / _TIMES["ours"]
    benchmark.extra_info.update(textbook_s=_TIMES["textbook"], ours_s=_TIMES["ours"], ratio=ratio)
    benchmark.pedantic(lambda: ratio, rounds=1, iterations=1)
    print(f"\ntextbook energy {_TIMES['textbook']:.3f} s, ours energy+gradient {_TIMES['ours'] * 1e3:.3f} ms, "
          f"ratio {ratio:.0f}")
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
