"""Verdict logic, table-tested; the threshold and conversions against CODATA 2018."""

from __future__ import annotations

import math

import pytest

from benchsuite import scoring
from benchsuite.constants import HARTREE_KCAL_MOL
from benchsuite.scoring import as_energy, error_mha, run_status, verdict, z_value

REF = -1.0

# (status, energy_ha, stderr_ha, threshold_mha, expected verdict)
TABLE = [
    ("ok", REF + 0.0015, None, 1.5936, "pass"),            # 1.5 mHa above
    ("ok", REF - 0.0015, None, 1.5936, "pass"),            # |error| counts, not its sign
    ("ok", REF + 0.0015936, None, 1.5936, "pass"),         # exactly at the threshold
    ("ok", REF + 0.0016, None, 1.5936, "fail"),
    ("ok", REF + 0.0030, None, 5.0, "pass"),               # a looser per-case threshold
    ("ok", REF + 0.0010, 0.0001, 1.5936, "pass"),          # 1.0 + 1.96*0.1 = 1.196 <= 1.5936
    ("ok", REF + 0.0010, 0.0004, 1.5936, "inconclusive"),  # 1.0 + 0.78 > 1.59 and 1.0 - 0.78 < 1.59
    ("ok", REF + 0.0030, 0.0004, 1.5936, "fail"),          # 3.0 - 0.78 > 1.59
    ("ok", REF + 0.0020, 0.0002, 1.5936, "fail"),          # 2.0 - 0.39 = 1.608 > 1.5936
    ("ok", REF + 0.0019, 0.0002, 1.5936, "inconclusive"),  # 1.9 - 0.39 = 1.508 < 1.5936 < 1.9
    ("error", None, None, 1.5936, "error"),
    ("timeout", None, None, 1.5936, "timeout"),
    ("invalid", None, None, 1.5936, "invalid"),
    ("below-exact", REF - 0.01, None, 1.5936, "below-exact"),
    ("wrong-state", REF + 0.0007, None, 1.5936, "wrong-state"),   # within the threshold, still failing
]


@pytest.mark.parametrize("status, energy, stderr, threshold, expected", TABLE)
def test_verdict_table(status, energy, stderr, threshold, expected):
    assert verdict(status, energy, REF, threshold, stderr).verdict == expected


def test_inconclusive_boundary_moves_with_confidence():
    e, s = REF + 0.0012, 0.0002     # 1.2 mHa, sigma 0.2 mHa
    assert verdict("ok", e, REF, 1.5936, s, confidence=0.95).verdict == "pass"       # 1.2 + 0.39 < 1.5936
    assert verdict("ok", e, REF, 1.5936, s, confidence=0.999).verdict == "inconclusive"  # 1.2 + 0.66


def test_below_exact_status():
    status, msg = run_status(REF - 2e-6, REF, variational=True)
    assert status == "below-exact" and "below the exact sector energy" in msg
    assert run_status(REF - 0.5e-6, REF, variational=True)[0] == "ok"       # within tolerance
    assert run_status(REF - 2e-6, REF, variational=False)[0] == "ok"       # sampled energies may dip
    assert scoring.BELOW_EXACT_TOLERANCE_HA == 1e-6


SECTOR = REF - 0.030       # a lower state of another spin in the same (N, S_z) sector
SINGLET = {"n_electrons": 2.0, "sz": 0.0, "s2": 0.0}


def _check(**measured):
    return {"checked": True, **SINGLET, **measured, "declared": dict(SINGLET)}


@pytest.mark.parametrize("energy, variational, check, status, words", [
    (REF + 0.001, True, _check(), "ok", ""),
    (SECTOR, True, None, "wrong-state", "below the declared-spin reference"),   # the sector's lowest: other spin
    (SECTOR - 2e-6, True, None, "below-exact", "below the exact sector energy"),
    (REF - 0.010, False, None, "ok", ""),                                      # not variational: may dip
    (REF + 0.0007, False, _check(s2=2.0), "wrong-state", "<S^2> = 2.000000 (declared 0.000000)"),
    (REF + 0.0007, True, _check(s2=0.99e-4), "ok", ""),                    # inside the 1e-4 tolerance
    (REF + 0.0007, True, _check(s2=1.01e-4), "wrong-state", "<S^2>"),
    (REF, True, _check(n_electrons=1.9), "wrong-state", "<N> = 1.900000 (declared 2.000000)"),
    (REF, True, _check(sz=0.5), "wrong-state", "<S_z> = 0.500000"),
    (REF, True, {"checked": False, "declared": dict(SINGLET)}, "ok", ""),
    (REF, True, _check(s2=None), "ok", ""),                                   # S^2 not measurable (tapered)
])
def test_result_status(energy, variational, check, status, words):
    got, message = scoring.result_status(energy, REF, SECTOR, variational, check)
    assert got == status and words in message


