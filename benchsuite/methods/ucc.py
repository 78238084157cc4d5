"""Variational unitary-coupled-cluster solvers: ``uccsd-vqe``, ``upccgsd-vqe``, ``adapt-vqe``.

All three simulate their ansatz exactly (no shots, no noise) in the
determinant space of the problem's (N_alpha, N_beta) sector
(:mod:`benchsuite.methods.determinant`): the Jordan-Wigner statevector
restricted to that sector.  Only the returned state and the gate counts
depend on the problem's encoding, ordering and reductions.

Ansatzes (spin-orbital labels and the sign convention of an excitation are
those of :mod:`benchsuite.methods.determinant`: T = a+_a a_i for a single,
T = a+_a a+_b a_j a_i for a double, generator tau = T - T^dagger, real
parameters):

* ``uccsd-vqe``: spin-orbital (not spin-adapted) UCCSD from the reference
  determinant, one Trotter step,
  U(theta) = prod_k exp(theta_k tau_k), the first excitation of the list
  acting first on the reference.  The list: alpha singles, beta singles
  (i ascending, then a ascending), alpha-alpha doubles, beta-beta doubles
  (i < j, a < b), alpha-beta doubles (i_alpha, j_beta, a_alpha, b_beta,
  T = a+_{a alpha} a+_{b beta} a_{j beta} a_{i alpha}); occupied = the
  reference's lowest n_alpha (n_beta) orbitals of each spin, so open shells
  work unchanged.
* ``upccgsd-vqe``: k-UpCCGSD (Lee, Huggins, Head-Gordon & Whaley, J. Chem.
  Theory Comput. 15, 311 (2019)).  Each of k layers (separate parameters,
  layer 1 acting first): generalised singles q -> p for every pair p > q of
  spatial orbitals, alpha then beta, then generalised paired doubles
  (q alpha, q beta) -> (p alpha, p beta) for every p > q.  With
  ``spin_complemented`` the alpha and beta single of a pair share one
  parameter (the two commute, so exp(t tau_a) exp(t tau_b) =
  exp(t (tau_a + tau_b)) exactly).  Zero parameters are a stationary point
  for the generalised singles among occupied (or among virtual) orbitals,
  and equal parameters in every layer have equal gradients there, so the
  default start is seeded random parameters (normal, standard deviation
  0.1, ``numpy.random.default_rng(problem.seed)``).  The landscape has
  local minima; ``starts`` > 1 runs further seeded random starts and keeps
  the lowest energy.
* ``adapt-vqe``: ADAPT-VQE (Grimsley, Economou, Barnes & Mayhall, Nat.
  Commun. 10, 3007 (2019)).  From the reference, repeat: the energy
  gradient of every pool generator appended at zero angle,
  dE/dtheta = 2 <H psi|tau|psi>; stop when their Euclidean norm is below
  ``gradient_threshold`` (converged) or after ``max_operators`` additions;
  otherwise append the generator of largest |gradient| (operators may
  recur) and re-optimise all angles from the previous ones (new angle 0).
  Pools: ``sd`` the spin-orbital singles and doubles of the UCCSD list;
  ``gsd`` generalised spin-orbital singles (p > q, each spin) and doubles
  over four distinct spin-orbitals (alpha-alpha, beta-beta, alpha-beta).
  With ``spin_complemented`` each generator and its alpha<->beta mirror share
  one angle (two factors, the mirror acting second; gradient at zero = the
  sum of the two).  Each re-optimisation after an addition is warm (new
  angle 0) and loose (``growth_tolerance``); by default (``reoptimiser``
  ``bfgs-recycled``) it is dense BFGS started from the previous
  re-optimisation's inverse-Hessian estimate bordered by 1/E'' of the new
  angle, needing no evaluation at its start (energy, state and old
  gradients are unchanged by a factor at angle 0).  ``converged`` means the
  pool gradient fell below the threshold: a stationary point of the pool,
  which can be an excited one (``metadata['stationary_point_only']``).

Optimiser (UCCSD, k-UpCCGSD, ADAPT's final optimisation with ``reoptimiser`` lbfgsb, and any
fallback): scipy's L-BFGS-B with the exact reverse-mode gradient; converged
means the Euclidean norm of the gradient is below ``gradient_tolerance``.
L-BFGS-B is restarted from its last point while it still lowers the
energy, then finished, if needed, by limited-memory BFGS steps with a
gradient-only line search (:func:`minimise` says why).  OpenBLAS runs on
one thread during the optimisation and PySCF's contractions on one OpenMP
thread for sectors below :data:`~benchsuite.methods.determinant.SERIAL_LIMIT`
determinants (tiny calls; threads only add waiting).  With
``problem.time_budget_s`` the optimisation stops at the budget and returns
the lowest energy reached, ``converged=False``.

Resources: the gate counts follow :class:`benchsuite.methods.base.Resources`:
each generator is encoded on the problem's register (its encoding, mode
ordering and reductions) as a sum of commuting Pauli strings; each
exp(-i t P) of weight w costs 2(w - 1) CNOTs in a staircase, depth 2(w - 1),
all exponentials in sequence (so depth equals the CNOT count).
"""

from __future__ import annotations

import json
import math
import os
import time
from contextlib import contextmanager
from dataclasses import dataclass, field
from itertools import combinations

import numpy as np

from benchsuite.chem.ladder import DEFAULT_MAX_DETERMINANTS
from benchsuite.errors import InputError, Refused
from benchsuite.methods.base import MethodResult, Option, QubitProblem, Resources, report_progress
from benchsuite.methods.determinant import (
    ALPHA,
    BETA,
    DeterminantSpace,
    Excitation,
    ExponentialProduct,
    GeneratorPool,
    SectorHamiltonian,
    kernel_note,
    reference_on_register,
    register_state,
    spin_orbital,
    weight_outside,
)
from benchsuite.qubit.encodings import mode_indices
from benchsuite.qubit.majorana import ladder_words_pauli
from benchsuite.qubit.pauli import PauliSum, popcount

