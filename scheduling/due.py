"""Next due date: the interval method sets the interval, duty risk and drift may only shorten it (pure).

The rule (the trade's logic, as OIML D 10 / ILAC-G24 and NCSL RP-1 describe interval adjustment):
- method: the interval method in use (calibration/intervals.py: the OIML D 10 staircase, or the NCSL RP-1
  reliability target when the meter's own record is large and clear enough) SETS the interval; an
  out-of-tolerance as-found shortens it by that method, not straight to the minimum;
- risk: a principle×fluid finding (plant/risk.py) with an interval factor below 1 may shorten it to
  interval × factor;
- drift: a predicted crossing of the limit (calibration/drift.py), always strictly after the last
  calibration, may shorten it to the crossing minus a safety margin;
- "scatter too large to predict" (the drift model's prediction bound already at the limit on the day of a
  calibration that found the meter in tolerance) is not a crossing but a finding: the interval is shortened
  by one out-of-tolerance step of the method (× the staircase shorten factor), unless that calibration's
  as-found was out of tolerance, which the method has counted.
The earliest candidate wins (only shortening ones can beat the method), the result is held to
[last + min_days, last + max_days], and every interval is rounded by intervals.whole_days. The rationale
keeps every candidate, the winner, the interval the due date uses and the findings, so the meter page can
show one truth and say why in words.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

from calibration.intervals import whole_days
from plant import checks

ROLES = {"method": "sets the interval", "risk": "may shorten it", "drift": "may shorten it"}


@dataclass(frozen=True)
class Candidate:
    name: str          # "method" | "risk" | "drift"
    due: dt.date
    reason: str


@dataclass
class DueDecision:
    due: dt.date
    winner: str
    last: dt.date
    candidates: list = field(default_factory=list)
    bounded: str = ""  # "", "minimum" or "maximum" when a bound moved the date
    findings: list = field(default_factory=list)
    summary: str = ""

    @property
    def interval_days(self) -> int:
        return (self.due - self.last).days

    def rationale(self) -> dict:
        return {
            "due": self.due.isoformat(),
            "last": self.last.isoformat(),
            "interval_days": self.interval_days,
            "winner": self.winner,
            "bounded": self.bounded,
            "summary": self.summary,
            "findings": list(self.findings),
            "candidates": [{"name": c.name, "role": ROLES[c.name], "due": c.due.isoformat(),
                            "days": (c.due - self.last).days, "reason": c.reason} for c in self.candidates],
        }


def decide_due(last: dt.date, method_interval_days: int, method_reason: str = "", *,
               risk_factor: float = 1.0, risk_reason: str = "",
               crossing: dt.date | None = None, crossing_reason: str = "", margin_days: int = 30,
               crossing_kind: str = "drifting", last_failed: bool = False, shorten_factor: float = 0.5,
               min_days: int = 30, max_days: int = 1095, scatter_reason: str = "") -> DueDecision:
    """The next due date of a meter last calibrated on `last` (see the module docstring).

    method_interval_days: the interval the method sets; risk_factor: the smallest interval factor of the
    duty's findings (1 = none); crossing: the predicted day the error may reach the limit (None = none
    predicted; it must be after `last`); crossing_kind: the meter's drift status ("scatter": scatter too
    large to predict, a finding worded by `scatter_reason`, e.g. the residual SD beside the MPE);
    last_failed: the last as-found was out of tolerance (the method already shortened).
    """
    if not isinstance(last, dt.date):
        raise ValueError(f"last must be a date, not {last!r}")
    if crossing is not None and not isinstance(crossing, dt.date):
        raise ValueError(f"crossing must be a date or None, not {crossing!r}")
    min_days = checks.whole("min_days", min_days, minimum=1)
    max_days = checks.whole("max_days", max_days, minimum=min_days)
    if method_interval_days is None:
        raise ValueError("method_interval_days: the interval method must give an interval of at least one day")
    method_interval_days = checks.whole("method_interval_days", method_interval_days, minimum=1)
    risk_factor = checks.fraction("risk_factor", risk_factor, include_one=True)
    shorten_factor = checks.fraction("shorten_factor", shorten_factor, include_one=True)
    margin_days = checks.whole("margin_days", margin_days, minimum=0)
    interval = int(min(max(int(method_interval_days), min_days), max_days))
    method_text = method_reason or f"interval {interval} d"
    findings = []
    if crossing is not None and crossing <= last:
        raise ValueError(f"crossing: a predicted crossing must be after the last calibration {last.isoformat()}, "
                         f"not {crossing.isoformat()}")
    if crossing_kind == "scatter":
        said = ("Scatter too large to predict: the one-sided 95 % prediction bound of the drift model already "
                f"reaches the limit on {last.isoformat()}, so it cannot place a crossing date"
                + (f" ({scatter_reason})" if scatter_reason else ""))
        if last_failed:
            findings.append(f"{said}; the out-of-tolerance as-found of {last.isoformat()} has already shortened "
                            "the interval by the method.")
        else:
            raw = whole_days(interval * shorten_factor)
            shortened = int(min(max(raw, min_days), max_days))
            step = f"{interval} d × {shorten_factor:g} = {raw} d" + (
                f", held to the minimum {shortened} d" if shortened != raw else "")
            findings.append(f"{said}. The calibration of {last.isoformat()} found the meter in tolerance; this "
                            f"finding shortens the interval by the method: {step}.")
            method_text += f"; shortened for the scatter finding: {step}"
            interval = shortened
    candidates = [Candidate("method", last + dt.timedelta(days=interval), method_text)]
    if risk_factor < 1.0:
        risk_days = max(1, whole_days(interval * risk_factor))
        candidates.append(Candidate("risk", last + dt.timedelta(days=risk_days),
                                    f"{risk_reason + ': ' if risk_reason else ''}{interval} d × risk factor "
                                    f"{risk_factor:.2f} = {risk_days} d"))
    if crossing is not None:
        candidates.append(Candidate("drift", crossing - dt.timedelta(days=margin_days),
                                    f"{crossing_reason} predicted crossing {crossing.isoformat()} "
                                    f"minus {margin_days} d margin".strip()))
    order = ["method", "risk", "drift"]  # on a tie the method keeps it: nothing needed shortening
    winner = min(candidates, key=lambda c: (c.due, order.index(c.name)))
    due, bounded = winner.due, ""
    if due < last + dt.timedelta(days=min_days):
        due, bounded = last + dt.timedelta(days=min_days), "minimum"
    elif due > last + dt.timedelta(days=max_days):
        due, bounded = last + dt.timedelta(days=max_days), "maximum"
    decision = DueDecision(due=due, winner=winner.name, last=last, candidates=candidates, bounded=bounded,
                           findings=findings)
    decision.summary = _summary(decision, interval)
    return decision


def _summary(d: DueDecision, interval: int) -> str:
    """One sentence: which interval the due date uses and why."""
    days = d.interval_days
    who = {"risk": "The duty risk", "drift": "The predicted drift"}.get(d.winner)
    shortened = (" (already shortened for the scatter finding)"
                 if any("shortens the interval by the method" in f for f in d.findings) else "")
    if d.winner == "method":
        text = f"The interval method sets {interval} days{shortened} and nothing shortens it further"
    elif d.bounded == "minimum":
        text = (f"{who} would shorten the method's {interval} days{shortened} below the minimum, so the minimum "
                f"{days} days hold")
    else:
        text = f"{who} shortens the method's {interval} days{shortened} to {days} days"
    return f"{text}: due {d.due.isoformat()}, {days} days after the last calibration on {d.last.isoformat()}."


def rationale_text(rationale: dict) -> str:
    """The rationale in plain sentences: the summary, any findings, then each candidate, winner first."""
    if not rationale:
        return "Not yet computed."
    if not rationale.get("candidates"):
        return rationale.get("note", "No due date.")
    lines = [rationale["summary"]] if rationale.get("summary") else []
    lines += rationale.get("findings", [])
    for c in sorted(rationale["candidates"], key=lambda c: c["name"] != rationale["winner"]):
        mark = "→ chosen: " if c["name"] == rationale["winner"] else ""
        lines.append(f"{mark}{c['name']} ({c.get('role', '')}) {c['due']}: {c['reason']}")
    if rationale.get("bounded"):
        lines.append(f"Held to the {rationale['bounded']} interval: due {rationale['due']}.")
    return "\n".join(lines)
