"""Products of fermionic exponentials simulated in one (N_alpha, N_beta) determinant space.

The variational ansatzes of :mod:`benchsuite.methods.ucc` are products
U(theta) = exp(theta_{K-1} tau_{K-1}) ... exp(theta_1 tau_1) exp(theta_0 tau_0)
of exponentials of anti-Hermitian excitation generators tau = T - T^dagger.
Every factor conserves N_alpha and N_beta, so the state never leaves the
sector of the reference, and the simulation is done on its determinants
(alpha strings x beta strings) instead of the 2^n register.  On that space
this is the Jordan-Wigner statevector restricted to the sector, exactly;
:func:`register_state` maps it back to any register of the problem.

Conventions
-----------
* Spatial orbitals p = 0..n-1 are the active MO integrals' orbitals.  Inside
  this module a spin-orbital is labelled in *alpha-block* order, P = p for
  (p, alpha) and P = n + p for (p, beta), whatever the register's ordering.
* Determinant (I_a, I_b) = (prod_{p in I_a, ascending} a+_{p alpha})
  (prod_{q in I_b, ascending} a+_{q beta}) |vac>.  Strings are integers with
  bit p = orbital p, listed in ascending order; the amplitude vector is
  C[ia, ib] flattened as ia * n_beta_strings + ib, the layout of
  ``pyscf.fci`` whose Hamiltonian contraction is used.  (PySCF orders the
  creators of a string the other way; that changes every determinant of a
  sector by the same sign, and all operators here conserve N_alpha and
  N_beta, so their matrices are identical.)
* An :class:`Excitation` with ``creators`` (c_0, ..., c_{m-1}) and
  ``annihilators`` (x_0, ..., x_{m-1}) is
  T = a+_{c_0} ... a+_{c_{m-1}} a_{x_{m-1}} ... a_{x_0},
  so a single is a+_a a_i and a double a+_a a+_b a_j a_i.
* One ladder operator on a string s (ascending creators):
  a_p |s> = (-1)^{|s below p|} |s - p>,  a+_p |s> = (-1)^{|s below p|} |s + p>.

The kernel
----------
With creators and annihilators disjoint, T maps each determinant J of its
support to one determinant I with a sign sigma, and T^dagger maps I back, so
tau = sum over pairs of sigma (|I><J| - |J><I|): a direct sum of 2 x 2
rotation generators, tau^3 = -tau, and

    exp(theta tau) = 1 + sin(theta) tau + (1 - cos(theta)) tau^2,

i.e. psi_I <- cos psi_I + sigma sin psi_J, psi_J <- cos psi_J - sigma sin psi_I
on the pairs, identity elsewhere: O(pairs) per factor from precomputed
index and sign arrays.  The energy gradient is reverse mode: forward to
psi = U psi_0, lambda = H psi, then for k = K-1 .. 0,
dE/dtheta_k = 2 <lambda_k| tau_k |psi_k> and both vectors are rotated back by
exp(-theta_k tau_k); about three energy evaluations for the whole gradient.

The loops run in a small C kernel (``_determinant_kernel.c`` beside this
module), compiled at install time by setup.py where a C compiler exists, else
at first use into the per-user cache, and loaded with ctypes; every array's
length, dtype and contiguity is checked before each C call (ValueError).
Without either build (one :class:`KernelFallbackWarning` per process, with
the reason), or with ``BENCHSUITE_DETERMINANT_KERNEL=numpy``, equivalent
NumPy loops run: same results, about ``NUMPY_SLOWDOWN`` times slower.
"""

from __future__ import annotations

import ctypes
import hashlib
import importlib.machinery
import os
import shutil
import subprocess
import sys
import sysconfig
import tempfile
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from benchsuite.methods.base import SectorState
from benchsuite.qubit.encodings import encode_occupations, mode_indices, occupation_masks
from benchsuite.qubit.pauli import parity, popcount

ALPHA, BETA = 0, 1


# -- excitations ------------------------------------------------------------------


