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

The loops run in a small C kernel compiled on first use with the system C
compiler (cached per user; see :func:`kernel_backend`); without a compiler,
or with ``BENCHSUITE_DETERMINANT_KERNEL=numpy``, an equivalent numpy loop is
used (same results, slower by about two orders of magnitude per factor).
"""

from __future__ import annotations

import ctypes
import hashlib
import os
import shutil
import subprocess
import sys
import sysconfig
import tempfile
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

_C_SOURCE = r"""
#include <stdint.h>

/* psi_I <- c psi_I + s sg psi_J,  psi_J <- c psi_J - s sg psi_I  for every pair of every factor */
void bs_forward(double *psi, int64_t nf, const int64_t *off, const int64_t *ii, const int64_t *jj,
                const double *sg, const double *cs, const double *sn)
{
    for (int64_t f = 0; f < nf; f++) {
        const double c = cs[f], s = sn[f];
        if (s == 0.0) continue;
        for (int64_t k = off[f]; k < off[f + 1]; k++) {
            const int64_t i = ii[k], j = jj[k];
            const double a = psi[i], b = psi[j], t = s * sg[k];
            psi[i] = c * a + t * b;
            psi[j] = c * b - t * a;
        }
    }
}

/* reverse sweep: gf[f] = 2 <lam|tau_f|psi>, then both vectors rotated back by exp(-theta_f tau_f) */
void bs_backward(double *psi, double *lam, int64_t nf, const int64_t *off, const int64_t *ii,
                 const int64_t *jj, const double *sg, const double *cs, const double *sn, double *gf)
{
    for (int64_t f = nf - 1; f >= 0; f--) {
        const double c = cs[f], s = -sn[f];
        double g = 0.0;
        for (int64_t k = off[f]; k < off[f + 1]; k++) {
            const int64_t i = ii[k], j = jj[k];
            const double w = sg[k], pi = psi[i], pj = psi[j], li = lam[i], lj = lam[j];
            g += w * (li * pj - lj * pi);
            if (s != 0.0) {
                const double t = s * w;
                psi[i] = c * pi + t * pj;
                psi[j] = c * pj - t * pi;
                lam[i] = c * li + t * lj;
                lam[j] = c * lj - t * li;
            }
        }
        gf[f] = 2.0 * g;
    }
}
"""

_KERNEL: dict = {}


def _kernel_dir() -> Path:
    env = os.environ.get("BENCHSUITE_KERNEL_DIR")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "benchsuite" / "kernels"


def _compiler() -> str:
    """$CC, Python's configured compiler, cc or gcc: the first that is on the PATH."""
    configured = (sysconfig.get_config_var("CC") or "").split()
    for name in [os.environ.get("CC", "").strip()] + configured[:1] + ["cc", "gcc"]:
        if name and shutil.which(name):
            return shutil.which(name)
    raise FileNotFoundError("no C compiler on the PATH")


def _build(cc: str, target: Path) -> None:
    with tempfile.TemporaryDirectory(dir=target.parent) as tmp:
        src = Path(tmp) / "kernel.c"
        src.write_text(_C_SOURCE)
        out = Path(tmp) / "kernel.so"
        subprocess.run([cc, "-O2", "-std=c99", "-shared", "-fPIC", "-o", str(out), str(src)],
                       check=True, capture_output=True, timeout=120)
        os.replace(out, target)              # atomic: a concurrent build never leaves half a file


def _compile_kernel():
    cc = _compiler()
    tag = hashlib.sha256((_C_SOURCE + cc + sys.platform + sysconfig.get_platform()).encode()).hexdigest()[:16]
    folder = _kernel_dir()
    folder.mkdir(parents=True, exist_ok=True, mode=0o700)
    target = folder / f"determinant_{tag}.so"
    if not target.exists():
        _build(cc, target)
    try:
        lib = ctypes.CDLL(str(target))
    except OSError:                          # damaged cache entry: build it again once
        _build(cc, target)
        lib = ctypes.CDLL(str(target))
    # raw addresses: every array passed is a C-contiguous float64/int64 array made by this module
    ptr, n = ctypes.c_void_p, ctypes.c_int64
    lib.bs_forward.restype = None
    lib.bs_forward.argtypes = [ptr, n, ptr, ptr, ptr, ptr, ptr, ptr]
    lib.bs_backward.restype = None
    lib.bs_backward.argtypes = [ptr, ptr, n, ptr, ptr, ptr, ptr, ptr, ptr, ptr]
    return lib


