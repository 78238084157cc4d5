"""Errors in millihartree, statuses and verdicts.  Pure: no PySCF, no OpenFermion.

Sign convention: ``error_mha = 1000 * (E_method - E_reference)``; positive
means the method lies above the reference (the usual case for a variational
method).  The primary reference is FCI/CASCI in the same orbital space.

Statuses (what happened to the run): ``ok``; ``error`` (the method raised or
its worker died); ``timeout`` (overran its budget, stopped from outside);
``invalid`` (returned something that is not a finite energy, or broke the
result contract); ``below-exact`` (a variational method returned an energy
more than :data:`BELOW_EXACT_TOLERANCE_HA` below the exact sector energy: a
wrong sector, a lost constant, a non-Hermitian bug).

Verdicts (what it means against the threshold) add ``pass``, ``fail`` and
``inconclusive``; see :func:`verdict`.
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

STATUSES = ("ok", "error", "timeout", "invalid", "below-exact")
VERDICTS = ("pass", "fail", "inconclusive", "error", "timeout", "invalid", "below-exact")


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
    """``(status, message)`` for a finite energy of a method that completed."""
    if variational and exact_ha is not None and energy_ha < exact_ha - BELOW_EXACT_TOLERANCE_HA:
        return "below-exact", (f"variational energy {energy_ha:.10f} Eh lies "
                               f"{error_mha(exact_ha, energy_ha):.6f} mHa below the exact sector energy "
                               f"{exact_ha:.10f} Eh: wrong sector or constant?")
    return "ok", ""


def z_value(confidence: float) -> float:
    """Two-sided normal quantile: 0.95 -> 1.959964."""
    return NormalDist().inv_cdf(0.5 + confidence / 2.0)


@dataclass(frozen=True)
class Judgement:
    verdict: str
    error_mha: float | None
    threshold_mha: float
    message: str = ""


def verdict(status: str, energy_ha: float | None, reference_ha: float | None,
            threshold_mha: float = DEFAULT_THRESHOLD_MHA, stderr_ha: float | None = None,
            confidence: float = 0.95) -> Judgement:
    """Judge one result.

    Deterministic (no ``stderr_ha``): ``pass`` when |error| <= threshold, else ``fail``.
    Stochastic with standard error sigma (mHa) and z for ``confidence``:
    ``pass`` if |error| + z sigma <= threshold, ``fail`` if |error| - z sigma > threshold,
    otherwise ``inconclusive``.  A status other than ``ok`` is the verdict itself.
    """
    if status != "ok":
        err = None if energy_ha is None or reference_ha is None else error_mha(energy_ha, reference_ha)
        return Judgement(status, err, threshold_mha)
    if reference_ha is None:
        return Judgement("inconclusive", None, threshold_mha, "no reference energy in this space")
    err = error_mha(energy_ha, reference_ha)
    if stderr_ha is None or stderr_ha == 0.0:
        return Judgement("pass" if abs(err) <= threshold_mha else "fail", err, threshold_mha)
    margin = z_value(confidence) * 1000.0 * stderr_ha
    if abs(err) + margin <= threshold_mha:
        return Judgement("pass", err, threshold_mha)
    if abs(err) - margin > threshold_mha:
        return Judgement("fail", err, threshold_mha)
    return Judgement("inconclusive", err, threshold_mha,
                     f"|error| {abs(err):.4f} mHa within {margin:.4f} mHa ({confidence:.0%}) of the threshold")


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