@dataclass(frozen=True)
class Excitation:
    """T = a+_{c_0} ... a+_{c_{m-1}} a_{x_{m-1}} ... a_{x_0} in alpha-block spin-orbital labels.

    ``n_orbitals`` fixes the labels: P < n is (P, alpha), P >= n is (P - n, beta).
    """

    creators: tuple[int, ...]
    annihilators: tuple[int, ...]
    n_orbitals: int

    def __post_init__(self):
        n = self.n_orbitals
        c, x = self.creators, self.annihilators
        if len(c) != len(x) or not c:
            raise ValueError("an excitation needs as many creators as annihilators, at least one")
        if len(set(c)) != len(c) or len(set(x)) != len(x) or set(c) & set(x):
            raise ValueError(f"creators {c} and annihilators {x} must be distinct spin-orbitals")
        if any(not 0 <= p < 2 * n for p in c + x):
            raise ValueError(f"spin-orbital label outside 0..{2 * n - 1}")
        if sum(p < n for p in c) != sum(p < n for p in x):
            raise ValueError("an excitation must conserve the number of alpha (and beta) electrons")

    def word(self) -> list[tuple[int, bool]]:
        """(spin-orbital, is_creator) left to right."""
        return [(p, True) for p in self.creators] + [(p, False) for p in reversed(self.annihilators)]

    def spin_parts(self) -> tuple[int, list[tuple[int, bool]], list[tuple[int, bool]]]:
        """(sign, alpha word, beta word) with T = sign * T_alpha T_beta, orbital indices per spin."""
        n = self.n_orbitals
        word = self.word()
        inversions = 0
        betas_seen = 0
        for p, _ in word:
            if p >= n:
                betas_seen += 1
            else:
                inversions += betas_seen
        alpha = [(p, d) for p, d in word if p < n]
        beta = [(p - n, d) for p, d in word if p >= n]
        return (-1) ** inversions, alpha, beta

    def label(self) -> str:
        """E.g. '0a 1b -> 2a 3b' (annihilated -> created; a = alpha, b = beta)."""
        def name(p):
            return f"{p % self.n_orbitals}{'a' if p < self.n_orbitals else 'b'}"
        return " ".join(map(name, self.annihilators)) + " -> " + " ".join(map(name, self.creators))


def spin_orbital(p: int, spin: int, n_orbitals: int) -> int:
    """Alpha-block label of spatial orbital ``p`` with spin ALPHA (0) or BETA (1)."""
    return p + spin * n_orbitals


def apply_word(strings: np.ndarray, word: list[tuple[int, bool]]) -> tuple[np.ndarray, np.ndarray]:
    """(result strings, signs) of a product of ladder operators on each string; sign 0 = annihilated."""
    s = np.asarray(strings, dtype=np.uint64).copy()
    sign = np.ones(s.shape, dtype=np.int64)
    one = np.uint64(1)
    for p, creator in reversed(word):
        bit = one << np.uint64(p)
        occupied = (s & bit) != 0
        alive = ~occupied if creator else occupied
        sign = np.where(alive, sign, 0)
        sign = sign * (1 - 2 * parity(s & (bit - one)).astype(np.int64))
        s = np.where(alive, s ^ bit, s)
    return s, sign


# -- the determinant space --------------------------------------------------------