COMPILATION = "cnot-staircase"
#: ADAPT-VQE's default for ``spin_complemented``.
SPIN_COMPLEMENTED_DEFAULT = True
#: Standard deviation of the random starting parameters of k-UpCCGSD.
RANDOM_SCALE = 0.1
OPTIMIZER = "scipy L-BFGS-B, exact reverse-mode gradient"
RECYCLED_OPTIMIZER = ("scipy BFGS from the previous inverse-Hessian estimate (L-BFGS-B if it stalls), "
                      "exact reverse-mode gradient")
PRODUCT_ORDER = "U = prod_k exp(theta_k tau_k), first listed excitation acts first on the reference"
SIGN_CONVENTION = ("single T = a+_a a_i, double T = a+_a a+_b a_j a_i (i<j, a<b in alpha-block labels "
                   "P = p (alpha), n + p (beta)), tau = T - T^dagger")


# -- excitation lists ----------------------------------------------------------------


_so = spin_orbital


def reference_singles_doubles(n: int, n_alpha: int, n_beta: int) -> list[Excitation]:
    """Spin-orbital singles and doubles from the reference, in the documented product order."""
    occ = {ALPHA: range(n_alpha), BETA: range(n_beta)}
    vir = {ALPHA: range(n_alpha, n), BETA: range(n_beta, n)}
    out = []
    for spin in (ALPHA, BETA):
        out += [Excitation((_so(a, spin, n),), (_so(i, spin, n),), n) for i in occ[spin] for a in vir[spin]]
    for spin in (ALPHA, BETA):
        out += [Excitation((_so(a, spin, n), _so(b, spin, n)), (_so(i, spin, n), _so(j, spin, n)), n)
                for i, j in combinations(occ[spin], 2) for a, b in combinations(vir[spin], 2)]
    out += [Excitation((_so(a, ALPHA, n), _so(b, BETA, n)), (_so(i, ALPHA, n), _so(j, BETA, n)), n)
            for i in occ[ALPHA] for j in occ[BETA] for a in vir[ALPHA] for b in vir[BETA]]
    return out


def generalised_singles(n: int, spin: int) -> list[Excitation]:
    """q -> p for every p > q, one spin."""
    return [Excitation((_so(p, spin, n),), (_so(q, spin, n),), n) for q, p in combinations(range(n), 2)]


def paired_doubles(n: int) -> list[Excitation]:
    """(q alpha, q beta) -> (p alpha, p beta) for every p > q."""
    return [Excitation((_so(p, ALPHA, n), _so(p, BETA, n)), (_so(q, ALPHA, n), _so(q, BETA, n)), n)
            for q, p in combinations(range(n), 2)]


def generalised_doubles(n: int) -> list[Excitation]:
    """Spin-conserving doubles over four distinct spin-orbitals, one of each +-pair of generators."""
    out = []
    for spin in (ALPHA, BETA):
        pairs = [(_so(p, spin, n), _so(q, spin, n)) for p, q in combinations(range(n), 2)]
        out += [Excitation(c, x, n) for x, c in combinations(pairs, 2) if not set(c) & set(x)]
    for r, p in combinations(range(n), 2):         # alpha r -> p with p > r, beta s -> q, q != s
        for s in range(n):
            for q in range(n):
                if q != s:
                    out.append(Excitation((_so(p, ALPHA, n), _so(q, BETA, n)),
                                          (_so(r, ALPHA, n), _so(s, BETA, n)), n))
    return out


def spin_mirror(excitation: Excitation) -> Excitation:
    """The excitation with every alpha spin-orbital made beta and every beta one alpha (same order)."""
    n = excitation.n_orbitals
    flip = lambda p: p + n if p < n else p - n  # noqa: E731
    return Excitation(tuple(map(flip, excitation.creators)), tuple(map(flip, excitation.annihilators)), n)


def _generator_key(excitation: Excitation) -> tuple:
    """The same key for tau and -tau (T and T^dagger): the two index sets, in a fixed order."""
    c, x = tuple(sorted(excitation.creators)), tuple(sorted(excitation.annihilators))
    return min((c, x), (x, c))


def spin_complemented(candidates) -> list[tuple[Excitation, ...]]:
    """Each candidate with its spin mirror, to share one parameter; a candidate whose mirror is the
    same generator stays alone, and a mirror already grouped (as itself or -itself) is not repeated."""
    groups, seen = [], set()
    for exc in candidates:
        key = _generator_key(exc)
        if key in seen:
            continue
        mirror = spin_mirror(exc)
        seen.update({key, _generator_key(mirror)})
        groups.append((exc,) if _generator_key(mirror) == key else (exc, mirror))
    return groups


def upccgsd_layer(n: int, spin_complemented: bool) -> tuple[list[Excitation], list[int]]:
    """One k-UpCCGSD layer: (excitations, local parameter index of each)."""
    sa, sb = generalised_singles(n, ALPHA), generalised_singles(n, BETA)
    doubles = paired_doubles(n)
    if spin_complemented:
        index = list(range(len(sa))) * 2
    else:
        index = list(range(2 * len(sa)))
    top = max(index) + 1 if index else 0
    index += [top + k for k in range(len(doubles))]
    return sa + sb + doubles, index


# -- resources -----------------------------------------------------------------------


def generator_pauli(excitation: Excitation, hamiltonian) -> PauliSum:
    """tau = T - T^dagger on the problem's register (before reductions if they cannot take it)."""
    n = excitation.n_orbitals
    ia, ib = mode_indices(n, hamiltonian.ordering)
    mode = lambda label: int(ia[label]) if label < n else int(ib[label - n])  # noqa: E731
    word = excitation.word()
    modes = [[mode(p) for p, _ in word], [mode(p) for p, _ in reversed(word)]]
    daggers = [[d for _, d in word], [not d for _, d in reversed(word)]]
    return ladder_words_pauli(hamiltonian.table, modes, daggers, [1.0, -1.0])


