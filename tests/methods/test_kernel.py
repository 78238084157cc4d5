"""Loading, checking and falling back of the determinant-space kernel (benchsuite.methods.determinant).

Independent route for the agreement tests: the dense OpenFermion statevector of
``tests/methods/dense_route.py`` (each generator through ``jordan_wigner`` ->
``get_sparse_operator`` -> ``scipy.linalg.expm`` on the Hartree-Fock vector) and
central differences of the energy; both backends must match it, not only each other (their
agreement with each other to 1e-12 on LiH is tests/methods/test_ucc_dense.py).
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pytest

from benchsuite.methods import determinant as det
from benchsuite.methods.determinant import (
    DeterminantSpace,
    ExponentialProduct,
    KernelFallbackWarning,
    PairTable,
    c_backward,
    c_forward,
    kernel_backend,
    register_state,
)
from benchsuite.methods.ucc import reference_singles_doubles
from tests.methods.dense_route import (
    central_differences,
    dense_route_state,
    openfermion_hamiltonian,
    openfermion_order,
    random_angles,
    uccsd_objects,
)

BACKENDS = ["c", "numpy"]


def _need(backend):
    if backend == "c" and kernel_backend() != "c":
        pytest.skip(f"no compiled kernel here: {det.kernel_note()}")


@pytest.mark.parametrize("backend", BACKENDS)
def test_backend_matches_dense_route(backend):
    """State, energy and gradient of the H4-chain UCCSD product against OpenFermion/expm."""
    _need(backend)
    problem, space, ham, product, exc = uccsd_objects("h4-chain", backend=backend)
    assert product.backend == backend
    theta = random_angles(product.n_parameters, seed=21)
    mine = openfermion_order(register_state(space, product.state(theta), problem.hamiltonian).dense(), 8)
    dense = dense_route_state("h4-chain", exc, theta)
    assert np.max(np.abs(mine - dense)) < 1e-10
    h = openfermion_hamiltonian("h4-chain", "interleaved")
    energy, grad, _ = product.energy_and_gradient(theta, ham)
    assert energy == pytest.approx(float(np.real(np.vdot(dense, h @ dense))), abs=1e-9)
    assert np.max(np.abs(grad - central_differences(product, ham, theta))) < 1e-6


# -- checks before the C call -------------------------------------------------------


class _RecordingLibrary:
    """Stands in for the loaded library: records calls instead of touching memory."""

    def __init__(self):
        self.calls = []

    def bs_forward(self, *args):
        self.calls.append(("forward", args))

    def bs_backward(self, *args):
        self.calls.append(("backward", args))


@pytest.fixture
def recording(monkeypatch):
    lib = _RecordingLibrary()
    monkeypatch.setitem(det._KERNEL, "lib", lib)
    return lib


def _small_table():
    space = DeterminantSpace(4, 2, 2)
    exc = reference_singles_doubles(4, 2, 2)[:5]
    return space, PairTable.build((space.pairs(e) for e in exc), space.dimension)


def test_correct_arrays_reach_the_library(recording):
    space, table = _small_table()
    psi, c, s = space.reference(), np.ones(5), np.zeros(5)
    c_forward(table, psi, c, s)
    c_backward(table, psi, psi.copy(), c, s, np.zeros(5))
    assert [name for name, _ in recording.calls] == ["forward", "backward"]
    assert recording.calls[0][1][0] == psi.ctypes.data and recording.calls[0][1][1] == 5


@pytest.mark.parametrize("bad, what", [
    ("psi short", "'psi'"), ("psi float32", "'psi'"), ("psi strided", "not C-contiguous"),
    ("psi read-only", "writable"), ("psi list", "'psi'"), ("cos long", "'cos'"), ("sin int", "'sin'"),
    ("lam short", "'lam'"), ("gradient short", "'gradient'")])
def test_bad_arrays_raise_before_the_call(recording, bad, what):
    space, table = _small_table()
    n = space.dimension
    args = {"psi": space.reference(), "lam": np.ones(n), "cos": np.ones(5), "sin": np.zeros(5),
            "gradient": np.zeros(5)}
    name, kind = bad.split()
    replace = {"short": lambda a: a[:-1].copy(), "long": lambda a: np.ones(a.size + 1),
               "float32": lambda a: a.astype(np.float32), "int": lambda a: a.astype(np.int64),
               "strided": lambda a: np.ones(2 * a.size)[::2], "list": lambda a: a.tolist()}
    if kind == "read-only":
        args[name].flags.writeable = False
    else:
        args[name] = replace[kind](args[name])
    with pytest.raises(ValueError, match=what):
        if name in ("lam", "gradient"):
            c_backward(table, args["psi"], args["lam"], args["cos"], args["sin"], args["gradient"])
        else:
            c_forward(table, args["psi"], args["cos"], args["sin"])
    assert recording.calls == []


def test_bad_pair_tables_raise(recording):
    space, table = _small_table()
    wrong = PairTable(table.offsets, table.i.astype(np.int32), table.j, table.sigma, table.dimension)
    with pytest.raises(ValueError, match="'i'"):
        c_forward(wrong, space.reference(), np.ones(5), np.zeros(5))
    short = PairTable(table.offsets, table.i, table.j[:-1], table.sigma, table.dimension)
    with pytest.raises(ValueError, match="'j'"):
        c_forward(short, space.reference(), np.ones(5), np.zeros(5))
    assert recording.calls == []
    parts = [(np.array([0]), np.array([space.dimension]), np.array([1.0]))]     # J outside the space
    with pytest.raises(ValueError, match="outside"):
        PairTable.build(parts, space.dimension)
    assert not table.i.flags.writeable


def test_reference_of_the_wrong_length_is_refused():
    space = DeterminantSpace(4, 2, 2)
    with pytest.raises(ValueError, match="reference of shape"):
        ExponentialProduct(space, reference_singles_doubles(4, 2, 2), reference=np.ones(space.dimension - 1),
                           backend="numpy")


# -- choosing the backend ----------------------------------------------------------


@pytest.fixture
def fresh(monkeypatch):
    """An undecided backend (restored afterwards) and no forcing variable."""
    monkeypatch.setattr(det, "_KERNEL", {})
    monkeypatch.delenv("BENCHSUITE_DETERMINANT_KERNEL", raising=False)
    return monkeypatch


def _no_compiler():
    raise FileNotFoundError("no C compiler on the PATH")


def test_fallback_warns_once_with_the_reason(fresh):
    fresh.setattr(det, "_installed_kernel", lambda: None)
    fresh.setattr(det, "_compiler", _no_compiler)
    space = DeterminantSpace(4, 2, 2)
    exc = reference_singles_doubles(4, 2, 2)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        products = [ExponentialProduct(space, exc) for _ in range(3)]
        assert kernel_backend() == "numpy"
    fallbacks = [w for w in caught if issubclass(w.category, KernelFallbackWarning)]
    assert len(fallbacks) == 1
    text = str(fallbacks[0].message)
    assert "not built at install time" in text and "no C compiler" in text
    assert all(p.backend == "numpy" for p in products)
    assert "no C compiler" in det.kernel_note()


def test_forced_numpy_is_silent(fresh):
    fresh.setenv("BENCHSUITE_DETERMINANT_KERNEL", "numpy")
    fresh.setattr(det, "_compiler", _no_compiler)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert kernel_backend() == "numpy"
    assert "forced" in det.kernel_note()


def test_forced_c_without_a_kernel_raises(fresh):
    fresh.setenv("BENCHSUITE_DETERMINANT_KERNEL", "c")
    fresh.setattr(det, "_installed_kernel", lambda: None)
    fresh.setattr(det, "_compiler", _no_compiler)
    with pytest.raises(RuntimeError, match="no C compiler"):
        kernel_backend()


def test_unknown_choice_is_refused(fresh):
    fresh.setenv("BENCHSUITE_DETERMINANT_KERNEL", "fortran")
    with pytest.raises(ValueError, match="BENCHSUITE_DETERMINANT_KERNEL"):
        kernel_backend()


def _compiler_or_skip() -> str:
    try:
        return det._compiler()
    except FileNotFoundError:
        pytest.skip("no C compiler here")


def _stale_library(tmp_path) -> Path:
    """A real build of the shipped source that claims another source version."""
    stale = tmp_path / "_determinant_kernel.so"
    det._build(_compiler_or_skip(), det.KERNEL_SOURCE.read_text(), stale, "0" * 64)
    return stale


@pytest.mark.parametrize("installed, reason", [
    ("broken", "not used"), ("stale", "another version of _determinant_kernel.c")])
def test_unusable_installed_library_falls_back_to_first_use_build(fresh, tmp_path, installed, reason):
    """An installed file that does not load, or was built from another source, is reported in the
    note, and the first-use build takes over without a fallback warning."""
    _compiler_or_skip()
    if installed == "broken":
        path = tmp_path / "_determinant_kernel.so"
        path.write_bytes(b"not a shared library")
    else:
        path = _stale_library(tmp_path)
    fresh.setattr(det, "_installed_kernel", lambda: path)
    fresh.setenv("BENCHSUITE_KERNEL_DIR", str(tmp_path / "cache"))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert kernel_backend() == "c"
    note = det.kernel_note()
    assert "built at first use" in note and reason in note
    (built,) = (tmp_path / "cache").glob("determinant_*.so")
    assert det._KERNEL["lib"].bs_source_sha256().decode() == det.source_sha256()


# -- pool gradients (ADAPT-VQE) ------------------------------------------------------


@pytest.mark.parametrize("backend", BACKENDS)
def test_pool_gradients_match_central_differences_of_an_appended_factor(backend):
    """2 <H psi|tau_m|psi> of every generalised pool member at a random H4-chain UCCSD state against
    central differences of E(theta, t) with exp(t tau_m) appended after the product (independent
    route: energies only, no commutator algebra)."""
    from benchsuite.methods.determinant import GeneratorPool
    from benchsuite.methods.ucc import generalised_doubles, generalised_singles

    _need(backend)
    problem, space, ham, product, exc = uccsd_objects("h4-chain", backend=backend)
    n = space.n_orbitals
    candidates = generalised_singles(n, 0) + generalised_singles(n, 1) + generalised_doubles(n)
    pool = GeneratorPool(space, candidates, backend=backend)
    theta = random_angles(product.n_parameters, seed=5)
    psi = product.state(theta)
    grads = pool.gradients(psi, ham.apply(psi))
    picks = np.random.default_rng(3).choice(len(candidates), size=12, replace=False)
    for m in picks:
        grown = ExponentialProduct(space, exc + [candidates[m]], reference=product.reference, backend=backend)
        fd = central_differences(grown, ham, np.append(theta, 0.0), components=[product.n_parameters])[0]
        assert grads[m] == pytest.approx(fd, abs=1e-7)
    assert np.max(np.abs(grads)) > 1e-3          # the check is not vacuous


def test_pool_gradient_sizes_are_checked_before_the_c_call(recording):
    from benchsuite.methods.determinant import GeneratorPool, c_pool_gradients

    problem, space, ham, product, exc = uccsd_objects("h4-chain")
    pool = GeneratorPool(space, exc[:4], backend="numpy")
    psi = space.reference()
    with pytest.raises(ValueError, match="hpsi"):
        c_pool_gradients(pool.pairs, psi, psi[:-1].copy(), np.zeros(4))
    with pytest.raises(ValueError, match="gradient"):
        c_pool_gradients(pool.pairs, psi, psi, np.zeros(3))
    assert recording.calls == []