class DeterminantSpace:
    """Alpha strings x beta strings of a sector; the reference is index 0."""

    def __init__(self, n_orbitals: int, n_alpha: int, n_beta: int):
        from pyscf.fci import cistring

        if not (0 <= n_beta <= n_orbitals and 0 <= n_alpha <= n_orbitals):
            raise ValueError(f"{n_alpha} alpha and {n_beta} beta electrons in {n_orbitals} orbitals")
        self.n_orbitals, self.n_alpha, self.n_beta = n_orbitals, n_alpha, n_beta
        self.alpha_strings = np.asarray(cistring.make_strings(range(n_orbitals), n_alpha), dtype=np.uint64)
        self.beta_strings = np.asarray(cistring.make_strings(range(n_orbitals), n_beta), dtype=np.uint64)
        for s in (self.alpha_strings, self.beta_strings):
            if s.size > 1 and np.any(s[1:] <= s[:-1]):
                raise AssertionError("pyscf.fci strings are not in ascending order (internal error)")
        self._pairs: dict = {}

    @property
    def shape(self) -> tuple[int, int]:
        return self.alpha_strings.size, self.beta_strings.size

    @property
    def dimension(self) -> int:
        return self.alpha_strings.size * self.beta_strings.size

    def reference(self) -> np.ndarray:
        """The unit vector of the reference determinant (lowest orbitals filled)."""
        psi = np.zeros(self.dimension)
        psi[0] = 1.0
        return psi

    def determinants(self) -> tuple[np.ndarray, np.ndarray]:
        """(alpha string, beta string) of every flat index."""
        na, nb = self.shape
        return np.repeat(self.alpha_strings, nb), np.tile(self.beta_strings, na)

    def _spin_map(self, strings: np.ndarray, word):
        if not word:
            return np.arange(strings.size), np.arange(strings.size), np.ones(strings.size, dtype=np.int64)
        out, sign = apply_word(strings, word)
        src = np.flatnonzero(sign)
        dst = np.searchsorted(strings, out[src])
        return dst, src, sign[src]

    def pairs(self, excitation: Excitation) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(I, J, sigma) with T|J> = sigma |I> for every determinant J that T does not annihilate.

        Cached per excitation (the arrays are shared; do not modify them).
        """
        if excitation not in self._pairs:
            self._pairs[excitation] = self._compute_pairs(excitation)
        return self._pairs[excitation]

    def _compute_pairs(self, excitation: Excitation):
        if excitation.n_orbitals != self.n_orbitals:
            raise ValueError("excitation and determinant space have different orbital counts")
        eps, wa, wb = excitation.spin_parts()
        ta, fa, sa = self._spin_map(self.alpha_strings, wa)
        tb, fb, sb = self._spin_map(self.beta_strings, wb)
        nb = self.beta_strings.size
        i = (ta[:, None] * nb + tb[None, :]).ravel()
        j = (fa[:, None] * nb + fb[None, :]).ravel()
        sig = (eps * sa[:, None] * sb[None, :]).ravel().astype(float)
        return i.astype(np.int64), j.astype(np.int64), sig

    def apply_generator(self, excitation: Excitation, psi: np.ndarray) -> np.ndarray:
        """tau |psi> for tau = T - T^dagger (a plain reference implementation)."""
        i, j, sig = self.pairs(excitation)
        out = np.zeros_like(psi)
        out[i] += sig * psi[j]
        out[j] -= sig * psi[i]
        return out


# -- the Hamiltonian on the space ----------------------------------------------------


#: Sector dimensions below this are contracted on one OpenMP thread: threading
#: small vectors costs more than it saves, a lot more on a busy machine.
SERIAL_LIMIT = 40_000


class SectorHamiltonian:
    """H |psi> on a determinant space from the active MO integrals (hartree, constant included).

    Uses ``pyscf.fci.direct_spin1`` (absorbed one-electron part, link tables
    built once).
    """

    def __init__(self, integrals, space: DeterminantSpace):
        from pyscf.fci import cistring, direct_spin1

        n = integrals.n_orbitals
        if (n, integrals.n_alpha, integrals.n_beta) != (space.n_orbitals, space.n_alpha, space.n_beta):
            raise ValueError("integrals and determinant space describe different sectors")
        self.space = space
        self.constant = float(integrals.constant_ha)
        self._nelec = (space.n_alpha, space.n_beta)
        self._h2 = direct_spin1.absorb_h1e(np.asarray(integrals.h1_ha), np.asarray(integrals.eri_ha), n,
                                           self._nelec, 0.5)
        self._link = (cistring.gen_linkstr_index_trilidx(range(n), space.n_alpha),
                      cistring.gen_linkstr_index_trilidx(range(n), space.n_beta))
        self._contract = direct_spin1.contract_2e
        self.applications = 0

    def _threads(self):
        """One OpenMP thread for small sectors, PySCF's setting otherwise."""
        from pyscf import lib

        return lib.with_omp_threads(1 if self.space.dimension < SERIAL_LIMIT else None)

    def apply(self, psi: np.ndarray) -> np.ndarray:
        self.applications += 1
        ci = psi.reshape(self.space.shape)
        with self._threads():
            hc = self._contract(self._h2, ci, self.space.n_orbitals, self._nelec, link_index=self._link)
        return np.asarray(hc).reshape(-1) + self.constant * psi

    def energy(self, psi: np.ndarray) -> float:
        return float(psi @ self.apply(psi))

    def spin_square(self, psi: np.ndarray) -> float:
        """<S^2> of a normalised state."""
        from pyscf.fci import spin_op

        with self._threads():
            return float(spin_op.spin_square0(psi.reshape(self.space.shape), self.space.n_orbitals,
                                              self._nelec)[0])


# -- compiled kernel -----------------------------------------------------------------

#: The C source of the two loops (shipped in the package; setup.py compiles it at install time).
KERNEL_SOURCE = Path(__file__).with_name("_determinant_kernel.c")
_KERNEL_MODULE = "_determinant_kernel"
#: NumPy loops / C loops for the state of the LiH/STO-3G UCCSD product (92 factors, 225 determinants),
#: rounded: 26x best of rounds (14 us against 0.36 ms, tests/methods/test_kernel_speed.py), 29x in
#: means, single-threaded on the development machine; quoted in the fallback warning.
NUMPY_SLOWDOWN = 30

_KERNEL: dict = {}


class KernelFallbackWarning(RuntimeWarning):
    """The compiled determinant kernel is unavailable; the NumPy loops run (same results, slower)."""


def _kernel_dir() -> Path:
    env = os.environ.get("BENCHSUITE_KERNEL_DIR")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "benchsuite" / "kernels"


def _installed_kernel() -> Path | None:
    """The library setup.py built beside this module at install time, if there is one."""
    for suffix in importlib.machinery.EXTENSION_SUFFIXES:
        path = Path(__file__).with_name(_KERNEL_MODULE + suffix)
        if path.is_file():
            return path
    return None


def _compiler() -> str:
    """$CC, Python's configured compiler, cc or gcc: the first that is on the PATH."""
    configured = (sysconfig.get_config_var("CC") or "").split()
    for name in [os.environ.get("CC", "").strip()] + configured[:1] + ["cc", "gcc"]:
        if name and shutil.which(name):
            return shutil.which(name)
    raise FileNotFoundError("no C compiler on the PATH")