def _staircase_cnots(op: PauliSum) -> int:
    weights = popcount(op.x | op.z).astype(np.int64)
    return int(np.sum(2 * np.maximum(weights - 1, 0)))


def staircase_cost(excitations, hamiltonian) -> tuple[int, int, str]:
    """(CNOTs, depth, compilation label) of the exponentials of ``excitations`` in sequence.

    The generators are put through the register's reductions; if one does
    not commute with a tapered symmetry, every count is taken on the
    unreduced register instead (and the label says so).
    """
    ops = [generator_pauli(exc, hamiltonian) for exc in excitations]
    where = ""
    if hamiltonian.reductions:
        try:
            ops = [hamiltonian.transform(op) for op in ops]
            where = " after the register's reductions"
        except ValueError:
            where = " on the unreduced register (a generator does not commute with a tapered symmetry)"
    cnots = sum(_staircase_cnots(op) for op in ops)
    label = (f"{COMPILATION}: exp(-i t P) of weight w as 2(w-1) CNOTs, depth 2(w-1), exponentials in "
             f"sequence, no cancellation; {hamiltonian.encoding}/{hamiltonian.ordering}{where}")
    return cnots, cnots, label


# -- optimisation ------------------------------------------------------------------------


class _OutOfTime(Exception):
    pass


@contextmanager
def serial_blas():
    """Run BLAS and OpenMP on one thread inside the block (restored after; threadpoolctl).

    L-BFGS-B on a few hundred parameters makes many tiny BLAS calls; a
    threaded OpenBLAS spends far longer waking and waiting for its threads
    than computing, badly so when the cores are shared.
    """
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1):
        yield


@dataclass
class Fit:
    """Outcome of one optimisation: the lowest-energy point evaluated."""

    x: np.ndarray
    energy: float
    gradient: np.ndarray
    state: np.ndarray
    iterations: int = 0
    evaluations: int = 0
    restarts: int = 0
    converged: bool = False
    out_of_time: bool = False
    message: str = ""
    hpsi: np.ndarray | None = None      # H |state>, where the optimiser kept it

    @property
    def gradient_norm(self) -> float:
        return float(np.linalg.norm(self.gradient))


def minimise(product: ExponentialProduct, ham: SectorHamiltonian, x0, tolerance: float,
             max_iterations: int, deadline: float | None = None, max_restarts: int = 5,
             progress: bool = False) -> Fit:
    """E(theta) minimised to Euclidean gradient norm < ``tolerance``.

    ``progress``: report (evaluations, best energy, its gradient norm) through
    :func:`~benchsuite.methods.base.report_progress` at every evaluation (a whole
    VQE; ADAPT reports per operator instead).

    L-BFGS-B (restarted while it still lowers the energy), then, if the
    gradient is still above tolerance, :func:`_polish`: near the minimum of
    a molecule with stiff directions (core excitations, curvature of tens
    of Eh) a gradient of 1e-6 is worth less energy than the rounding of
    E itself (~1e-14 Eh), so L-BFGS-B's energy-based line search stalls;
    the polish uses gradients only.
    """
    from scipy.optimize import minimize

    x0 = np.asarray(x0, dtype=float)
    e0, g0, psi0 = product.energy_and_gradient(x0, ham)
    best = Fit(x=x0.copy(), energy=e0, gradient=g0, state=psi0, evaluations=1)
    if x0.size == 0 or best.gradient_norm < tolerance:
        best.converged = True
        best.message = "gradient below tolerance at the start"
        return best

    def evaluate(x):
        if deadline is not None and time.perf_counter() > deadline:
            raise _OutOfTime
        best.evaluations += 1
        return product.energy_and_gradient(x, ham)

    def fun(x):
        e, g, psi = evaluate(x)
        if e < best.energy or (e == best.energy and np.linalg.norm(g) < best.gradient_norm):
            best.x, best.energy, best.gradient, best.state = x.copy(), e, g, psi
        if progress:
            report_progress(iteration=best.evaluations, energy_ha=best.energy, gradient_norm=best.gradient_norm,
                            stage="optimising")
        return e, g

    gtol = tolerance / math.sqrt(x0.size)
    try:
        while best.iterations < max_iterations:
            start_energy = best.energy
            with serial_blas():
                res = minimize(fun, best.x, jac=True, method="L-BFGS-B",
                               options={"maxiter": max_iterations - best.iterations,
                                        "maxfun": 20 * (max_iterations - best.iterations) + 100,
                                        "gtol": gtol, "ftol": 1e-15, "maxcor": 20})
            best.iterations += int(res.nit)
            best.message = str(res.message)
            if best.gradient_norm < tolerance or best.restarts >= max_restarts:
                break
            if not best.energy < start_energy - 1e-12 * max(1.0, abs(start_energy)):
                break
            best.restarts += 1
        if best.gradient_norm >= tolerance and best.iterations < max_iterations:
            x, e, g, psi, steps = _polish(evaluate, best.x, best.energy, best.gradient, best.state, tolerance,
                                          max_iterations - best.iterations)
            best.iterations += steps
            if np.linalg.norm(g) < best.gradient_norm and e <= best.energy + 1e-10 * max(1.0, abs(e)):
                best.x, best.energy, best.gradient, best.state = x, e, g, psi
                best.message += f"; gradient-only polish, {steps} steps"
    except _OutOfTime:
        best.out_of_time = True
        best.message = "time budget reached"
    if best.iterations >= max_iterations and best.gradient_norm >= tolerance:
        best.message = f"iteration cap {max_iterations} reached"
    best.converged = best.gradient_norm < tolerance
    return best


def _positive_definite(matrix: np.ndarray) -> np.ndarray:
    """The symmetric part of ``matrix`` if it is positive definite, else the identity of its size."""
    sym = 0.5 * (matrix + matrix.T)
    try:
        np.linalg.cholesky(sym)
    except np.linalg.LinAlgError:
        return np.eye(sym.shape[0])
    return sym


