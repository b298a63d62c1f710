"""Decision rules for statements of conformity, per ILAC-G8:09/2019
"Guidelines on Decision Rules and Statements of Conformity". Pure Python.

* ``"simple"``  - simple acceptance, guard band w = 0 (ILAC-G8:09/2019 §4.2.1):
  |E| <= MPE -> "pass", else "fail".
* ``"guarded"`` - guarded acceptance, guard band w = U (ILAC-G8:09/2019 §4.2.2; the
  four zones pass / conditional pass / conditional fail / fail are ILAC-G8's non-binary
  statement with a guard band):
  |E| <= MPE - U            -> "pass"
  MPE - U < |E| <= MPE      -> "conditional pass"   (in the guard band)
  MPE < |E| < MPE + U       -> "conditional fail"
  |E| >= MPE + U            -> "fail"

The binary verdict of a set of points (``verdict_in_tolerance``) is "in tolerance" only when
every point is a plain "pass". Under simple acceptance that is |E| <= MPE at every point, as
before; under guarded acceptance the acceptance limit is MPE - U, so a point in the guard band
(conditional pass) does not show conformity and counts as not conforming - for the stored
verdict, the interval methods, the drift status and the due date. With U at k = 2 (about 95 %
coverage, normal distribution) a measured |E| = MPE - U leaves a risk of about 2.5 % that the
true error is beyond the MPE (ILAC-G8:09/2019 §4.2.2, figure quoted from memory); inside the
guard band that risk grows to about 50 % at |E| = MPE.

error, mpe and U must be on the same basis (use calibration.errors.to_error_units).

Limits are compared with a tolerance (LIMIT_TOLERANCE, see at_limit): an error that lies on a
limit but for binary rounding (10.05 vs 10 -> 0.50000000000007 %) counts as on it.
"""

from __future__ import annotations

import math
from typing import Iterable

PASS = "pass"
CONDITIONAL_PASS = "conditional pass"
CONDITIONAL_FAIL = "conditional fail"
FAIL = "fail"
RULES = ("simple", "guarded")
# decisions that show conformity; a conditional pass (guard band) does not
IN_TOLERANCE = frozenset({PASS})
LIMIT_DECIMALS = 9


def decide(error: float, mpe: float, U: float, rule: str) -> str:
    """Return "pass", "conditional pass", "conditional fail" or "fail" (ILAC-G8:09/2019)."""
    if rule not in RULES:
        raise ValueError(f"unknown decision rule {rule!r}; expected one of {RULES}")
    for name, v in (("error", error), ("mpe", mpe), ("U", U)):
        if v is None or not math.isfinite(float(v)):
            raise ValueError(f"{name} must be a finite number, got {v!r}")
    if mpe <= 0:
        raise ValueError("mpe must be > 0")
    if U < 0:
        raise ValueError("U must be >= 0")
    e = at_limit(abs(error), (mpe - U, mpe, mpe + U))
    if rule == "simple":
        return PASS if e <= mpe else FAIL
    # U carries binary noise (0.1 % of reading comes back as 0.09999999999999999) and the stored error
    # is rounded to LIMIT_DECIMALS; at_limit keeps a point lying on a limit from crossing it.
    if e <= mpe - U:
        return PASS
    if e <= mpe:
        return CONDITIONAL_PASS
    if e < mpe + U:
        return CONDITIONAL_FAIL
    return FAIL


def verdict_in_tolerance(decisions: Iterable[str]) -> bool:
    """Binary verdict: True only if every point decision is a plain "pass" (ILAC-G8:09/2019 §4.2.1/§4.2.2).

    A "conditional pass" (guard band of the guarded rule) is not conforming; simple acceptance
    gives only "pass" or "fail", so its verdicts are unchanged by this.
    """
    decisions = list(decisions)
    _known(decisions)
    return all(d in IN_TOLERANCE for d in decisions)


def _known(decisions) -> None:
    """Refuse a decision that is none of the four (ValueError naming `decisions`)."""
    for d in decisions:
        if d not in (PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, FAIL):
            raise ValueError(f"decisions: unknown decision {d!r}")


def guard_band_only(decisions: Iterable[str]) -> bool:
    """True when the points are not all "pass" only because of guard-band points: at least one
    "conditional pass" and nothing worse (no "conditional fail" or "fail")."""
    decisions = list(decisions)
    _known(decisions)
    return CONDITIONAL_PASS in decisions and all(d in (PASS, CONDITIONAL_PASS) for d in decisions)


def verdict_text(in_tolerance: bool | None, decisions: Iterable[str] = ()) -> str:
    """The binary statement in words: "in tolerance", "out of tolerance", "not conforming (guard band)"
    when only guard-band points stand in the way, or "not determined" when there is no verdict."""
    if in_tolerance is None:
        return "not determined"
    if in_tolerance:
        return "in tolerance"
    return "not conforming (guard band)" if guard_band_only(decisions) else "out of tolerance"


def drift_status_given_verdict(status: str, last_as_found_in_tolerance: bool | None) -> str:
    """The drift status a meter shows, given its last as-found verdict.

    A last as-found verdict that is not conforming makes the status "out_of_tolerance", whatever the
    fitted trend says: under guarded acceptance a guard-band point (conditional pass) is not
    conforming, and a fit against the mean guard band of the event need not see it. Under simple
    acceptance the fit already reports any point beyond the MPE, so this changes nothing there.
    """
    if status not in DRIFT_STATUSES:
        raise ValueError(f"status must be one of {DRIFT_STATUSES}, not {status!r}")
    if last_as_found_in_tolerance is False:
        return "out_of_tolerance"
    return status


DRIFT_STATUSES = ("insufficient", "flat", "scatter", "improving", "drifting", "out_of_tolerance")


#: Relative tolerance of the limit comparisons: one part in 1e9 of the limit (at least 1e-12 in the
#: error's units). Far below the three decimals an error is shown with, far above the rounding of a
#: double (about 1e-16 relative, amplified by ind - ref to at most ~1e-13 at the readings entered).
LIMIT_TOLERANCE = 1e-9


def at_limit(e: float, limits) -> float:
    """`e` moved onto the nearest limit when within LIMIT_TOLERANCE of it, else unchanged.

    Floating-point comparison with a stated tolerance (common practice; cf. Python's math.isclose):
    the reported error is left as computed, only the comparison uses this value."""
    if e is None or isinstance(e, bool) or not math.isfinite(float(e)):
        raise ValueError(f"e must be a finite number, got {e!r}")
    limits = list(limits)
    for limit in limits:
        if limit is None or isinstance(limit, bool) or not math.isfinite(float(limit)):
            raise ValueError(f"limits must be finite numbers, got {limit!r}")
    for limit in limits:
        if abs(e - limit) <= LIMIT_TOLERANCE * max(abs(limit), 1e-3):
            return limit
    return e