def source_sha256() -> str:
    """SHA-256 of the shipped C source; every build embeds it (``bs_source_sha256``, see setup.py)."""
    return hashlib.sha256(KERNEL_SOURCE.read_bytes()).hexdigest()


def _build(cc: str, source: str, target: Path, source_sha: str) -> None:
    with tempfile.TemporaryDirectory(dir=target.parent) as tmp:
        src = Path(tmp) / "kernel.c"
        src.write_text(source)
        out = Path(tmp) / "kernel.so"
        subprocess.run([cc, "-O2", "-std=c99", "-shared", "-fPIC", f'-DBS_SOURCE_SHA256="{source_sha}"',
                        "-o", str(out), str(src)], check=True, capture_output=True, timeout=120)
        os.replace(out, target)              # atomic: a concurrent build never leaves half a file


def _compile_kernel() -> ctypes.CDLL:
    """The second route: compile KERNEL_SOURCE into the per-user cache (once per source and compiler)."""
    source, sha = KERNEL_SOURCE.read_text(), source_sha256()
    cc = _compiler()
    tag = hashlib.sha256((source + cc + sys.platform + sysconfig.get_platform()).encode()).hexdigest()[:16]
    folder = _kernel_dir()
    folder.mkdir(parents=True, exist_ok=True, mode=0o700)
    target = folder / f"determinant_{tag}.so"
    if not target.exists():
        _build(cc, source, target, sha)
    try:
        return ctypes.CDLL(str(target))
    except OSError:                          # damaged cache entry: build it again once
        _build(cc, source, target, sha)
        return ctypes.CDLL(str(target))


def _bind(lib: ctypes.CDLL) -> ctypes.CDLL:
    # raw addresses: every array is checked by PairTable / _require before a call
    ptr, n = ctypes.c_void_p, ctypes.c_int64
    lib.bs_forward.restype = None
    lib.bs_forward.argtypes = [ptr, n, ptr, ptr, ptr, ptr, ptr, ptr]
    lib.bs_backward.restype = None
    lib.bs_backward.argtypes = [ptr, ptr, n, ptr, ptr, ptr, ptr, ptr, ptr, ptr]
    lib.bs_pool_gradients.restype = None
    lib.bs_pool_gradients.argtypes = [ptr, ptr, n, ptr, ptr, ptr, ptr]
    lib.bs_source_sha256.restype = ctypes.c_char_p
    lib.bs_source_sha256.argtypes = []
    return lib


def _installed_library(path: Path) -> ctypes.CDLL:
    """The install-time build, if it loads and was built from the shipped source (OSError if not)."""
    lib = _bind(ctypes.CDLL(str(path)))
    if lib.bs_source_sha256().decode() != source_sha256():
        raise OSError("built from another version of _determinant_kernel.c (reinstall to rebuild it)")
    return lib


def _load_kernel() -> tuple[ctypes.CDLL, str]:
    """(library, note): the install-time build, else a first-use build; RuntimeError with both reasons."""
    reasons = []
    installed = _installed_kernel()
    if installed is None:
        reasons.append("not built at install time")
    else:
        try:
            return _installed_library(installed), f"compiled C kernel (installed {installed.name})"
        except (OSError, AttributeError) as exc:      # AttributeError: a symbol is missing
            reasons.append(f"installed {installed.name} not used: {exc}")
    try:
        return _bind(_compile_kernel()), f"compiled C kernel (built at first use; {'; '.join(reasons)})"
    except Exception as exc:  # no compiler, compiler error, read-only cache, ...
        reasons.append(f"first-use build failed: {type(exc).__name__}: {exc}")
    raise RuntimeError("; ".join(reasons))


def kernel_backend() -> str:
    """'c' when the compiled kernel is available, else 'numpy' (the reason in :func:`kernel_note`).

    Decided once per process.  ``BENCHSUITE_DETERMINANT_KERNEL``: unset or ``auto`` (C if it loads,
    else NumPy with one :class:`KernelFallbackWarning` naming the reason), ``numpy`` (NumPy, no
    warning) or ``c`` (C or a RuntimeError).
    """
    if "backend" not in _KERNEL:
        choice = os.environ.get("BENCHSUITE_DETERMINANT_KERNEL", "").strip().lower() or "auto"
        if choice not in ("auto", "numpy", "c"):
            raise ValueError(f"BENCHSUITE_DETERMINANT_KERNEL={choice!r}: use 'numpy', 'c' or 'auto'")
        if choice == "numpy":
            _KERNEL.update(backend="numpy", note="numpy forced by BENCHSUITE_DETERMINANT_KERNEL")
            return "numpy"
        try:
            lib, note = _load_kernel()
        except RuntimeError as exc:
            if choice == "c":
                raise RuntimeError(f"BENCHSUITE_DETERMINANT_KERNEL=c but the C kernel is unavailable: {exc}")
            note = f"C kernel unavailable ({exc}); NumPy loops, about {NUMPY_SLOWDOWN}x slower"
            _KERNEL.update(backend="numpy", note=note)
            warnings.warn(f"benchsuite determinant kernel: {note}. Install a C compiler and reinstall, or "
                          "set BENCHSUITE_DETERMINANT_KERNEL=numpy to choose the NumPy loops silently.",
                          KernelFallbackWarning, stacklevel=2)
        else:
            _KERNEL.update(lib=lib, backend="c", note=note)
    return _KERNEL["backend"]