def minimise_recycled(product: ExponentialProduct, ham: SectorHamiltonian, x0, inverse_hessian: np.ndarray,
                      tolerance: float, max_iterations: int, deadline: float | None = None,
                      start: Fit | None = None) -> tuple[Fit, np.ndarray]:
    """E(theta) by dense BFGS from a given inverse-Hessian estimate; (lowest-energy Fit, final estimate).

    scipy's BFGS (``hess_inv0``, Euclidean gradient norm < ``tolerance``).  ADAPT passes the estimate
    of the previous re-optimisation bordered by the new angle's curvature, so a warm start needs a
    handful of iterations instead of relearning the curvature of every old angle; ``start`` (the
    energy, gradient, state and H psi already known at ``x0``) saves the first evaluation.  The Fit
    keeps H psi of its point (``hpsi``).  If BFGS stops above tolerance (a line search losing
    precision near a stiff minimum), :func:`minimise` finishes from the lowest point; the estimate
    returned is then the one BFGS reached.
    """
    from scipy.optimize import minimize

    x0 = np.asarray(x0, dtype=float)
    if start is None:
        e0, g0, psi0, hpsi0 = product.energy_gradient_and_hpsi(x0, ham)
        start = Fit(x0.copy(), e0, g0, psi0, evaluations=1, hpsi=hpsi0)
    best = start
    if x0.size == 0 or best.gradient_norm < tolerance:
        best.converged, best.message = True, "gradient below tolerance at the start"
        return best, inverse_hessian
    fun = _recording_objective(product, ham, best, deadline)
    inverse_hessian = _positive_definite(inverse_hessian)
    try:
        with serial_blas():
            res = minimize(fun, x0, jac=True, method="BFGS",
                           options={"gtol": tolerance, "norm": 2, "hess_inv0": inverse_hessian,
                                    "maxiter": max_iterations})
    except _OutOfTime:
        best.out_of_time, best.message = True, "time budget reached"
        return best, inverse_hessian
    best.iterations, best.message = int(res.nit), f"BFGS (recycled inverse Hessian): {res.message}"
    best.converged = best.gradient_norm < tolerance
    if not best.converged and best.iterations < max_iterations:
        rest = minimise(product, ham, best.x, tolerance, max_iterations - best.iterations, deadline)
        rest.iterations += best.iterations
        rest.evaluations += best.evaluations
        rest.message = f"{best.message}; then {rest.message}"
        best = rest
    return best, np.asarray(res.hess_inv)


def _recording_objective(product: ExponentialProduct, ham: SectorHamiltonian, best: Fit, deadline):
    """(E, gradient) of theta for scipy; ``best`` keeps the lowest point (with its state and H psi).

    A call at ``best.x`` itself is answered from ``best`` (scipy's first call is at the start).
    """
    def fun(x):
        if np.array_equal(x, best.x):
            return best.energy, best.gradient
        if deadline is not None and time.perf_counter() > deadline:
            raise _OutOfTime
        best.evaluations += 1
        e, g, psi, hpsi = product.energy_gradient_and_hpsi(x, ham)
        if e < best.energy or (e == best.energy and np.linalg.norm(g) < best.gradient_norm):
            best.x, best.energy, best.gradient, best.state, best.hpsi = x.copy(), e, g, psi, hpsi
        return e, g
    return fun


def _polish(evaluate, x, e, g, psi, tolerance: float, max_steps: int, memory: int = 20):
    """Limited-memory BFGS steps whose line search looks at the slope g(x + a d).d only.

    A step is accepted once |slope| <= 0.9 |initial slope| (the strong Wolfe
    curvature condition); the trial step comes from the secant on the
    slope.  Returns (x, E, gradient, state, steps).
    """
    s_hist: list[np.ndarray] = []
    y_hist: list[np.ndarray] = []
    steps = 0
    while steps < max_steps and np.linalg.norm(g) >= tolerance:
        q = g.copy()
        coeffs = []
        for s_k, y_k in zip(reversed(s_hist), reversed(y_hist)):
            rho = 1.0 / (y_k @ s_k)
            a = rho * (s_k @ q)
            coeffs.append((rho, a))
            q -= a * y_k
        if s_hist:
            q *= (s_hist[-1] @ y_hist[-1]) / (y_hist[-1] @ y_hist[-1])
        for (s_k, y_k), (rho, a) in zip(zip(s_hist, y_hist), reversed(coeffs)):
            q += (a - rho * (y_k @ q)) * s_k
        d = -q
        slope0 = float(g @ d)
        if slope0 >= 0:                      # not a descent direction: forget the memory
            s_hist.clear()
            y_hist.clear()
            d = -g
            slope0 = float(g @ d)
        alpha = 1.0 if s_hist else 1e-2 / max(1.0, float(np.linalg.norm(d)))
        accepted = None
        for _ in range(12):
            e1, g1, psi1 = evaluate(x + alpha * d)
            slope1 = float(g1 @ d)
            if abs(slope1) <= 0.9 * abs(slope0):
                accepted = (e1, g1, psi1)
                break
            if slope1 > 0:                   # overshot: secant root inside (0, alpha)
                alpha *= slope0 / (slope0 - slope1)
            elif slope1 > slope0:            # still descending, less steeply: secant beyond alpha
                alpha *= min(slope0 / (slope0 - slope1), 10.0)
            else:                            # steeper than at the start (non-convex here)
                alpha *= 2.0
        steps += 1
        if accepted is None:
            break
        e1, g1, psi1 = accepted
        s_k, y_k = alpha * d, g1 - g
        if s_k @ y_k > 1e-16 * float(np.linalg.norm(s_k) * np.linalg.norm(y_k)):
            s_hist.append(s_k)
            y_hist.append(y_k)
            if len(s_hist) > memory:
                s_hist.pop(0)
                y_hist.pop(0)
        x, e, g, psi = x + s_k, e1, g1, psi1
    return x, e, g, psi, steps