def kernel_backend() -> str:
    """'c' when the compiled kernel is available, else 'numpy' (the reason in :func:`kernel_note`)."""
    if "backend" not in _KERNEL:
        if os.environ.get("BENCHSUITE_DETERMINANT_KERNEL", "").lower() == "numpy":
            _KERNEL.update(backend="numpy", note="numpy forced by BENCHSUITE_DETERMINANT_KERNEL")
        else:
            try:
                _KERNEL.update(lib=_compile_kernel(), backend="c", note="compiled C kernel")
            except Exception as exc:  # no compiler, read-only home, ...: fall back, same results
                _KERNEL.update(backend="numpy", note=f"C kernel unavailable ({type(exc).__name__}: {exc})")
    return _KERNEL["backend"]


def kernel_note() -> str:
    kernel_backend()
    return _KERNEL["note"]


# -- products of exponentials ------------------------------------------------------


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
        ii, jj, sg, off = [], [], [], [0]
        for exc in self.excitations:
            i, j, s = space.pairs(exc)
            ii.append(i)
            jj.append(j)
            sg.append(s)
            off.append(off[-1] + i.size)
        cat = (lambda parts, dt: np.ascontiguousarray(np.concatenate(parts), dtype=dt) if parts
               else np.zeros(0, dtype=dt))
        self._i, self._j = cat(ii, np.int64), cat(jj, np.int64)
        self._sig = cat(sg, np.float64)
        self._off = np.asarray(off, dtype=np.int64)
        self.backend = backend or kernel_backend()
        if self.backend == "c" and kernel_backend() != "c":
            raise RuntimeError(kernel_note())
        self._static = (self._off.ctypes.data, self._i.ctypes.data, self._j.ctypes.data, self._sig.ctypes.data)

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
            _KERNEL["lib"].bs_forward(psi.ctypes.data, self.n_factors, *self._static, c.ctypes.data, s.ctypes.data)
        else:
            self._forward_numpy(psi, c, s)
        return psi

    def energy(self, theta, hamiltonian: SectorHamiltonian) -> float:
        return hamiltonian.energy(self.state(theta))

    def energy_and_gradient(self, theta, hamiltonian: SectorHamiltonian):
        """(E, dE/dtheta, U(theta)|reference>) by one forward and one reverse sweep."""
        c, s = self._angles(theta)
        psi = self.state(theta)
        lam = hamiltonian.apply(psi)
        lam = np.ascontiguousarray(lam, dtype=np.float64)
        energy = float(psi @ lam)
        final = psi.copy()
        gf = np.zeros(self.n_factors)
        if self.backend == "c":
            _KERNEL["lib"].bs_backward(psi.ctypes.data, lam.ctypes.data, self.n_factors, *self._static,
                                       c.ctypes.data, s.ctypes.data, gf.ctypes.data)
        else:
            self._backward_numpy(psi, lam, c, s, gf)
        grad = np.bincount(self.parameter_index, weights=gf, minlength=self.n_parameters)
        return energy, grad, final

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
    """Many generators at once: the energy gradient 2 <H psi| tau_m |psi> of each at a state."""

    def __init__(self, space: DeterminantSpace, excitations):
        self.space = space
        self.excitations = list(excitations)
        parts = [space.pairs(e) for e in self.excitations]
        self._i = np.concatenate([p[0] for p in parts]) if parts else np.zeros(0, np.int64)
        self._j = np.concatenate([p[1] for p in parts]) if parts else np.zeros(0, np.int64)
        self._sig = np.concatenate([p[2] for p in parts]) if parts else np.zeros(0)
        self._owner = np.repeat(np.arange(len(parts)), [p[0].size for p in parts])

    def __len__(self) -> int:
        return len(self.excitations)

    def gradients(self, psi: np.ndarray, hpsi: np.ndarray) -> np.ndarray:
        w = self._sig * (hpsi[self._i] * psi[self._j] - hpsi[self._j] * psi[self._i])
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