def kernel_note() -> str:
    kernel_backend()
    return _KERNEL["note"]


def _describe(array) -> str:
    if not isinstance(array, np.ndarray):
        return type(array).__name__
    layout = "C-contiguous" if array.flags.c_contiguous else "not C-contiguous"
    return f"{array.dtype} array of shape {array.shape}, {layout}"


def _require(name: str, array, length: int, dtype, writable: bool = False) -> int:
    """The address of ``array`` after checking it is 1-D, ``length`` long, ``dtype`` and C-contiguous."""
    ok = (isinstance(array, np.ndarray) and array.dtype == dtype and array.ndim == 1
          and array.shape[0] == length and array.flags.c_contiguous and (array.flags.writeable or not writable))
    if not ok:
        want = f"a C-contiguous{' writable' if writable else ''} {np.dtype(dtype)} vector of length {length}"
        raise ValueError(f"determinant kernel argument {name!r}: expected {want}, got {_describe(array)}")
    return array.ctypes.data


@dataclass(frozen=True)
class PairTable:
    """The (I, J, sigma) pairs of every factor, concatenated: factor f owns ``offsets[f]:offsets[f+1]``.

    Checked once when made (lengths, dtypes, ascending offsets, every index inside 0..dimension-1)
    and made read-only; :meth:`pointers` re-checks lengths, dtypes and contiguity before each C call.
    """

    offsets: np.ndarray      # int64, n_factors + 1
    i: np.ndarray            # int64, offsets[-1]
    j: np.ndarray            # int64, offsets[-1]
    sigma: np.ndarray        # float64, offsets[-1]
    dimension: int

    @classmethod
    def build(cls, parts, dimension: int) -> "PairTable":
        parts = list(parts)
        sizes = [np.asarray(p[0]).size for p in parts]
        offsets = np.concatenate([[0], np.cumsum(sizes, dtype=np.int64)]).astype(np.int64)
        cat = (lambda k, dt: np.ascontiguousarray(np.concatenate([p[k] for p in parts]), dtype=dt) if parts
               else np.zeros(0, dtype=dt))
        table = cls(offsets, cat(0, np.int64), cat(1, np.int64), cat(2, np.float64), int(dimension))
        for index in (table.i, table.j):
            if index.size and (index.min() < 0 or index.max() >= dimension):
                raise ValueError(f"pair index outside 0..{dimension - 1}")
        for array in (table.offsets, table.i, table.j, table.sigma):
            array.flags.writeable = False
        table.pointers()
        return table

    def appended(self, pairs) -> "PairTable":
        """A new table with one more factor, ``pairs`` = (I, J, sigma); only the new indices are checked."""
        i, j, sig = (np.asarray(a) for a in pairs)
        for index in (i, j):
            if index.size and (index.min() < 0 or index.max() >= self.dimension):
                raise ValueError(f"pair index outside 0..{self.dimension - 1}")
        offsets = np.append(self.offsets, self.offsets[-1] + i.size).astype(np.int64)
        table = PairTable(offsets, np.concatenate([self.i, i]).astype(np.int64),
                          np.concatenate([self.j, j]).astype(np.int64),
                          np.concatenate([self.sigma, sig]).astype(np.float64), self.dimension)
        for array in (table.offsets, table.i, table.j, table.sigma):
            array.flags.writeable = False
        table.pointers()
        return table

    @property
    def n_factors(self) -> int:
        return self.offsets.size - 1

    def pointers(self) -> tuple[int, int, int, int]:
        n_pairs = int(self.offsets[-1]) if self.offsets.size else -1
        return (_require("offsets", self.offsets, self.n_factors + 1, np.int64),
                _require("i", self.i, n_pairs, np.int64), _require("j", self.j, n_pairs, np.int64),
                _require("sigma", self.sigma, n_pairs, np.float64))


def c_forward(table: PairTable, psi: np.ndarray, cos: np.ndarray, sin: np.ndarray) -> None:
    """The C forward sweep on ``psi`` in place, after checking every array (ValueError)."""
    nf = table.n_factors
    args = (_require("psi", psi, table.dimension, np.float64, writable=True), nf, *table.pointers(),
            _require("cos", cos, nf, np.float64), _require("sin", sin, nf, np.float64))
    _KERNEL["lib"].bs_forward(*args)


