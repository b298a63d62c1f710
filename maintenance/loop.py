"""The maintenance loop: what is found on each visit sets how often the task is done (pure: no ORM).

A staircase like the calibration one (OIML D 10 method 1, calibration/intervals.py), applied to what a
technician finds rather than to as-found errors. The rules are "common practice" for this tool, our own
rule of thumb, not a published method:

* found clean CLEAN_STREAK (3) times in a row  -> frequency × LENGTHEN (1.5), and the count starts again;
* found with heavy deposit, blocked, corroded or worn -> frequency × SHORTEN (0.5), the clean count is reset;
* light deposit, damaged or leaking -> frequency kept (a light deposit is what the frequency is for; damage and
  leaks are repaired, they say nothing about how fast the meter fouls), the clean count is reset;
* every step is rounded half up to whole days and bounded to [lower, upper], where
  lower = max(MIN_DAYS, start / 4) and upper = min(MAX_DAYS, start × 4), start being the derived frequency.

The next due date is the date of the last visit plus the frequency; with no visit yet it is the day the task
was set up (never done: due now).

The fouling finding: a meter found with heavy deposit (or blocked) in FOULED_OF (3) of its last FOULED_WINDOW (4)
inspections, whatever the task, gets a risk finding of its own (severity high, factor 0.5, the scale of
plant/risk.py) that shortens the calibration interval too. An as-found calibration failure within
FAILURE_WINDOW_DAYS (30) after such an inspection is shown beside it. Both thresholds: common practice.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

from plant import checks
from plant.risk import FACTOR_HIGH, Finding

# Conditions found, in our own words; (code, label) in the order the form lists them.
CONDITIONS = (
    ("clean", "Clean"),
    ("light_deposit", "Light deposit"),
    ("heavy_deposit", "Heavy deposit"),
    ("blocked", "Blocked"),
    ("corroded", "Corroded"),
    ("worn", "Worn"),
    ("damaged", "Damaged"),
    ("leaking", "Leaking"),
)
LABELS = dict(CONDITIONS)
GOOD = {"clean"}
SHORTENS = {"heavy_deposit", "blocked", "corroded", "worn"}
HOLDS = {"light_deposit", "damaged", "leaking"}
FOULED = {"heavy_deposit", "blocked"}
assert GOOD | SHORTENS | HOLDS == set(LABELS)

CLEAN_STREAK = 3      # common practice
LENGTHEN = 1.5        # common practice
SHORTEN = 0.5         # common practice (the calibration staircase's shorten factor, settings CALIBRATION)
MIN_DAYS = 7          # common practice: nothing is cleaned more often than weekly by this rule
MAX_DAYS = 1095       # common practice: three years, the longest calibration interval too
FOULED_OF, FOULED_WINDOW = 3, 4  # common practice
FAILURE_WINDOW_DAYS = 30          # common practice


def _round(x: float) -> int:
    return int(x + 0.5)  # half up; values are positive


def bounds(start_days: int) -> tuple[int, int]:
    """(lower, upper) frequency bounds for a task whose derived frequency is start_days."""
    start_days = checks.whole("start_days", start_days, minimum=1)
    return max(MIN_DAYS, _round(start_days / 4)), min(MAX_DAYS, start_days * 4)


@dataclass
class LoopResult:
    frequency_days: int
    start_days: int
    steps: list = field(default_factory=list)  # plain sentences, oldest first

    def text(self) -> str:
        return "\n".join(self.steps)


def step(current: int, streak: int, condition: str, lower: int, upper: int) -> tuple[int, int]:
    """One visit of the loop: (frequency, clean run) before -> after."""
    if condition not in LABELS:
        raise ValueError(f"unknown condition {condition!r}")
    lower = checks.whole("lower", lower, minimum=1)
    upper = checks.whole("upper", upper, minimum=lower)
    current = checks.whole("current", current, minimum=1)
    streak = checks.whole("streak", streak, minimum=0)
    if condition in GOOD:
        streak += 1
        if streak == CLEAN_STREAK:
            return min(max(_round(current * LENGTHEN), lower), upper), 0
        return current, streak
    if condition in SHORTENS:
        return min(max(_round(current * SHORTEN), lower), upper), 0
    return current, 0


def next_frequency(start_days: int, conditions, dates=None) -> LoopResult:
    """The task's frequency after the visits, oldest first (`conditions` codes, optional `dates` for the words)."""
    conditions = list(conditions)
    dates = list(dates) if dates is not None else [None] * len(conditions)
    if len(dates) != len(conditions):
        raise ValueError(f"dates: {len(dates)} dates for {len(conditions)} conditions; give one per condition")
    unknown = [c for c in conditions if c not in LABELS]
    if unknown:
        raise ValueError(f"conditions: unknown condition {unknown[0]!r}")
    start_days = checks.whole("start_days", start_days, minimum=1)
    lower, upper = bounds(start_days)
    current = min(max(start_days, lower), upper)
    streak = 0
    steps = [f"Starts at {start_days} d; what is found moves it within {lower}–{upper} d."]
    for condition, day in zip(conditions, dates):
        before = current
        current, streak = step(current, streak, condition, lower, upper)
        when = f"{day.isoformat()}: " if day is not None else ""
        label = LABELS[condition].lower()
        if condition in GOOD and streak == 0:
            steps.append(f"{when}found {label}, {CLEAN_STREAK} times in a row: {before} d × {LENGTHEN} → "
                         f"{current} d" + (" (upper bound)" if current == upper else "") + ".")
        elif condition in GOOD:
            steps.append(f"{when}found {label} ({streak} of {CLEAN_STREAK} in a row): kept at {current} d.")
        elif condition in SHORTENS:
            steps.append(f"{when}found {label}: {before} d × {SHORTEN} → {current} d"
                         + (" (lower bound)" if current == lower else "") + ".")
        else:
            steps.append(f"{when}found {label}: kept at {current} d.")
    return LoopResult(frequency_days=current, start_days=start_days, steps=steps)


