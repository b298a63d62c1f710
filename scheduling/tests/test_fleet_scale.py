"""The fleet at scale: the vectorised drift and due-date recompute against the scalar, per-meter way.

The scalar functions of calibration/drift.py are the reference (they reproduce NIST StRD Norris, see
test_drift_intervals.py); here the vectorised module must agree with them series by series, and the bulk
recompute must give the naive per-meter baseline's due dates on a synthetic fleet.
"""
import datetime as dt
import math
import random
from collections import Counter

import numpy as np
import pandas as pd
import pytest
from django.core.management import CommandError, call_command

from calibration import drift
from scheduling.drift_fleet import predict_crossings
from scheduling.fleet import UPDATED_FIELDS, recompute_due_dates
from calibration.models import CalibrationEvent, CalibrationPoint
from plant.models import Device, Position
from reports.benchmark import naive_recompute


def random_histories(count, seed):
    """Invented histories exercising every branch: gaps, adjustments with and without as-left, same-day
    repeats, exact lines, guard bands; returned as scalar events and as the rows of the vectorised call."""
    rng = random.Random(seed)
    rows, limits, scalar = [], {}, {}
    for key in range(count):
        mpe = rng.choice([0.2, 0.5, 1.0, 2.0])
        guard = rng.choice([0.0, 0.0, 0.1 * mpe])
        day = 739000 + rng.randint(0, 100)
        rate = rng.choice([0.0, 0.0005, -0.001, 0.003]) * mpe
        exact = rng.random() < 0.1
        scatter = rng.choice([0.05, 0.05, 0.05, 0.4]) * mpe  # some meters scatter more than their tolerance
        error = rng.uniform(-0.3, 0.3) * mpe
        events = []
        for order in range(rng.randint(0, 12)):
            day += 0 if rng.random() < 0.03 else rng.randint(100, 400)
            error += rate * 200 + (0.0 if exact else rng.gauss(0, scatter))
            found = error if rng.random() > 0.05 else None
            adjusted = rng.random() < 0.2
            if adjusted:
                left = rng.gauss(0, 0.05 * mpe) if rng.random() > 0.1 else None
            else:
                left = error if rng.random() < 0.2 else None
            if adjusted and left is not None:
                error = left
            if found is None and left is None and rng.random() < 0.5:
                continue
            events.append(drift.HistoryEvent(day=float(day), as_found=found, as_left=left, adjusted=adjusted))
            rows.append({"series": key, "day": float(day), "order": order,
                         "as_found": np.nan if found is None else found,
                         "as_left": np.nan if left is None else left, "adjusted": adjusted})
        limits[key] = mpe - guard
        scalar[key] = drift.predict_crossing(events, mpe=mpe, guard=guard)
    return pd.DataFrame(rows), pd.Series(limits), scalar


def test_vectorised_crossings_equal_the_scalar_method_series_by_series():
    rows, limits, scalar = random_histories(2000, seed=11)
    result = predict_crossings(rows, limits)
    statuses = Counter()
    for key, expected in scalar.items():
        got = result.loc[key]
        statuses[expected.status] += 1
        assert got["status"] == expected.status, key
        if expected.day is None:
            assert math.isnan(got["day"]), key
        else:
            assert got["day"] == pytest.approx(expected.day, abs=1e-6), key
            # a crossing is a crossing: strictly after the last calibration (issue 26)
            assert expected.day > expected.drift.last_day and got["day"] > expected.drift.last_day, key
            if expected.status == "improving":
                statuses["improving with a crossing"] += 1
        slope = expected.drift.slope_per_day if expected.drift else None
        if slope is None:
            assert math.isnan(got["slope"]) and math.isnan(got["se"]) and math.isnan(got["sd"]), key
        else:
            assert got["slope"] == pytest.approx(slope, rel=1e-9, abs=1e-15), key
            assert got["se"] == pytest.approx(expected.drift.se_slope, rel=1e-9, abs=1e-15), key
            assert got["sd"] == pytest.approx(expected.drift.fit.residual_sd, rel=1e-9, abs=1e-15), key
            assert bool(got["significant"]) == bool(expected.drift.significant), key
    # every branch of the method was exercised
    assert set(statuses) == {"insufficient", "flat", "scatter", "improving", "drifting", "out_of_tolerance",
                             "improving with a crossing"}, statuses