def c_backward(table: PairTable, psi, lam, cos, sin, gradient) -> None:
    """The C reverse sweep (``psi``, ``lam`` rotated back, ``gradient`` filled), every array checked."""
    nf = table.n_factors
    args = (_require("psi", psi, table.dimension, np.float64, writable=True),
            _require("lam", lam, table.dimension, np.float64, writable=True), nf, *table.pointers(),
            _require("cos", cos, nf, np.float64), _require("sin", sin, nf, np.float64),
            _require("gradient", gradient, nf, np.float64, writable=True))
    _KERNEL["lib"].bs_backward(*args)


@dataclass(frozen=True)
class CompactPairs:
    """A :class:`PairTable` in a third of the memory, for the pool sweep: int32 I; int32 J with the
    sign folded in (J where sigma = +1, ~J, the bitwise complement, where sigma = -1)."""

    offsets: np.ndarray      # int64, n_factors + 1
    i: np.ndarray            # int32, offsets[-1]
    j_signed: np.ndarray     # int32, offsets[-1]
    dimension: int

    @classmethod
    def from_table(cls, table: PairTable) -> "CompactPairs":
        if table.dimension >= 2 ** 31:
            raise ValueError(f"{table.dimension} determinants do not fit 32-bit pair indices")
        j = table.j.astype(np.int32)
        out = cls(table.offsets, table.i.astype(np.int32), np.where(table.sigma > 0, j, ~j), table.dimension)
        out.j_signed.flags.writeable = out.i.flags.writeable = False
        return out

    @property
    def n_factors(self) -> int:
        return self.offsets.size - 1

    def unpacked(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(I, J, sigma) as int64, int64, float64."""
        negative = self.j_signed < 0
        j = np.where(negative, ~self.j_signed, self.j_signed).astype(np.int64)
        return self.i.astype(np.int64), j, np.where(negative, -1.0, 1.0)

    def pointers(self) -> tuple[int, int, int]:
        n_pairs = int(self.offsets[-1]) if self.offsets.size else -1
        return (_require("offsets", self.offsets, self.n_factors + 1, np.int64),
                _require("i", self.i, n_pairs, np.int32), _require("j_signed", self.j_signed, n_pairs, np.int32))


def c_pool_gradients(pairs: CompactPairs, psi: np.ndarray, hpsi: np.ndarray, gradient: np.ndarray) -> None:
    """The C pool sweep: ``gradient[m] = 2 <hpsi|tau_m|psi>`` for every factor m of ``pairs``, arrays checked."""
    nf = pairs.n_factors
    args = (_require("psi", psi, pairs.dimension, np.float64), _require("hpsi", hpsi, pairs.dimension, np.float64),
            nf, *pairs.pointers(), _require("gradient", gradient, nf, np.float64, writable=True))
    _KERNEL["lib"].bs_pool_gradients(*args)


# -- products of exponentials ------------------------------------------------------


def _checked_backend(backend: str | None) -> str:
    """``backend`` (default: :func:`kernel_backend`), refused unless 'c' (and loaded) or 'numpy'."""
    backend = backend or kernel_backend()
    if backend not in ("c", "numpy"):
        raise ValueError(f"kernel backend {backend!r}: 'c' or 'numpy'")
    if backend == "c" and kernel_backend() != "c":
        raise RuntimeError(kernel_note())
    return backend


class ExponentialProduct:
    """U(theta) = prod over factors k of exp(theta[parameter_index[k]] tau_k), factor 0 acting first.

    Several factors may share a parameter (``parameter_index``); the
    gradient then sums their contributions.  ``reference`` is the state the
    product acts on (default: the reference determinant).
    """

    def __init__(self, space: DeterminantSpace, excitations, parameter_index=None, reference=None,
                 backend: str | None = None):
        self.space = space
        self.excitations = list(excitations)
        k = len(self.excitations)
        self.parameter_index = (np.arange(k) if parameter_index is None
                                else np.asarray(parameter_index, dtype=np.int64))
        if self.parameter_index.shape != (k,):
            raise ValueError("one parameter index per factor")
        self.n_parameters = int(self.parameter_index.max()) + 1 if k else 0
        if k and set(self.parameter_index.tolist()) != set(range(self.n_parameters)):
            raise ValueError("parameter indices must cover 0..n_parameters-1")
        self.reference = space.reference() if reference is None else np.asarray(reference, dtype=float)
        if self.reference.shape != (space.dimension,):
            raise ValueError(f"reference of shape {self.reference.shape} for a space of {space.dimension} "
                             "determinants")
        self.table = PairTable.build((space.pairs(exc) for exc in self.excitations), space.dimension)
        self._off, self._i, self._j, self._sig = self.table.offsets, self.table.i, self.table.j, self.table.sigma
        self.backend = _checked_backend(backend)

    def extended(self, excitations) -> "ExponentialProduct":
        """This product with ``excitations`` (one, or a sequence) appended as the last factors, in
        order, all on one new parameter; the pair table is extended rather than rebuilt (ADAPT)."""
        new = [excitations] if isinstance(excitations, Excitation) else list(excitations)
        out = object.__new__(ExponentialProduct)
        out.__dict__.update(self.__dict__)
        out.excitations = self.excitations + new
        out.parameter_index = np.append(self.parameter_index, [self.n_parameters] * len(new)).astype(np.int64)
        out.n_parameters = self.n_parameters + 1
        table = self.table
        for exc in new:
            table = table.appended(self.space.pairs(exc))
        out.table = table
        out._off, out._i, out._j, out._sig = table.offsets, table.i, table.j, table.sigma
        return out

    @property
    def n_factors(self) -> int:
        return len(self.excitations)

    def _angles(self, theta) -> tuple[np.ndarray, np.ndarray]:
        theta = np.asarray(theta, dtype=float)
        if theta.shape != (self.n_parameters,):
            raise ValueError(f"{theta.shape} parameters for a product of {self.n_parameters}")
        t = theta[self.parameter_index]
        return np.ascontiguousarray(np.cos(t)), np.ascontiguousarray(np.sin(t))

    def state(self, theta) -> np.ndarray:
        """U(theta) |reference>."""
        c, s = self._angles(theta)
        psi = np.array(self.reference, dtype=np.float64, copy=True)
        if self.backend == "c":
            c_forward(self.table, psi, c, s)
        else:
            self._forward_numpy(psi, c, s)
        return psi

    def energy(self, theta, hamiltonian: SectorHamiltonian) -> float:
        return hamiltonian.energy(self.state(theta))

    def energy_and_gradient(self, theta, hamiltonian: SectorHamiltonian):
        """(E, dE/dtheta, U(theta)|reference>) by one forward and one reverse sweep."""
        return self.energy_gradient_and_hpsi(theta, hamiltonian)[:3]

    def energy_gradient_and_hpsi(self, theta, hamiltonian: SectorHamiltonian):
        """(E, dE/dtheta, psi = U(theta)|reference>, H psi): :meth:`energy_and_gradient` and the H psi
        it computes anyway (ADAPT's pool gradients at the optimum need it)."""
        c, s = self._angles(theta)
        psi = self.state(theta)
        lam = hamiltonian.apply(psi)
        lam = np.ascontiguousarray(lam, dtype=np.float64)
        energy = float(psi @ lam)
        final, hpsi = psi.copy(), lam.copy()
        gf = np.zeros(self.n_factors)
        if self.backend == "c":
            c_backward(self.table, psi, lam, c, s, gf)
        else:
            self._backward_numpy(psi, lam, c, s, gf)
        grad = np.bincount(self.parameter_index, weights=gf, minlength=self.n_parameters)
        return energy, grad, final, hpsi

    # numpy versions of the two C loops (identical arithmetic)
    def _forward_numpy(self, psi, c, s):
        for f in range(self.n_factors):
            if s[f] == 0.0:
                continue
            lo, hi = self._off[f], self._off[f + 1]
            i, j, t = self._i[lo:hi], self._j[lo:hi], s[f] * self._sig[lo:hi]
            a, b = psi[i], psi[j]
            psi[i] = c[f] * a + t * b
            psi[j] = c[f] * b - t * a

    def _backward_numpy(self, psi, lam, c, s, gf):
        for f in range(self.n_factors - 1, -1, -1):
            lo, hi = self._off[f], self._off[f + 1]
            i, j, w = self._i[lo:hi], self._j[lo:hi], self._sig[lo:hi]
            pi, pj, li, lj = psi[i], psi[j], lam[i], lam[j]
            gf[f] = 2.0 * float(w @ (li * pj - lj * pi))
            if s[f] != 0.0:
                t = -s[f] * w
                psi[i], psi[j] = c[f] * pi + t * pj, c[f] * pj - t * pi
                lam[i], lam[j] = c[f] * li + t * lj, c[f] * lj - t * li


class GeneratorPool:
    """Many generators at once: the energy gradient of each appended at zero angle to the state psi.

    dE/dtheta_m = <psi|[H, tau_m]|psi> = 2 <H psi|tau_m|psi> (tau_m real anti-symmetric, H real
    symmetric): one H|psi> for the whole pool, then one pass over each generator's pairs (the C
    kernel, or the same sum in NumPy).  Built once per problem; its pairs are kept compact
    (:class:`CompactPairs`), the pass being limited by memory traffic; the space's per-excitation
    cache serves the products grown from it (:meth:`ExponentialProduct.extended`).
    """

    def __init__(self, space: DeterminantSpace, excitations, backend: str | None = None):
        self.space = space
        self.excitations = list(excitations)
        table = PairTable.build((space.pairs(e) for e in self.excitations), space.dimension)
        self.pairs = CompactPairs.from_table(table)
        self.backend = _checked_backend(backend)
        self._owner = np.repeat(np.arange(len(self.excitations)), np.diff(table.offsets))

    def __len__(self) -> int:
        return len(self.excitations)

    def gradients(self, psi: np.ndarray, hpsi: np.ndarray) -> np.ndarray:
        psi = np.ascontiguousarray(psi, dtype=np.float64)
        hpsi = np.ascontiguousarray(hpsi, dtype=np.float64)
        if self.backend == "c":
            out = np.zeros(len(self))
            c_pool_gradients(self.pairs, psi, hpsi, out)
            return out
        i, j, sigma = self.pairs.unpacked()
        w = sigma * (hpsi[i] * psi[j] - hpsi[j] * psi[i])
        return 2.0 * np.bincount(self._owner, weights=w, minlength=len(self))


# -- back to the qubit register --------------------------------------------------------


def register_signs(space: DeterminantSpace, hamiltonian) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(keep, basis states, signs): each determinant's basis state on ``hamiltonian``'s register.

    The amplitude of determinant d on the register is ``signs[d] * psi[d]``:
    the fermionic sign of reordering its creators (alpha block, then beta)
    into ascending register-mode order, times, for each Clifford-rotated
    reduction, prod_i s_i over generators whose removed qubit q_i is 0 in the
    state (U = prod_i (X_{q_i} + Z^{g_i})/sqrt(2) takes |b> with Z^{g_i} = s_i
    to s_i |b with q_i in the X = s_i state> when b_{q_i} = 0, to that state
    itself when b_{q_i} = 1).  ``keep`` marks the determinants inside every
    reduction's symmetry sector (all of them for an unreduced register).
    """
    n = space.n_orbitals
    alpha, beta = space.determinants()
    ia, ib = mode_indices(n, hamiltonian.ordering)
    one = np.uint64(1)
    inversions = np.zeros(alpha.shape, dtype=np.int64)
    for p in range(n):                     # pairs (alpha p, beta q) whose beta mode comes first
        below = np.uint64(sum(1 << q for q in range(n) if ib[q] < ia[p]))
        has_p = ((alpha >> np.uint64(p)) & one).astype(np.int64)
        inversions += has_p * popcount(beta & below).astype(np.int64)
    signs = 1 - 2 * (inversions % 2)
    states = encode_occupations(occupation_masks(alpha, beta, n, hamiltonian.ordering), hamiltonian.table)
    keep = np.ones(states.shape, dtype=bool)
    for red in hamiltonian.reductions:
        inside = red.keep_states(states)
        kept = np.flatnonzero(keep)
        keep[kept[~inside]] = False
        states, signs = states[inside], signs[inside]
        if red.clifford:
            for q, s in zip(red.qubits, red.eigenvalues):
                zero = ((states >> np.uint64(q)) & one) == 0
                signs = np.where(zero, signs * s, signs)
        states = red.reduce_states(states)
    return keep, states, signs


def register_state(space: DeterminantSpace, psi: np.ndarray, hamiltonian, tol: float = 0.0) -> SectorState:
    """The determinant-space state as a :class:`SectorState` of ``hamiltonian``'s register.

    Determinants outside a reduction's symmetry sector are dropped (their
    amplitude must be zero for a state of that sector); amplitudes with
    modulus <= ``tol`` are dropped.  The result is renormalised.
    """
    keep, states, signs = register_signs(space, hamiltonian)
    amps = signs * psi[keep]
    big = np.abs(amps) > tol
    amps, states = amps[big], states[big]
    norm = float(np.linalg.norm(amps))
    if norm == 0.0:
        raise ValueError("the state has no weight inside the register's symmetry sector")
    return SectorState(states.astype(np.uint64), amps / norm, hamiltonian.n_qubits)


def weight_outside(space: DeterminantSpace, psi: np.ndarray, hamiltonian) -> float:
    """Squared norm of ``psi`` on determinants outside the register's symmetry sector (tapering)."""
    keep, _, _ = register_signs(space, hamiltonian)
    return float(np.sum(psi[~keep] ** 2))


def reference_on_register(space: DeterminantSpace, hamiltonian) -> np.ndarray:
    """The reference determinant with the phase that makes it +|hf_state> on the register."""
    keep, _, signs = register_signs(space, hamiltonian)
    if not keep[0]:
        raise ValueError("the reference determinant lies outside the register's symmetry sector")
    psi = space.reference()
    psi[0] = float(signs[0])
    return psi