def next_due(last_done: dt.date | None, frequency_days: int, since: dt.date) -> dt.date:
    """Last visit + frequency; never done: the day the task was set up."""
    frequency_days = checks.whole("frequency_days", frequency_days, minimum=1)
    if last_done is None:
        return since
    return last_done + dt.timedelta(days=int(frequency_days))


def due_sentence(last_done: dt.date | None, frequency_days: int, since: dt.date) -> str:
    due = next_due(last_done, frequency_days, since)
    if last_done is None:
        return f"Never done since the task was set on {since.isoformat()}: due now ({due.isoformat()})."
    return f"Last done {last_done.isoformat()} + {frequency_days} d = due {due.isoformat()}."


def fouling_finding(recent) -> Finding | None:
    """The meter's fouling finding from its inspections, newest first: [(date, condition)], any task."""
    window = list(recent)[:FOULED_WINDOW]
    unknown = [c for _, c in window if c not in LABELS]
    if unknown:
        raise ValueError(f"recent: unknown condition {unknown[0]!r}")
    fouled = [(day, c) for day, c in window if c in FOULED]
    if len(window) < FOULED_WINDOW or len(fouled) < FOULED_OF:
        return None
    dates = ", ".join(day.isoformat() for day, _ in fouled)
    return Finding(
        "MAINT_FOULED", "high",
        f"Found with heavy deposit or blocked in {len(fouled)} of the last {len(window)} inspections ({dates}); "
        "the deposit is likely to be on the sensing parts between visits too, so calibrate sooner.",
        FACTOR_HIGH)


def failures_after_fouling(inspections, calibrations, window_days: int = FAILURE_WINDOW_DAYS):
    """Pairs (calibration date, inspection date, days between) where an as-found failure came within window_days
    after (or on the day of) an inspection that found heavy deposit or blocked.

    inspections: [(date, condition)]; calibrations: [(date, as_found_in_tolerance)]. Oldest pair first; each failure
    is paired with the latest such inspection before it.
    """
    window_days = checks.whole("window_days", window_days, minimum=0)
    fouled = sorted(day for day, c in inspections if c in FOULED)
    pairs = []
    for day, ok in sorted(calibrations):
        if ok is not False:
            continue
        before = [f for f in fouled if f <= day and (day - f).days <= window_days]
        if before:
            pairs.append((day, before[-1], (day - before[-1]).days))
    return pairs