def test_vectorised_crossing_of_a_known_line():
    # error grows 0.002 %/day from 0 with no scatter, MPE 1.0: crossing exactly 500 days after the last event
    rows = pd.DataFrame({"series": [0, 0, 0], "day": [0.0, 100.0, 200.0], "order": [0, 1, 2],
                         "as_found": [0.0, 0.2, 0.4], "as_left": [np.nan] * 3, "adjusted": [False] * 3})
    result = predict_crossings(rows, pd.Series({0: 1.0}))
    assert result.loc[0, "status"] == "drifting"
    assert result.loc[0, "day"] == pytest.approx(500.0)
    assert result.loc[0, "slope"] == pytest.approx(0.002)


def test_vectorised_crossings_of_nothing():
    empty = pd.DataFrame(columns=["series", "day", "order", "as_found", "as_left", "adjusted"])
    result = predict_crossings(empty, pd.Series({7: 1.0}))
    assert result.loc[7, "status"] == "insufficient" and math.isnan(result.loc[7, "day"])


def due_fields():
    return {row["pk"]: row for row in Device.objects.order_by("pk").values("pk", *UPDATED_FIELDS)}


@pytest.mark.django_db
@pytest.mark.parametrize("method", ["reliability", "staircase"])
def test_bulk_recompute_gives_the_naive_due_dates(method, settings):
    settings.CALIBRATION = {**settings.CALIBRATION, "interval_method": method}
    call_command("make_fleet", meters=60, seed=5, verbosity=0)
    recompute_due_dates()
    fast = due_fields()
    Device.objects.update(next_due_date=None, due_rationale={}, drift_status="", last_calibrated=None,
                         drift_rate_per_year=None, predicted_crossing=None)
    naive_recompute()
    slow = due_fields()
    assert fast.keys() == slow.keys() and len(fast) == 60
    for pk in fast:
        for name in UPDATED_FIELDS:
            if name == "drift_rate_per_year" and fast[pk][name] is not None:
                assert fast[pk][name] == pytest.approx(slow[pk][name], rel=1e-9), (pk, name)
            else:
                assert fast[pk][name] == slow[pk][name], (pk, name)
    # the fleet is not trivial: several candidates win and several drift states occur
    winners = Counter(row["due_rationale"]["winner"] for row in fast.values())
    assert winners["risk"] and winners["drift"], winners
    assert len({row["drift_status"] for row in fast.values()}) >= 3


@pytest.mark.django_db
def test_single_meter_recompute_equals_the_whole_fleet_recompute():
    call_command("make_fleet", meters=40, seed=9, verbosity=0)
    whole = due_fields()
    some = [m.pk for m in Device.objects.filter(calibrations__isnull=False).distinct().order_by("pk")[:3]]
    Device.objects.filter(pk__in=some).update(next_due_date=None, due_rationale={})
    recompute_due_dates(Device.objects.filter(pk__in=some))
    again = due_fields()
    for pk in some:
        assert again[pk] == whole[pk]


@pytest.mark.django_db
def test_make_fleet_is_realistic_and_refuses_a_second_fleet():
    call_command("make_fleet", meters=30, seed=3, verbosity=0)
    assert Device.objects.count() == 30
    tags = list(Position.objects.order_by("tag").values_list("tag", flat=True))  # in-service devices' positions
    assert tags[0] == "SYN-000001" and 25 <= len(tags) <= 30
    assert Device.objects.filter(position__isnull=False).count() == len(tags)
    events = CalibrationEvent.objects.filter(state="signed")
    points = CalibrationPoint.objects.filter(event__state="signed")
    assert 30 <= points.count() / 30 <= 80  # about 50 points per meter over ten years: 20,000 meters -> ~1,000,000
    assert events.order_by("performed_on").first().performed_on <= dt.date(2016, 12, 31)
    assert Device.objects.filter(next_due_date__isnull=False).exists()  # due dates computed at the end
    from ledger import chain

    assert chain.verify() == []  # written in bulk, then sealed in the record chain (with a note saying so)
    # every stored error and decision is what the point's own computation gives
    for point in points.select_related("event__device").order_by("pk")[:50]:
        stored = (point.error, point.expanded_uncertainty, point.decision)
        point.compute(point.event.device, point.event.reference_standards.first(), point.event.decision_rule)
        assert (point.error, point.expanded_uncertainty, point.decision) == stored
    with pytest.raises(CommandError, match="already holds a synthetic fleet"):
        call_command("make_fleet", meters=30, seed=3, verbosity=0)
    assert Device.objects.count() == 30