def test_wrong_state_fails_the_gate():
    assert "wrong-state" in scoring.STATUSES and "wrong-state" in scoring.VERDICTS
    assert scoring.is_failing("wrong-state", allow_inconclusive=True)
    assert "wrong-state" not in scoring.WORKER_STATUSES and scoring.STATE_TOLERANCE == 1e-4


def test_energy_validation():
    assert as_energy(-1.5) == -1.5 and as_energy(-1) == -1.0
    for bad in (math.nan, math.inf, "-1.1 Ha", None, True, [1.0]):
        assert as_energy(bad) is None


def test_error_sign_and_units():
    assert error_mha(-1.001, -1.002) == pytest.approx(1.0)
    assert error_mha(-1.002, -1.001) == pytest.approx(-1.0)


def test_threshold_is_one_kcal_per_mol_codata_2018():
    """1 kcal/mol = 1000/627.5094740631 mHa = 1.5936 mHa (CODATA 2018: Tiesinga et al., Rev. Mod.
    Phys. 93, 025010, 2021)."""
    assert scoring.DEFAULT_THRESHOLD_MHA == pytest.approx(1000 / 627.5094740631, rel=1e-13)
    assert round(scoring.DEFAULT_THRESHOLD_MHA, 4) == 1.5936
    assert HARTREE_KCAL_MOL == 627.5094740631
    assert "CODATA 2018" in scoring.THRESHOLD_SOURCE


def test_z_value():
    """Standard normal two-sided quantiles (common practice): 95 % -> 1.959964, 99 % -> 2.575829."""
    assert z_value(0.95) == pytest.approx(1.959964, abs=1e-6)
    assert z_value(0.99) == pytest.approx(2.575829, abs=1e-6)


def test_curve_and_method_statistics():
    from benchsuite.scoring import curve_statistics, method_statistics

    curve = curve_statistics("h2-scan", [0.5, 1.5, None, -0.5])
    assert curve.n_points == 3 and curve.max_abs_error_mha == 1.5 and curve.non_parallelity_mha == 2.0
    assert curve_statistics("empty", [None]) is None
    stats = method_statistics("m", [1.0, -2.0, None], ["pass", "fail", "error"])
    assert stats.mae_mha == pytest.approx(1.5)
    assert stats.rmse_mha == pytest.approx(math.sqrt(2.5))
    assert stats.max_abs_error_mha == 2.0
    assert stats.pass_rate == pytest.approx(1 / 3)


# -- verdicts against a reference with its own uncertainty (a DMRG extrapolation) ------------------
# The rule (issue 13): pass only if |error| + u <= threshold, fail only if |error| - u > threshold,
# else inconclusive.  Threshold 1.5936 mHa (1 kcal/mol, CODATA 2018); synthetic u = 0.5 mHa.

def test_uncertainty_straddling_threshold_is_inconclusive():
    from benchsuite.scoring import verdict
    ref, u = -10.0, 0.5e-3
    j = verdict("ok", ref + 1.4e-3, ref, 1.5936, reference_uncertainty_ha=u)
    assert j.verdict == "inconclusive" and "uncertainty" in j.message
    assert verdict("ok", ref + 1.4e-3, ref, 1.5936).verdict == "pass"       # without u it would pass
    assert verdict("ok", ref + 1.0e-3, ref, 1.5936, reference_uncertainty_ha=u).verdict == "pass"
    assert verdict("ok", ref + 2.2e-3, ref, 1.5936, reference_uncertainty_ha=u).verdict == "fail"
    assert verdict("ok", ref + 1.8e-3, ref, 1.5936, reference_uncertainty_ha=u).verdict == "inconclusive"


def test_uncertainty_adds_to_stochastic_margin():
    """sigma = 0.2 mHa at 95 %: z sigma = 0.392 mHa; |error| 0.6 + u 0.5 + 0.392 = 1.492 <= 1.5936 passes,
    |error| 1.0 does not (1.892) but is not a fail either."""
    from benchsuite.scoring import verdict
    ref = -10.0
    assert verdict("ok", ref + 0.6e-3, ref, 1.5936, 0.2e-3, reference_uncertainty_ha=0.5e-3).verdict == "pass"
    assert verdict("ok", ref + 1.0e-3, ref, 1.5936, 0.2e-3, reference_uncertainty_ha=0.5e-3).verdict == "inconclusive"
    assert verdict("ok", ref + 3.5e-3, ref, 1.5936, 0.2e-3, reference_uncertainty_ha=0.5e-3).verdict == "fail"


def test_below_extrapolation_by_more_than_u_is_flagged():
    from benchsuite.scoring import review_note
    assert review_note(-10.0 - 0.7e-3, -10.0, 0.5e-3).startswith("review:")
    assert review_note(-10.0 - 0.3e-3, -10.0, 0.5e-3) == ""
    assert review_note(-10.0 - 0.7e-3, -10.0, None) == ""
