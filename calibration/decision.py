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

* ``"risk"``    - risk-based acceptance (JCGM 106:2012 §8-§9; issue 31): the acceptance limit A of each point is the
  one that keeps the global probability of false accept at or below the PFA target (setting QUENBY_PFA_TARGET,
  2 % by default, ANSI/NCSL Z540.3 §5.3 b), given the prior of like devices and the point's U / k
  (calibration.conformity.acceptance_limits_for_pfa; 0 <= A <= MPE):
  |E| <= A                  -> "pass"
  A < |E| <= MPE            -> "conditional pass"   (inside the MPE, not accepted: conformity not decided)
  |E| > MPE                 -> "fail"

Which in/out each consumer uses (issue 31): the statement of conformity (the stored verdicts, the certificate)
uses the rule; the interval methods and the reliability statistics count the observed as-found condition,
|E| <= MPE (``observed_in_tolerance``; NCSL RP-1 counts observed reliability), so a point inside the MPE that a
weak reference could not accept prompts a better reference, not a shorter interval.

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
RULES = ("simple", "guarded", "risk")
# decisions that show conformity; a conditional pass (guard band) does not
IN_TOLERANCE = frozenset({PASS})
LIMIT_DECIMALS = 9


def decide(error: float, mpe: float, U: float, rule: str, accept_limit: float | None = None) -> str:
    """Return "pass", "conditional pass", "conditional fail" or "fail" (ILAC-G8:09/2019; "risk": JCGM 106, with
    the point's acceptance limit `accept_limit`, 0 <= accept_limit <= mpe)."""
    if rule not in RULES:
        raise ValueError(f"unknown decision rule {rule!r}; expected one of {RULES}")
    for name, v in (("error", error), ("mpe", mpe), ("U", U)):
        if v is None or not math.isfinite(float(v)):
            raise ValueError(f"{name} must be a finite number, got {v!r}")
    if mpe <= 0:
        raise ValueError("mpe must be > 0")
    if U < 0:
        raise ValueError("U must be >= 0")
    if rule == "risk":
        if accept_limit is None or not math.isfinite(float(accept_limit)):
            raise ValueError(f"accept_limit must be a finite number for the risk-based rule, got {accept_limit!r}")
        if not 0 <= accept_limit <= mpe * (1 + LIMIT_TOLERANCE):
            raise ValueError(f"accept_limit must lie between 0 and the MPE, got {accept_limit!r}")
        e = at_limit(abs(error), (accept_limit, mpe))
        if e <= accept_limit:
            return PASS
        return CONDITIONAL_PASS if e <= mpe else FAIL
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


def observed_in_tolerance(errors: Iterable[float], mpes: Iterable[float]) -> bool | None:
    """The observed condition: every |E| <= MPE (at_limit tolerance), whatever the rule; None without points.
    What the interval methods and reliability statistics count (NCSL RP-1: observed in-tolerance)."""
    pairs = [(e, m) for e, m in zip(errors, mpes) if e is not None and m is not None]
    if not pairs:
        return None
    return all(at_limit(abs(e), (m,)) <= m for e, m in pairs)


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


def verdict_text_for(rule: str, in_tolerance: bool | None, decisions: Iterable[str] = ()) -> str:
    """verdict_text, with the risk-based rule's wording: points inside the MPE that it could not accept leave
    conformity "not decided", not "not conforming"."""
    decisions = list(decisions)
    if rule == "risk" and in_tolerance is False and guard_band_only(decisions):
        return "conformity not decided (measurement too uncertain for the PFA target)"
    return verdict_text(in_tolerance, decisions)


def drift_status_given_verdict(status: str, last_as_found_in_tolerance: bool | None) -> str:
    """The drift status a meter shows, given its last as-found condition.

    The recompute passes the observed condition (every |E| <= MPE, observed_in_tolerance; issue 31): a last
    as-found beyond the MPE makes the status "out_of_tolerance", whatever the fitted trend says. A point inside
    the MPE that guarded or risk-based acceptance could not accept does not: its conformity is not decided,
    which asks for a better reference, not a shorter interval.
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