@pytest.mark.django_db
def test_make_fleet_same_seed_same_history():
    from django.db import transaction

    from scheduling.synthetic import FleetBuilder

    def build_and_read(seed):
        with transaction.atomic():
            FleetBuilder(12, seed=seed).build()
            rows = list(CalibrationPoint.objects.order_by("event__device__serial", "event__performed_on", "kind",
                                                          "nominal_pct")
                        .values_list("event__device__serial", "event__performed_on", "kind", "nominal_pct", "error"))
            transaction.set_rollback(True)
        return rows

    first = build_and_read(4)
    assert len(first) > 100
    assert build_and_read(4) == first
    assert build_and_read(5) != first


def test_vectorised_staircase_equals_the_scalar_sequence():
    """fleet.staircase_steps (all meters at once) against intervals.staircase_sequence meter by meter, with
    base intervals inside and outside the bounds and records of every length (OIML D 10 method 1)."""
    from calibration import intervals
    from scheduling import fleet

    rng = random.Random(3)
    kw = dict(extend=1.25, shorten=0.5, min_days=30, max_days=1095)
    bases = {m: rng.choice([1, 29, 45, 180, 365, 730, 1000, 3650]) for m in range(1, 301)}
    records = {m: [rng.random() < 0.8 for _ in range(rng.randint(1, 25))] for m in bases}
    device_ids = np.array([m for m in bases for _ in records[m]])
    in_tol = np.array([ok for m in bases for ok in records[m]])
    starts = np.flatnonzero(np.r_[True, device_ids[1:] != device_ids[:-1]])
    steps = fleet.staircase_steps(device_ids, starts, in_tol, bases, kw)
    for start, m in zip(starts, bases):
        base = min(max(bases[m], 30), 1095)
        expected = intervals.staircase_sequence(base, records[m], **kw)
        assert steps[start:start + len(expected)].tolist() == expected, m


@pytest.mark.parametrize("mpe, guard", [(float("nan"), 0.0), (float("inf"), 0.0), (0.0, 0.0), (-1.0, 0.0),
                                        (0.5, 0.5), (0.5, 0.7)])
def test_scalar_and_fleet_refuse_the_same_limits(mpe, guard):
    """Issue 26 item 6: a NaN, infinite or non-positive limit (MPE minus guard) is refused by both the scalar and
    the fleet drift function with a ValueError, not called "drifting" or "out of tolerance" by one of them."""
    events = [drift.HistoryEvent(day=float(d), as_found=0.001 * d) for d in (0, 100, 200, 300)]
    with pytest.raises(ValueError):
        drift.predict_crossing(events, mpe=mpe, guard=guard)
    rows = pd.DataFrame({"series": [0] * 4, "day": [0.0, 100.0, 200.0, 300.0], "order": [0, 1, 2, 3],
                         "as_found": [0.0, 0.1, 0.2, 0.3], "as_left": [np.nan] * 4, "adjusted": [False] * 4})
    with pytest.raises(ValueError, match="limit"):
        predict_crossings(rows, pd.Series({0: mpe - guard}))


def test_scalar_and_fleet_refuse_the_same_nonfinite_errors():
    """An infinite as-found is refused by both (NaN in the fleet frame means "not recorded", None in the scalar)."""
    with pytest.raises(ValueError, match="as_found"):
        drift.HistoryEvent(day=300.0, as_found=float("inf"))
    rows = pd.DataFrame({"series": [0] * 3, "day": [0.0, 100.0, 200.0], "order": [0, 1, 2],
                         "as_found": [0.0, 0.1, float("inf")], "as_left": [np.nan] * 3, "adjusted": [False] * 3})
    with pytest.raises(ValueError, match="as_found"):
        predict_crossings(rows, pd.Series({0: 1.0}))
