"""Next due date from the candidates a metrologist weighs (pure: dates and numbers in, result out).

Candidates (each may be absent):
- risk: last calibration + base interval × risk factor (principle×fluid rules, plant/risk.py);
- drift: the drift-predicted crossing of the tolerance (calibration/drift.py) minus a safety margin;
- method: last calibration + the interval from the interval method in use (calibration/intervals.py:
  staircase per OIML D 10 / ILAC-G24, or the reliability target per NCSL RP-1).
The earliest wins; the result is then bounded by the minimum and maximum interval. The rationale lists
every candidate and names the winner, so the meter page can say why.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field


@dataclass(frozen=True)
class Candidate:
    name: str          # "risk" | "drift" | "method"
    due: dt.date
    reason: str


@dataclass
class DueDecision:
    due: dt.date
    winner: str
    candidates: list = field(default_factory=list)
    bounded: str = ""  # "", "minimum" or "maximum" when a bound moved the date

    def rationale(self) -> dict:
        return {
            "due": self.due.isoformat(),
            "winner": self.winner,
            "bounded": self.bounded,
            "candidates": [{"name": c.name, "due": c.due.isoformat(), "reason": c.reason} for c in self.candidates],
        }


def decide_due(last: dt.date, base_interval_days: int, risk_factor: float, *,
               crossing: dt.date | None = None, crossing_reason: str = "", margin_days: int = 30,
               method_interval_days: int | None = None, method_reason: str = "",
               min_days: int = 30, max_days: int = 1095) -> DueDecision:
    """Earliest of the candidates, then bounded to [last + min_days, last + max_days]."""
    if min_days < 1 or max_days < min_days:
        raise ValueError("need 1 <= min_days <= max_days")
    risk_days = max(1, round(base_interval_days * risk_factor))
    candidates = [Candidate("risk", last + dt.timedelta(days=risk_days),
                            f"base interval {base_interval_days} d × risk factor {risk_factor:.2f} = {risk_days} d")]
    if crossing is not None:
        candidates.append(Candidate("drift", crossing - dt.timedelta(days=margin_days),
                                    f"{crossing_reason} predicted crossing {crossing.isoformat()} "
                                    f"minus {margin_days} d margin".strip()))
    if method_interval_days is not None:
        candidates.append(Candidate("method", last + dt.timedelta(days=int(method_interval_days)), method_reason))
    winner = min(candidates, key=lambda c: (c.due, ["drift", "risk", "method"].index(c.name)))
    due, bounded = winner.due, ""
    if due < last + dt.timedelta(days=min_days):
        due, bounded = last + dt.timedelta(days=min_days), "minimum"
    elif due > last + dt.timedelta(days=max_days):
        due, bounded = last + dt.timedelta(days=max_days), "maximum"
    return DueDecision(due=due, winner=winner.name, candidates=candidates, bounded=bounded)


def rationale_text(rationale: dict) -> str:
    """One plain sentence per candidate, winner first."""
    if not rationale:
        return "Not yet computed."
    lines = []
    for c in sorted(rationale["candidates"], key=lambda c: c["name"] != rationale["winner"]):
        mark = "→ chosen: " if c["name"] == rationale["winner"] else ""
        lines.append(f"{mark}{c['name']} candidate {c['due']}: {c['reason']}")
    if rationale.get("bounded"):
        lines.append(f"Bounded by the {rationale['bounded']} interval to {rationale['due']}.")
    return "\n".join(lines)