# -- option helpers ------------------------------------------------------------------------


def parse_parameters(text: str, n: int, method: str, option: str) -> np.ndarray | None:
    """Parameters from a comma/space-separated list or a file (JSON list, JSON with
    "parameters", or plain numbers); ``""`` means none."""
    text = text.strip()
    if not text:
        return None
    where = f"option '{option}' of method '{method}'"
    source = text
    if os.path.isfile(text):
        with open(text) as fh:
            source = fh.read()
        try:
            data = json.loads(source)
            if isinstance(data, dict):
                data = data.get("parameters")
            values = [float(v) for v in data]
        except (ValueError, TypeError):
            values = None
    else:
        values = None
    if values is None:
        try:
            values = [float(v) for v in source.replace(",", " ").split()]
        except ValueError:
            raise InputError(f"{where}: cannot read numbers from {text[:60]!r}",
                             field=f"{method}.{option}") from None
    if len(values) != n or not all(math.isfinite(v) for v in values):
        raise InputError(f"{where}: {len(values)} finite values needed {n}", field=f"{method}.{option}")
    return np.array(values)


def first_order_guess(product: ExponentialProduct, ham: SectorHamiltonian, integrals) -> np.ndarray:
    """MP2-like first-order amplitudes for the doubles, zero for the singles.

    theta_k = <T_k ref|H|ref> / (f_i + f_j - f_a - f_b) with f the diagonal
    of the reference's Fock operator of that spin (computed from the
    integrals; the canonical orbital energies for RHF); the numerator is half
    the gradient at theta = 0.  Near-degenerate denominators (< 1e-6 Eh)
    give zero.
    """
    n = integrals.n_orbitals
    h, g = np.asarray(integrals.h1_ha), np.asarray(integrals.eri_ha)
    j = np.einsum("ppkk->pk", g)
    k = np.einsum("pkkp->pk", g)
    na, nb = integrals.n_alpha, integrals.n_beta
    fa = np.diag(h) + j[:, :na].sum(1) - k[:, :na].sum(1) + j[:, :nb].sum(1)
    fb = np.diag(h) + j[:, :nb].sum(1) - k[:, :nb].sum(1) + j[:, :na].sum(1)
    fock = np.concatenate([fa, fb])
    _, grad, _ = product.energy_and_gradient(np.zeros(product.n_parameters), ham)
    theta = np.zeros(product.n_parameters)
    for f, exc in enumerate(product.excitations):
        if len(exc.creators) != 2:
            continue
        denom = sum(fock[p] for p in exc.annihilators) - sum(fock[p] for p in exc.creators)
        if abs(denom) > 1e-6:
            theta[product.parameter_index[f]] = 0.5 * grad[product.parameter_index[f]] / denom
    return theta


# -- shared result assembly ---------------------------------------------------------------


@dataclass
class _Setup:
    space: DeterminantSpace
    ham: SectorHamiltonian
    reference: np.ndarray
    hf_energy: float
    started: float
    deadline: float | None
    notes: list = field(default_factory=list)


#: The UCC methods hold state vectors over the whole (N, S_z) determinant space; larger spaces are
#: refused before any string is made (the reference ladder's default bound for its exact rung).
MAX_STATE_DETERMINANTS = DEFAULT_MAX_DETERMINANTS


def check_state_size(problem: QubitProblem) -> None:
    """Refuse (:class:`~benchsuite.errors.Refused`) a problem whose register is wider than one mask
    word or whose determinant space exceeds :data:`MAX_STATE_DETERMINANTS`."""
    problem.hamiltonian.pauli.register.require_single_word("the UCC state-vector kernel")
    ints = problem.integrals
    n_det = math.comb(ints.n_orbitals, ints.n_alpha) * math.comb(ints.n_orbitals, ints.n_beta)
    if n_det > MAX_STATE_DETERMINANTS:
        raise Refused(f"the UCC state-vector kernel refused: {n_det:,} determinants exceed its limit of "
                      f"{MAX_STATE_DETERMINANTS:,} (benchsuite.methods.ucc.MAX_STATE_DETERMINANTS)",
                      field="n_determinants")


def _setup(problem: QubitProblem) -> _Setup:
    check_state_size(problem)
    ints = problem.integrals
    started = time.perf_counter()
    space = DeterminantSpace(ints.n_orbitals, ints.n_alpha, ints.n_beta)
    ham = SectorHamiltonian(ints, space)
    reference = reference_on_register(space, problem.hamiltonian)
    deadline = None if problem.time_budget_s is None else started + float(problem.time_budget_s)
    return _Setup(space, ham, reference, ham.energy(reference), started, deadline)


def _result(problem: QubitProblem, setup: _Setup, product: ExponentialProduct, fit: Fit,
            ansatz: str, extra: dict) -> MethodResult:
    energy = setup.ham.energy(fit.state)
    cnots, depth, label = staircase_cost(product.excitations, problem.hamiltonian)
    notes = list(setup.notes)
    outside = weight_outside(setup.space, fit.state, problem.hamiltonian)
    if outside > 1e-10:
        notes.append(f"weight {outside:.2e} of the state lies outside the register's tapered symmetry "
                     "sector; the returned state is its renormalised projection")
    if fit.out_of_time:
        notes.append(f"stopped at the time budget of {problem.time_budget_s} s; lowest energy reached returned")
    elif not fit.converged:
        notes.append(f"gradient norm {fit.gradient_norm:.2e} not below tolerance ({fit.message})")
    meta = {
        "ansatz": ansatz,
        "product_order": PRODUCT_ORDER,
        "sign_convention": SIGN_CONVENTION,
        "n_factors": product.n_factors,
        "gradient_norm": fit.gradient_norm,
        "optimizer": OPTIMIZER,
        "optimizer_message": fit.message,
        "optimizer_restarts": fit.restarts,
        "hf_energy_ha": setup.hf_energy,
        "spin_square": setup.ham.spin_square(fit.state),
        "determinant_space_dimension": setup.space.dimension,
        "kernel": kernel_note(),
        "seconds": time.perf_counter() - setup.started,
        "notes": notes,
        **extra,
    }
    return MethodResult(
        energy_ha=energy, converged=bool(fit.converged and not fit.out_of_time), iterations=fit.iterations,
        parameters=[float(v) for v in fit.x],
        resources=Resources(n_parameters=product.n_parameters, two_qubit_gates=cnots, circuit_depth=depth,
                            compilation=label, function_evaluations=fit.evaluations),
        metadata=meta, state=register_state(setup.space, fit.state, problem.hamiltonian, tol=1e-14))


