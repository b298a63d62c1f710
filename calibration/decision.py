"""Decision rules for statements of conformity, per ILAC-G8:09/2019
"Guidelines on Decision Rules and Statements of Conformity". Pure Python.

* ``"simple"``  - simple acceptance, guard band w = 0 (ILAC-G8:09/2019 §4.2.1):
  |E| <= MPE -> "pass", else "fail".
* ``"guarded"`` - guard band w = U (ILAC-G8:09/2019 §4.2.2 and its figure of
  pass / conditional pass / conditional fail / fail zones):
  |E| <= MPE - U            -> "pass"
  MPE - U < |E| <= MPE      -> "conditional pass"
  MPE < |E| < MPE + U       -> "conditional fail"
  |E| >= MPE + U            -> "fail"

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
IN_TOLERANCE = frozenset({PASS, CONDITIONAL_PASS})


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
    if e <= mpe - U:
        return PASS
    if e <= mpe:
        return CONDITIONAL_PASS
    if e < mpe + U:
        return CONDITIONAL_FAIL
    return FAIL


def verdict_in_tolerance(decisions: Iterable[str]) -> bool:
    """True if every point decision is "pass" or "conditional pass"."""
    return all(d in IN_TOLERANCE for d in decisions)


#: Relative tolerance of the limit comparisons: one part in 1e9 of the limit (at least 1e-12 in the
#: error's units). Far below the three decimals an error is shown with, far above the rounding of a
#: double (about 1e-16 relative, amplified by ind - ref to at most ~1e-13 at the readings entered).
LIMIT_TOLERANCE = 1e-9


def at_limit(e: float, limits) -> float:
    """`e` moved onto the nearest limit when within LIMIT_TOLERANCE of it, else unchanged.

    Floating-point comparison with a stated tolerance (common practice; cf. Python's math.isclose):
    the reported error is left as computed, only the comparison uses this value."""
    for limit in limits:
        if abs(e - limit) <= LIMIT_TOLERANCE * max(abs(limit), 1e-3):
            return limit
    return e
