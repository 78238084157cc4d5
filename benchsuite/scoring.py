"""Errors in millihartree, statuses and verdicts.  Pure: no PySCF, no OpenFermion.

Sign convention: ``error_mha = 1000 * (E_method - E_reference)``; positive
means the method lies above the reference (the usual case for a variational
method).  The primary reference is FCI/CASCI in the same orbital space.

Statuses (what happened to the run): ``ok``; ``error`` (the method raised or
its worker died); ``timeout`` (overran its budget, stopped from outside);
``invalid`` (returned something that is not a finite energy, or broke the
result contract); ``below-exact`` (a variational method returned an energy
more than :data:`BELOW_EXACT_TOLERANCE_HA` below the exact sector energy: a
wrong sector, a lost constant, a non-Hermitian bug); ``wrong-state`` (the
method answered for a state other than the declared one: a variational energy
below the declared-spin reference but not below the lowest state of the
(N, S_z) sector, or a returned state whose <N>, <S_z> or <S^2> is off the
declared value by more than :data:`STATE_TOLERANCE`).  Methods report only
``ok``/``error``/``timeout``/``invalid`` (:data:`WORKER_STATUSES`); ``below-exact``
and ``wrong-state`` are decided from their energy and state check by
:func:`result_status`, in the parent process, and nowhere else.

Verdicts (what it means against the threshold) add ``pass``, ``fail``,
``inconclusive`` and ``unconverged``; see :func:`verdict`.  Stochastic results
(with a standard error) get their ``fail`` verdicts from a run-level
multiple-testing procedure, :func:`stochastic_verdicts`.  Which verdicts fail
the gate: :func:`is_failing`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from statistics import NormalDist

from benchsuite.constants import CHEMICAL_ACCURACY_MHA, CONSTANTS_SOURCE

#: A variational energy this far below the exact sector energy is impossible (hartree).
BELOW_EXACT_TOLERANCE_HA = 1e-6

#: Default pass threshold: 1 kcal/mol in mHa (CODATA 2018).
DEFAULT_THRESHOLD_MHA = CHEMICAL_ACCURACY_MHA
THRESHOLD_SOURCE = f"1 kcal/mol = {CHEMICAL_ACCURACY_MHA:.4f} mHa, {CONSTANTS_SOURCE}"

#: A returned state's <N>, <S_z> or <S^2> this far from the declared value is another state.
STATE_TOLERANCE = 1e-4

STATUSES = ("ok", "error", "timeout", "invalid", "below-exact", "wrong-state")
#: What a worker may report; the rest of :data:`STATUSES` is decided by :func:`result_status`.
WORKER_STATUSES = ("ok", "error", "timeout", "invalid")
VERDICTS = ("pass", "fail", "inconclusive", "unconverged", "error", "timeout", "invalid", "below-exact",
            "wrong-state")

#: Verdicts that fail the gate (``inconclusive`` unless the run allows it).
FAILING = ("fail", "inconclusive", "unconverged", "error", "timeout", "invalid", "below-exact", "wrong-state")


#: Multiple-testing procedures for a run's stochastic fail claims (the first is the default).
MULTIPLE_TESTING = ("holm", "bh")


def is_failing(verdict: str, allow_inconclusive: bool = False) -> bool:
    """Whether a task with this verdict fails the gate."""
    return verdict in FAILING and not (allow_inconclusive and verdict == "inconclusive")


#: Verdicts that, for a result its method reports as converged, mean "converged but failing": the
#: method stopped on its own criterion (a small gradient, a stationary point) far from the reference.
CONVERGED_FAILING = ("fail", "wrong-state")


def converged_but_failing(row) -> bool:
    """A result (``verdict``, ``converged``, ``iterations``) whose method iterated and calls itself
    converged, yet whose energy or state fails: not a solver success.  A result with no iterations
    (a determinant's energy, an exact diagonalisation, a plugin leaving the defaults) stopped on no
    criterion of its own and is not marked."""
    return row.converged is True and (row.iterations or 0) > 0 and row.verdict in CONVERGED_FAILING


def error_mha(energy_ha: float, reference_ha: float) -> float:
    """1000 * (E_method - E_reference)."""
    return 1000.0 * (energy_ha - reference_ha)


def as_energy(value) -> float | None:
    """A finite float, or None when ``value`` is not a usable energy (NaN, inf, not a number)."""
    if isinstance(value, bool):
        return None
    try:
        val = float(value)
    except (TypeError, ValueError):
        return None
    return val if math.isfinite(val) else None


def run_status(energy_ha: float, exact_ha: float | None, variational: bool) -> tuple[str, str]:
    """``(status, message)`` from the energy alone (no declared-spin reference, no state check):
    :func:`result_status` with the sector's lowest energy as the only reference."""
    return result_status(energy_ha, exact_ha, exact_ha, variational)


#: Quantities of a state check (:mod:`benchsuite.methods.statecheck`): (key, symbol).
STATE_QUANTITIES = (("n_electrons", "<N>"), ("sz", "<S_z>"), ("s2", "<S^2>"))


def state_deviations(check: dict | None, tolerance: float = STATE_TOLERANCE) -> list[str]:
    """The quantities of a state check that are off their declared values, as phrases.

    ``check`` holds measured values under the keys of :data:`STATE_QUANTITIES` (None: not
    measurable) and the declared ones under ``check["declared"]``.  No check, nothing off.
    """
    if not check or not isinstance(check.get("declared"), dict):
        return []
    off = []
    for key, symbol in STATE_QUANTITIES:
        got, want = as_energy(check.get(key)), as_energy(check["declared"].get(key))
        if got is not None and want is not None and abs(got - want) > tolerance:
            off.append(f"{symbol} = {got:.6f} (declared {want:.6f})")
    return off


def result_status(energy_ha: float, reference_ha: float | None, sector_ha: float | None, variational: bool,
                  state_check: dict | None = None) -> tuple[str, str]:
    """``(status, message)`` of a completed method with a finite energy: the one place where
    ``below-exact`` and ``wrong-state`` are decided.

    ``reference_ha``: the lowest state of the declared spin (FCI/CASCI); ``sector_ha``: the lowest
    state of the (N, S_z) sector, any spin (<= the reference; None: taken equal to it).  In order:
    a variational energy below ``sector_ha`` by more than :data:`BELOW_EXACT_TOLERANCE_HA` is
    ``below-exact``; a state check with a quantity off by more than :data:`STATE_TOLERANCE` is
    ``wrong-state``; a variational energy below ``reference_ha`` (but not below the sector) is
    ``wrong-state``; else ``ok``.
    """
    floor = reference_ha if sector_ha is None else sector_ha
    if variational and floor is not None and energy_ha < floor - BELOW_EXACT_TOLERANCE_HA:
        return "below-exact", (f"variational energy {energy_ha:.10f} Eh lies "
                               f"{error_mha(floor, energy_ha):.6f} mHa below the exact sector energy "
                               f"{floor:.10f} Eh (lowest (N, S_z) state, any spin): wrong sector or constant?")
    off = state_deviations(state_check)
    if off:
        measured = ", ".join(f"{sym} = {state_check[key]:.6f}" for key, sym in STATE_QUANTITIES
                             if as_energy(state_check.get(key)) is not None)
        return "wrong-state", (f"returned state is not the declared one: {'; '.join(off)} "
                               f"(measured {measured}; tolerance {STATE_TOLERANCE:g})")
    if variational and reference_ha is not None and energy_ha < reference_ha - BELOW_EXACT_TOLERANCE_HA:
        return "wrong-state", (f"variational energy {energy_ha:.10f} Eh lies "
                               f"{error_mha(reference_ha, energy_ha):.6f} mHa below the declared-spin "
                               f"reference {reference_ha:.10f} Eh but not below the (N, S_z) sector's "
                               f"lowest state: a state of another spin")
    return "ok", ""


def z_value(confidence: float) -> float:
    """Two-sided normal quantile: 0.95 -> 1.959964."""
    return NormalDist().inv_cdf(0.5 + confidence / 2.0)


@dataclass(frozen=True)
class Judgement:
    """One task's verdict.  ``p_fail`` (stochastic results only) is the p-value of the
    hypothesis "|true error| <= threshold" (see :func:`fail_p_value`), before any
    run-level multiple-testing adjustment."""

    verdict: str
    error_mha: float | None
    threshold_mha: float
    message: str = ""
    p_fail: float | None = None


def fail_p_value(error_mha: float, sigma_mha: float, threshold_mha: float) -> float:
    """p-value of H0: |mu| <= threshold for an error observed as ``error_mha`` ~ N(mu, sigma).

    The test statistic is |error|; its tail probability is largest on the boundary
    |mu| = threshold, so p = Phi((t - |e|)/sigma) + Phi((-t - |e|)/sigma).  A small p is
    evidence that the method misses the threshold.
    """
    nd, a = NormalDist(), abs(error_mha)
    return nd.cdf((threshold_mha - a) / sigma_mha) + nd.cdf((-threshold_mha - a) / sigma_mha)


def fail_level(confidence: float) -> float:
    """Significance level of a fail claim: (1 - confidence) / 2, one side of the two-sided interval.

    For a single task this is the familiar rule "the confidence interval lies wholly beyond
    the threshold"; over a run it is the family-wise (Holm) or false-discovery (BH) level.
    """
    return (1.0 - confidence) / 2.0


def review_note(energy_ha: float | None, reference_ha: float | None, uncertainty_ha: float | None) -> str:
    """For a reference with an uncertainty u (DMRG): a phrase when the energy lies below the
    extrapolated reference by more than u (possible for a variational method only if the
    extrapolation is off: flagged for review), else ''."""
    if energy_ha is None or reference_ha is None or not uncertainty_ha and uncertainty_ha != 0.0:
        return ""
    gap = reference_ha - energy_ha
    if gap > uncertainty_ha + BELOW_EXACT_TOLERANCE_HA:
        return (f"review: energy lies {1000 * gap:.4f} mHa below the extrapolated reference, more than its "
                f"uncertainty u = {1000 * uncertainty_ha:.4f} mHa")
    return ""


def verdict(status: str, energy_ha: float | None, reference_ha: float | None,
            threshold_mha: float = DEFAULT_THRESHOLD_MHA, stderr_ha: float | None = None,
            confidence: float = 0.95, converged: bool | None = None,
            require_converged: bool = False, reference_uncertainty_ha: float | None = None) -> Judgement:
    """Judge one result (a family of one; see :func:`stochastic_verdicts` for a run).

    A status other than ``ok`` is the verdict itself.  ``converged=False`` with
    ``require_converged`` is ``unconverged``.  Deterministic (no ``stderr_ha``): ``pass``
    when |error| <= threshold, else ``fail``.  Stochastic with standard error sigma (mHa)
    and two-sided z for ``confidence``: ``pass`` if |error| + z sigma <= threshold, ``fail``
    if :func:`fail_p_value` <= :func:`fail_level` (|error| - z sigma > threshold up to a
    negligible far tail), otherwise ``inconclusive``.

    A reference with its own uncertainty u (``reference_uncertainty_ha``, a DMRG extrapolation)
    widens both sides: ``pass`` only if |error| + u (+ z sigma) <= threshold, ``fail`` only if
    |error| - u (- z sigma) > threshold (the p-value is taken at |error| - u), else
    ``inconclusive`` with the reason.
    """
    if reference_uncertainty_ha:
        return _verdict_with_u(status, energy_ha, reference_ha, threshold_mha, stderr_ha, confidence,
                               converged, require_converged, 1000.0 * reference_uncertainty_ha)
    err = None if energy_ha is None or reference_ha is None else error_mha(energy_ha, reference_ha)
    if status != "ok":
        return Judgement(status, err, threshold_mha)
    if err is None:
        return Judgement("inconclusive", None, threshold_mha, "no reference energy in this space")
    if converged is False and require_converged:
        return Judgement("unconverged", err, threshold_mha,
                         "the method reports it did not converge (the run requires convergence)")
    if stderr_ha is None or stderr_ha == 0.0:
        return Judgement("pass" if abs(err) <= threshold_mha else "fail", err, threshold_mha)
    sigma = 1000.0 * stderr_ha
    margin = z_value(confidence) * sigma
    p = fail_p_value(err, sigma, threshold_mha)
    if abs(err) + margin <= threshold_mha:
        return Judgement("pass", err, threshold_mha, p_fail=p)
    if p <= fail_level(confidence):
        return Judgement("fail", err, threshold_mha, f"p = {p:.3g} for |error| <= threshold", p_fail=p)
    return Judgement("inconclusive", err, threshold_mha,
                     f"|error| {abs(err):.4f} mHa within {margin:.4f} mHa ({confidence:.0%}) of the threshold",
                     p_fail=p)


def _verdict_with_u(status, energy_ha, reference_ha, threshold_mha, stderr_ha, confidence, converged,
                    require_converged, u_mha: float) -> Judgement:
    """:func:`verdict` against a reference of uncertainty ``u_mha``."""
    base = verdict(status, energy_ha, reference_ha, threshold_mha, None, confidence, converged, require_converged)
    if base.verdict not in ("pass", "fail"):
        return base
    err = base.error_mha
    sigma = 1000.0 * stderr_ha if stderr_ha else 0.0
    margin = z_value(confidence) * sigma
    p = fail_p_value(max(abs(err) - u_mha, 0.0), sigma, threshold_mha) if sigma else None
    if abs(err) + u_mha + margin <= threshold_mha:
        return Judgement("pass", err, threshold_mha, p_fail=p)
    if (p <= fail_level(confidence)) if sigma else abs(err) - u_mha > threshold_mha:
        return Judgement("fail", err, threshold_mha, f"|error| - u = {abs(err) - u_mha:.4f} mHa exceeds the "
                         f"threshold (u = {u_mha:.4f} mHa, the reference's uncertainty)", p_fail=p)
    return Judgement("inconclusive", err, threshold_mha,
                     f"|error| {abs(err):.4f} mHa is within the reference uncertainty u = {u_mha:.4f} mHa"
                     + (f" and {margin:.4f} mHa ({confidence:.0%})" if sigma else "") + " of the threshold",
                     p_fail=p)


# -- run-level control of stochastic fail claims -------------------------------------

def holm_rejections(p_values: list[float], level: float) -> list[bool]:
    """Holm (1979) step-down: family-wise error rate <= ``level`` for any dependence."""
    order = sorted(range(len(p_values)), key=lambda i: p_values[i])
    m, out = len(p_values), [False] * len(p_values)
    for rank, i in enumerate(order):
        if p_values[i] > level / (m - rank):
            break
        out[i] = True
    return out


def bh_rejections(p_values: list[float], level: float) -> list[bool]:
    """Benjamini & Hochberg (1995) step-up: false-discovery rate <= ``level`` (independent tests)."""
    order = sorted(range(len(p_values)), key=lambda i: p_values[i])
    m, cutoff = len(p_values), -1
    for rank, i in enumerate(order):
        if p_values[i] <= (rank + 1) * level / m:
            cutoff = rank
    out = [False] * m
    for i in order[:cutoff + 1]:
        out[i] = True
    return out


def stochastic_verdicts(judgements: list[Judgement], confidence: float = 0.95,
                        procedure: str = "holm") -> list[Judgement]:
    """The run's stochastic judgements with fail claims controlled over the run.

    The family is every judgement with a ``p_fail``.  A per-task ``fail`` stands only
    if ``procedure`` (``holm``: family-wise error rate; ``bh``: false-discovery rate)
    rejects "|error| <= threshold" at :func:`fail_level`; otherwise it becomes
    ``inconclusive`` with the adjusted reason.  ``pass`` needs no adjustment: the run
    passes only if every task passes, and an intersection-union test of level alpha
    per task has level alpha overall (Berger 1982).  Others are returned unchanged.
    """
    if procedure not in MULTIPLE_TESTING:
        raise ValueError(f"unknown multiple-testing procedure {procedure!r}; one of {MULTIPLE_TESTING}")
    family = [i for i, j in enumerate(judgements) if j.p_fail is not None]
    rule = holm_rejections if procedure == "holm" else bh_rejections
    rejected = rule([judgements[i].p_fail for i in family], fail_level(confidence))
    out = list(judgements)
    for i, keep in zip(family, rejected):
        j = judgements[i]
        if j.verdict == "fail" and not keep:
            out[i] = Judgement("inconclusive", j.error_mha, j.threshold_mha,
                               f"p = {j.p_fail:.3g} for |error| <= threshold is not significant after "
                               f"{PROCEDURE_NAMES[procedure]} over {len(family)} stochastic task(s)",
                               p_fail=j.p_fail)
    return out


PROCEDURE_NAMES = {"holm": "Holm-Bonferroni", "bh": "Benjamini-Hochberg"}


# -- statistics -------------------------------------------------------------------

@dataclass(frozen=True)
class CurveStatistics:
    """Along one scan, from the points whose errors exist (mHa).

    ``non_parallelity_mha`` = max(error) - min(error): how far the method's curve
    departs from being a rigid shift of the reference curve (common practice in
    bond-breaking benchmarks).
    """

    scan: str
    n_points: int
    max_abs_error_mha: float
    non_parallelity_mha: float


@dataclass(frozen=True)
class MethodStatistics:
    """Over one method's tasks: errors (mHa) of tasks with an energy and a reference."""

    method: str
    n_tasks: int
    n_scored: int
    mae_mha: float | None
    rmse_mha: float | None
    max_abs_error_mha: float | None
    pass_rate: float


def curve_statistics(scan: str, errors_mha: list[float | None]) -> CurveStatistics | None:
    vals = [e for e in errors_mha if e is not None]
    if not vals:
        return None
    return CurveStatistics(scan, len(vals), max(abs(e) for e in vals), max(vals) - min(vals))


def method_statistics(method: str, errors_mha: list[float | None], verdicts: list[str]) -> MethodStatistics:
    vals = [e for e in errors_mha if e is not None]
    n = len(verdicts)
    if not vals:
        return MethodStatistics(method, n, 0, None, None, None, verdicts.count("pass") / n if n else 0.0)
    mae = sum(abs(e) for e in vals) / len(vals)
    rmse = math.sqrt(sum(e * e for e in vals) / len(vals))
    return MethodStatistics(method, n, len(vals), mae, rmse, max(abs(e) for e in vals),
                            verdicts.count("pass") / n)