_TOLERANCE = Option("gradient_tolerance", float, 1e-6,
                    "converged when the Euclidean norm of the energy gradient is below this (Eh)",
                    greater_than=0.0)
_MAX_ITER = Option("max_iterations", int, 2000, "L-BFGS-B iteration cap (per optimisation)", minimum=1)
_WARM = Option("warm_start", str, "",
               "starting parameters: comma-separated numbers, or a file holding a JSON list, a JSON "
               "object with 'parameters' (e.g. a saved result) or numbers; overrides 'initial'")


def _starting_point(name: str, options: dict, product: ExponentialProduct, makers: dict):
    """('warm_start', given parameters) or (options['initial'], makers[initial]())."""
    x0 = parse_parameters(options["warm_start"], product.n_parameters, name, "warm_start")
    if x0 is not None:
        return "warm_start", x0
    return options["initial"], makers[options["initial"]]()


# -- the methods ---------------------------------------------------------------------------


class UCCSDVQE:
    """Spin-orbital UCCSD, one Trotter step, optimised with exact gradients."""

    name = "uccsd-vqe"
    description = "UCCSD-VQE: spin-orbital UCCSD product of exponentials, exact gradients, L-BFGS-B"
    options = (
        _MAX_ITER,
        _TOLERANCE,
        Option("initial", str, "zeros", "starting parameters when no warm_start: zeros, or mp2 "
               "(first-order doubles, zero singles)", choices=("zeros", "mp2")),
        _WARM,
    )
    variational = True
    stochastic = False

    def run(self, problem: QubitProblem, options: dict) -> MethodResult:
        setup = _setup(problem)
        ints = problem.integrals
        excitations = reference_singles_doubles(ints.n_orbitals, ints.n_alpha, ints.n_beta)
        product = ExponentialProduct(setup.space, excitations, reference=setup.reference)
        start, x0 = _starting_point(self.name, options, product, {
            "mp2": lambda: first_order_guess(product, setup.ham, ints),
            "zeros": lambda: np.zeros(product.n_parameters)})
        fit = minimise(product, setup.ham, x0, options["gradient_tolerance"], options["max_iterations"],
                       setup.deadline, progress=True)
        return _result(problem, setup, product, fit,
                       "UCCSD, spin-orbital (not spin-adapted), one Trotter step",
                       {"initial": start, "excitations": [e.label() for e in excitations]})


class UpCCGSDVQE:
    """k-UpCCGSD: k layers of generalised singles and generalised paired doubles."""

    name = "upccgsd-vqe"
    description = "k-UpCCGSD-VQE: k layers of generalised singles and paired doubles, exact gradients"
    options = (
        Option("k", int, 2, "number of layers (separate parameters)", minimum=1),
        _MAX_ITER,
        _TOLERANCE,
        Option("initial", str, "random", "starting parameters when no warm_start: random "
               "(normal, scale 0.1, seeded by the problem's seed) or zeros", choices=("random", "zeros")),
        Option("starts", int, 1, "independent optimisations (the first from 'initial' or warm_start, the "
               "others from further seeded random points); the lowest energy is kept", minimum=1),
        Option("spin_complemented", bool, True, "one parameter for the alpha and beta single of an orbital pair"),
        _WARM,
    )
    variational = True
    stochastic = False

    def run(self, problem: QubitProblem, options: dict) -> MethodResult:
        setup = _setup(problem)
        n = problem.n_orbitals
        layer, local = upccgsd_layer(n, options["spin_complemented"])
        per_layer = max(local) + 1 if local else 0
        excitations, index = [], []
        for layer_no in range(options["k"]):
            excitations += layer
            index += [per_layer * layer_no + i for i in local]
        product = ExponentialProduct(setup.space, excitations, index, reference=setup.reference)
        rng = np.random.default_rng(problem.seed)
        start, x0 = _starting_point(self.name, options, product, {
            "random": lambda: rng.normal(scale=RANDOM_SCALE, size=product.n_parameters),
            "zeros": lambda: np.zeros(product.n_parameters)})
        fits = []
        for attempt in range(options["starts"]):
            if attempt:
                x0 = rng.normal(scale=RANDOM_SCALE, size=product.n_parameters)
            fits.append(minimise(product, setup.ham, x0, options["gradient_tolerance"],
                                 options["max_iterations"], setup.deadline, progress=True))
            if fits[-1].out_of_time:
                break
        fit = min(fits, key=lambda f: f.energy)
        energies = [f.energy for f in fits]
        fit.iterations = sum(f.iterations for f in fits)
        fit.evaluations = sum(f.evaluations for f in fits)
        fit.out_of_time = any(f.out_of_time for f in fits)
        return _result(problem, setup, product, fit, f"{options['k']}-UpCCGSD",
                       {"initial": start, "k": options["k"], "spin_complemented": options["spin_complemented"],
                        "start_energies_ha": energies,
                        "layer_excitations": [e.label() for e in layer]})


class AdaptVQE:
    """ADAPT-VQE with a fermionic singles-and-doubles pool."""

    name = "adapt-vqe"
    description = "ADAPT-VQE: grows a product of fermionic excitations by largest energy gradient"
    options = (
        Option("gradient_threshold", float, 1e-3, "stop when the Euclidean norm of the pool gradients is below this",
               greater_than=0.0),
        Option("max_operators", int, 1000, "cap on the number of operators added", minimum=0),
        _MAX_ITER,
        Option("gradient_tolerance", float, 1e-6, "tolerance of the final optimisation (gradient norm, Eh)",
               greater_than=0.0),
        Option("growth_tolerance", float, 1e-4, "tolerance of the re-optimisation after each addition "
               "(gradient norm, Eh; never below gradient_tolerance); the last product is then optimised "
               "to gradient_tolerance", greater_than=0.0),
        Option("reoptimiser", str, "bfgs-recycled", "re-optimisation after each addition: bfgs-recycled "
               "(BFGS warm-started from the previous inverse-Hessian estimate) or lbfgsb (L-BFGS-B afresh)",
               choices=("bfgs-recycled", "lbfgsb")),
        Option("pool", str, "gsd", "sd: spin-orbital singles and doubles from the reference; gsd: "
               "generalised spin-orbital singles and doubles", choices=("sd", "gsd")),
        Option("spin_complemented", bool, SPIN_COMPLEMENTED_DEFAULT, "each pool generator with its alpha<->beta "
               "mirror image on one parameter (two factors, the mirror second)"),
    )
    variational = True
    stochastic = False

    def run(self, problem: QubitProblem, options: dict) -> MethodResult:
        setup = _setup(problem)
        ints = problem.integrals
        n = ints.n_orbitals
        if options["pool"] == "sd":
            candidates = reference_singles_doubles(n, ints.n_alpha, ints.n_beta)
        else:
            candidates = (generalised_singles(n, ALPHA) + generalised_singles(n, BETA)
                          + generalised_doubles(n))
        groups = spin_complemented(candidates) if options["spin_complemented"] else [(c,) for c in candidates]
        growth = _AdaptGrowth(setup, groups, options)
        stop = growth.grow()
        fit = growth.finish()
        fit.converged = stop == "converged" and fit.converged
        fit.out_of_time = fit.out_of_time or stop == "out of time"
        if stop == "converged" and not fit.converged:
            setup.notes.append("last re-optimisation did not reach its gradient tolerance")
        product = growth.product
        result = _result(problem, setup, product, fit, f"ADAPT ({options['pool']} pool)", {
            "pool": options["pool"], "pool_size": len(groups), "adapt_iterations": len(growth.chosen),
            "spin_complemented": options["spin_complemented"],
            "reoptimiser": options["reoptimiser"], "stop": ADAPT_STOPS[stop],
            "optimizer": RECYCLED_OPTIMIZER if options["reoptimiser"] == "bfgs-recycled" else OPTIMIZER,
            **_stationary_point_checks(setup, fit, stop),
            "stop_reason": growth.stop_message, "remaining_pool_gradient_norm": growth.norms[-1],
            "operator_sequence": [" + ".join(e.label() for e in groups[m]) for m in growth.chosen],
            "energy_trajectory": growth.trajectory, "pool_gradient_norms": growth.norms,
            "selected_gradients": growth.largest, "optimizer_iterations": fit.iterations})
        result.iterations = len(growth.chosen)
        return result


#: ``metadata["stop"]`` of an ADAPT result, by the loop's stop: only 'small-pool-gradient' sets
#: ``converged``, and it certifies a stationary point of the pool, not the ground state.
ADAPT_STOPS = {"converged": "small-pool-gradient", "cap": "operator-cap", "out of time": "time-budget"}


def _stationary_point_checks(setup: _Setup, fit: Fit, stop: str) -> dict:
    """Diagnostics of the final state and the flag for a gate: 'converged' here is not 'accurate'.

    ``stationary_point_only`` is true when the run stopped on a small pool gradient: the result's
    ``converged`` then certifies a stationary point of the pool, which can be an excited one (every
    pool gradient 2 <H psi|tau psi> vanishes at any eigenstate), so a gate should report a converged
    result above its threshold as converged but failing.  ``reference_weight`` =
    |<reference|psi>|^2 and ``energy_variance_ha2`` = <H^2> - <H>^2 (Eh^2) describe the state; neither
    tells a ground state from an excited stationary point by itself.
    """
    weight = float(fit.state @ setup.reference) ** 2
    hpsi = fit.hpsi if fit.hpsi is not None else setup.ham.apply(fit.state)
    variance = max(float(hpsi @ hpsi) - float(fit.state @ hpsi) ** 2, 0.0)
    return {"reference_weight": weight, "energy_variance_ha2": variance,
            "stationary_point_only": stop == "converged"}


class _AdaptGrowth:
    """The ADAPT loop: pool gradients at the current state, append the largest, re-optimise warm.

    Each re-optimisation starts from the previous angles with the new one at zero and stops at
    ``growth_tolerance`` (a loose gradient norm: the next pool screening only needs the state,
    and the angles are refined again at every later addition); :meth:`finish` then optimises the
    final product to ``gradient_tolerance``.  With ``reoptimiser`` 'bfgs-recycled' (default) each
    re-optimisation is BFGS started from the previous one's inverse-Hessian estimate, bordered by
    1 / d2E/dtheta2 of the new angle at zero (:meth:`_bordered_inverse_hessian`); 'lbfgsb' starts
    L-BFGS-B afresh every time (the loop before the recycled estimate).
    """

    def __init__(self, setup: _Setup, groups: list, options: dict):
        self.setup, self.groups, self.options = setup, groups, options
        self.pool = GeneratorPool(setup.space, [e for g in groups for e in g])   # built once, reused
        self.member_group = np.repeat(np.arange(len(groups)), [len(g) for g in groups])
        self.tight = options["gradient_tolerance"]
        self.loose = max(options["growth_tolerance"], self.tight)
        self.chosen: list[int] = []
        self.product = ExponentialProduct(setup.space, [], reference=setup.reference)
        self.fit = minimise(self.product, setup.ham, np.zeros(0), self.tight, 1)
        self.inverse_hessian = np.zeros((0, 0))
        self.trajectory, self.norms, self.largest = [setup.hf_energy], [], []
        self.iterations = self.evaluations = 0
        self.stop_message = ""

    def grow(self) -> str:
        """Add operators until a stop; returns 'converged', 'cap' or 'out of time'."""
        while True:
            hpsi = self.fit.hpsi if self.fit.hpsi is not None else self.setup.ham.apply(self.fit.state)
            grads = np.bincount(self.member_group, weights=self.pool.gradients(self.fit.state, hpsi),
                                minlength=len(self.groups))     # a shared angle: the members' sum
            norm = float(np.linalg.norm(grads))
            self.norms.append(norm)
            report_progress(iteration=len(self.chosen), energy_ha=self.fit.energy, gradient_norm=norm)
            stop = self._stop(norm, grads)
            if stop:
                return stop
            pick = int(np.argmax(np.abs(grads)))
            self.largest.append(float(abs(grads[pick])))
            self.chosen.append(pick)
            self.product = self.product.extended(self.groups[pick])
            if self.options["reoptimiser"] == "bfgs-recycled":
                self._optimise_recycled(hpsi, float(grads[pick]))
            else:
                self._optimise(np.append(self.fit.x, 0.0), self.loose)
            self.trajectory.append(self.fit.energy)
            if self.fit.out_of_time:
                self.stop_message = "time budget reached while re-optimising"
                return "out of time"

    def _stop(self, norm: float, grads: np.ndarray) -> str:
        """'converged', 'cap', 'out of time' or '' (go on), with the stop message and note."""
        threshold, cap = self.options["gradient_threshold"], self.options["max_operators"]
        if norm < threshold:
            self.stop_message = (f"stopped on a small pool gradient: norm {norm:.2e} below the threshold "
                                 f"{threshold:g} after {len(self.chosen)} operators (a stationary point "
                                 "of the pool, not necessarily the ground state)")
            self.setup.notes.append(self.stop_message)
            return "converged"
        if len(self.chosen) >= cap:
            largest = float(np.max(np.abs(grads)))
            share = int(np.sum(np.abs(grads) >= 0.01 * threshold))
            tail = "; every one below the threshold: the norm is a tail of many small ones" if largest < threshold else ""
            self.stop_message = (f"not converged: operator cap {cap} reached with pool gradient norm "
                                 f"{norm:.2e} (threshold {threshold:g}); largest |gradient| {largest:.2e}, "
                                 f"{share} of {grads.size} pool members at or above {0.01 * threshold:g}{tail}")
            self.setup.notes.append(self.stop_message)
            return "cap"
        if self.setup.deadline is not None and time.perf_counter() > self.setup.deadline:
            self.stop_message = "time budget reached while growing"
            return "out of time"
        return ""

    def _bordered_inverse_hessian(self, hpsi: np.ndarray) -> np.ndarray:
        """The last inverse-Hessian estimate plus a row and column for the new angle.

        Its diagonal entry is 1 / E'' with E''(0) = <psi|[[H, tau], tau]|psi>
        = 2 <H psi|tau^2 psi> + 2 <tau psi|H|tau psi> (tau real antisymmetric; one H application),
        or 1 where E'' is below 0.05 Eh (flat or concave); for a spin-complemented pair tau is the sum of
        the two generators (exact to first order in the shared angle: a starting estimate only).
        """
        old = self.inverse_hessian
        n = old.shape[0] + 1
        space, psi = self.setup.space, self.fit.state
        taus = self.groups[self.chosen[-1]]
        t_psi = sum(space.apply_generator(tau, psi) for tau in taus)
        tt_psi = sum(space.apply_generator(tau, t_psi) for tau in taus)
        curvature = 2.0 * float(hpsi @ tt_psi) + 2.0 * self.setup.ham.energy(t_psi)
        h0 = np.eye(n)
        h0[:-1, :-1] = old
        h0[-1, -1] = 1.0 / curvature if curvature > 0.05 else 1.0
        return h0

    def _optimise_recycled(self, hpsi: np.ndarray, new_gradient: float) -> None:
        """Warm BFGS after an addition; the start needs no evaluation: the new factor is the identity
        at angle 0, so energy, state and old gradients are the last fit's, the new one its pool gradient."""
        h0 = self._bordered_inverse_hessian(hpsi)
        old = self.fit
        start = Fit(np.append(old.x, 0.0), old.energy, np.append(old.gradient, new_gradient), old.state,
                    hpsi=hpsi)
        self.fit, self.inverse_hessian = minimise_recycled(
            self.product, self.setup.ham, start.x, h0, self.loose, self.options["max_iterations"],
            self.setup.deadline, start)
        self.iterations += self.fit.iterations
        self.evaluations += self.fit.evaluations

    def _optimise(self, x0, tolerance: float) -> None:
        self.fit = minimise(self.product, self.setup.ham, x0, tolerance, self.options["max_iterations"],
                            self.setup.deadline)
        self.iterations += self.fit.iterations
        self.evaluations += self.fit.evaluations

    def finish(self) -> Fit:
        """The final product optimised to ``gradient_tolerance`` (warm), with the run's totals."""
        if self.chosen and not self.fit.out_of_time and self.loose > self.tight:
            if self.options["reoptimiser"] == "bfgs-recycled":
                self.fit, self.inverse_hessian = minimise_recycled(
                    self.product, self.setup.ham, self.fit.x, self.inverse_hessian, self.tight,
                    self.options["max_iterations"], self.setup.deadline)
                self.iterations += self.fit.iterations
                self.evaluations += self.fit.evaluations
            else:
                self._optimise(self.fit.x, self.tight)
            self.trajectory[-1] = self.fit.energy     # the same product, angles finished
        self.fit.iterations, self.fit.evaluations = self.iterations, self.evaluations
        return self.fit


METHODS = (UCCSDVQE, UpCCGSDVQE, AdaptVQE)
