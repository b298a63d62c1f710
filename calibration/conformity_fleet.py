"""Conformity risk over the fleet (issue 31): the priors of like devices and each device's stored risk fields,
computed inside the bulk recompute (scheduling/fleet.py) from what it has read already, plus one read of the
last calibrations' points. The math is calibration/conformity.py (JCGM 106:2012); this module only gathers and
stores.

* Priors (JCGM 106 §9.2): the as-found errors of every signed calibration in force, in MPE units (error / the
  device's MPE), grouped by the device's principle and its fluid now (a spare: its last duty's), and by principle
  alone; a normal fitted to each group (conformity.fit_normal). A device uses its principle-and-fluid fit when it
  holds at least conformity.PRIOR_MIN_COUNT errors, else its principle's, else the stated default
  (conformity.choose_prior). Fitted to measured errors, the prior's SD includes the measurement's own spread: it
  is a little wider than the spread of true errors, which overstates the PFA (the safe side).
  Only the whole-fleet recompute refits and stores them (ErrorPrior rows); a recompute of a few devices reads
  the stored fits, so one device's sign-off does not move the prior of its like devices.
* Per device (Device.conformity_pfa, Device.conformity_min_pc): over the as-found points of its last signed
  calibration in force, the global PFA of the decision rule that calibration applied (conformity.global_risks,
  the worst point) and the lowest conformance probability of a point inside its MPE (conformity.conformance_
  probability). Points without a stated uncertainty (U = 0: no reference standard) carry no risk figure.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from django.conf import settings
from django.db import connections, transaction
from django.utils import timezone

from calibration import conformity

CONFORMITY_FIELDS = ["conformity_pfa", "conformity_min_pc"]


@dataclass(frozen=True)
class Prior:
    """The prior of a device's true error, in MPE units, and where it comes from."""
    mean: float
    sd: float
    count: int
    scope: str               # "principle and fluid", "principle" or "default"
    principle: str = ""
    fluid: str = ""

    def describe(self) -> str:
        """In words, for pages and certificates."""
        if self.scope == "default":
            return (f"stated default (mean {self.mean:+.2f} MPE, SD {self.sd:.2f} MPE): fewer than "
                    f"{conformity.PRIOR_MIN_COUNT} as-found errors of like devices")
        group = (f"{self.principle} on {self.fluid}" if self.scope == "principle and fluid"
                 else f"{self.principle}, any fluid")
        return (f"as-found errors of like devices ({group}): mean {self.mean:+.2f} MPE, SD {self.sd:.2f} MPE, "
                f"n = {self.count}")

    def as_dict(self) -> dict:
        return {"mean": self.mean, "sd": self.sd, "count": self.count, "scope": self.scope,
                "principle": self.principle, "fluid": self.fluid, "text": self.describe()}


def pfa_target() -> float:
    return float(getattr(settings, "QUENBY_PFA_TARGET", 0.02))


# Priors -------------------------------------------------------------------------------------------------
def group_fits(codes: np.ndarray, values: np.ndarray, groups: int):
    """(mean, sd with n - 1, count) arrays for every group code 0..groups-1 at once: the normal fit of
    conformity.fit_normal by sums per group (two passes, so the SD does not lose digits)."""
    count = np.bincount(codes, minlength=groups)
    mean = np.bincount(codes, weights=values, minlength=groups) / np.maximum(count, 1)
    square = np.bincount(codes, weights=(values - mean[codes]) ** 2, minlength=groups)
    return mean, np.sqrt(square / np.maximum(count - 1, 1)), count


def _fluid_id(device, fluid_ids):
    return device.fluid_id if fluid_ids is None else fluid_ids.get(device.pk)


def fit_priors(devices, events: pd.DataFrame, points: pd.DataFrame, fluid_ids=None) -> dict:
    """{(principle, fluid_id): (mean, sd, count)} and {(principle, None): ...}: every as-found error (error / the
    device's MPE) of the events held (signed, in force), grouped by the device's principle and fluid now, and by
    principle. Groups of fewer than two values are left out. fluid_ids: {device id: fluid id} when the caller
    read them (a spare's is its last duty's); else each device's `fluid_id`."""
    found = points[(points["as_left"] == 0) & points["event_id"].isin(events["id"])]
    meter_of_event = pd.Series(events["device_id"].to_numpy(), index=events["id"].to_numpy())
    point_meter = meter_of_event.reindex(found["event_id"].to_numpy()).to_numpy()
    # per device: its row, its (principle, fluid) group and its principle group
    pair_code, principle_code, pairs, principles, mpe, ids = {}, {}, [], [], [], []
    row_pair, row_principle = [], []
    for m in devices:
        pair = (m.principle, _fluid_id(m, fluid_ids))
        if pair not in pair_code:
            pair_code[pair] = len(pairs)
            pairs.append(pair)
        if m.principle not in principle_code:
            principle_code[m.principle] = len(principles)
            principles.append(m.principle)
        ids.append(m.pk)
        mpe.append(m.mpe_value)
        row_pair.append(pair_code[pair])
        row_principle.append(principle_code[m.principle])
    ids = np.asarray(ids, dtype=np.int64)
    order = np.argsort(ids)
    at = np.searchsorted(ids[order], point_meter)
    known = (at < ids.size)
    known[known] = ids[order][at[known]] == point_meter[known]
    rows = order[at[known]]
    ratio = found["error"].to_numpy(dtype=float)[known] / np.asarray(mpe, dtype=float)[rows]
    finite = np.isfinite(ratio)
    rows, ratio = rows[finite], ratio[finite]
    fits = {}
    for codes, keys in ((np.asarray(row_pair, dtype=np.int64)[rows], pairs),
                        (np.asarray(row_principle, dtype=np.int64)[rows], [(p, None) for p in principles])):
        if not keys:
            continue
        mean, sd, count = group_fits(codes, ratio, len(keys))
        for k, key in enumerate(keys):
            if count[k] >= 2 and (keys is not pairs or key[1] is not None):   # a pair needs a fluid
                fits[key] = (float(mean[k]), float(sd[k]), int(count[k]))
    return fits


def store_priors(fits: dict):
    """Replace the stored priors with `fits` (one transaction)."""
    from calibration.models import ErrorPrior

    now = timezone.now()
    rows = [ErrorPrior(principle=p, fluid_id=f, mean=m, sd=s, count=n, computed_at=now)
            for (p, f), (m, s, n) in fits.items()]
    with transaction.atomic():
        ErrorPrior.objects.all().delete()
        ErrorPrior.objects.bulk_create(rows)


def stored_fits(principles=None) -> dict:
    from calibration.models import ErrorPrior

    qs = ErrorPrior.objects.all() if principles is None else ErrorPrior.objects.filter(principle__in=principles)
    return {(p, f): (m, s, n) for p, f, m, s, n in qs.values_list("principle", "fluid_id", "mean", "sd", "count")}


def prior_for_meter(device, fits=None) -> Prior:
    """The prior a device's results are judged with (one small read of the stored fits when `fits` is None)."""
    if fits is None:
        fits = stored_fits([device.principle])
    fluid = device.fluid
    mean, sd, count, scope = conformity.choose_prior(fits, device.principle, fluid.pk if fluid else None)
    return Prior(mean, sd, count, scope, principle=device.get_principle_display(), fluid=str(fluid) if fluid else "")


# The recompute's part -----------------------------------------------------------------------------------
def _last_points(event_ids) -> pd.DataFrame:
    """The as-found points of the events: event_id, error, mpe, U, k. The ids (integers from our own read) are
    written into the statement, in chunks: no bound-parameter limit, and no per-id lookup building."""
    from calibration.models import CalibrationPoint

    columns = ["event_id", "error", "mpe", "expanded_uncertainty", "coverage_factor", "acceptance_limit"]
    connection = connections[CalibrationPoint.objects.db]
    quote = connection.ops.quote_name
    meta = CalibrationPoint._meta
    select = ", ".join(quote(meta.get_field(c).column) for c in columns)
    ids = sorted({int(i) for i in event_ids})
    rows = []
    with connection.cursor() as cursor:
        for start in range(0, len(ids), 20000):
            listed = ",".join(str(i) for i in ids[start:start + 20000])
            cursor.execute(f"SELECT {select} FROM {quote(meta.db_table)} WHERE {quote('event_id')} IN ({listed}) "
                           f"AND {quote('kind')} = %s", [CalibrationPoint.Kind.AS_FOUND.value])
            rows.extend(cursor.fetchall())
    return pd.DataFrame(np.array(rows, dtype=float).reshape(len(rows), len(columns)), columns=columns)


def point_risks(error, mpe, U, k, rule, prior_mean, prior_sd, target=None, accept_limit=None):
    """Per point (numpy arrays): conformance probability p_c (JCGM 106 §7) and the global PFA of the rule's
    acceptance limits (JCGM 106 §9.5.2) with the prior scaled by the point's MPE; NaN where U = 0 or an input is
    missing. Acceptance limits: simple +/- MPE; guarded +/- (MPE - U), at least 0 (ILAC-G8:09/2019 §4.2.2); risk,
    those meeting the PFA target (calibration/decision.py). A stored acceptance limit (`accept_limit`, finite where
    known) is the one the point was decided with, and is used as it is."""
    error, mpe, U, k = (np.asarray(a, dtype=float) for a in (error, mpe, U, k))
    rule = np.broadcast_to(np.asarray(rule, dtype=object), error.shape)
    pc = np.full(error.shape, np.nan)
    pfa = np.full(error.shape, np.nan)
    ok = np.isfinite(error) & np.isfinite(mpe) & (mpe > 0) & np.isfinite(U) & (U > 0) & np.isfinite(k) & (k > 0)
    ok &= np.isfinite(prior_mean) & np.isfinite(prior_sd) & (prior_sd > 0)
    if not ok.any():
        return pc, pfa
    e, m, u = error[ok], mpe[ok], U[ok] / k[ok]
    mu, sd = (np.broadcast_to(np.asarray(prior_mean, float), error.shape)[ok] * m,
              np.broadcast_to(np.asarray(prior_sd, float), error.shape)[ok] * m)
    pc[ok] = conformity.conformance_probability_array(e, u, -m, m)
    half = m.copy()
    guarded = rule[ok] == "guarded"
    half[guarded] = np.maximum(m[guarded] - U[ok][guarded], 0.0)
    stored = np.full(error.shape, np.nan) if accept_limit is None else np.asarray(accept_limit, dtype=float)
    stored = stored[ok]
    known = np.isfinite(stored)
    risk = (rule[ok] == "risk") & ~known
    if risk.any():
        target = pfa_target() if target is None else target
        _, hi = conformity.acceptance_limits_for_pfa_array(mu[risk], sd[risk], u[risk], -m[risk], m[risk], target)
        half[risk] = hi if np.ndim(hi) else float(hi)
        # a prior off centre gives limits symmetric about the tolerance's middle: (lower + w, upper - w)
    half[known] = stored[known]
    pfa[ok] = conformity.global_risks_array(mu, sd, u, -m, m, -half, half)["pfa"]
    return pc, pfa


def update_conformity(devices, events: pd.DataFrame, points: pd.DataFrame, last_events: pd.DataFrame,
                      whole_fleet: bool, fluid_ids=None):
    """The recompute's conformity part: refit and store the priors (whole fleet only), then set and store each
    device's conformity_pfa and conformity_min_pc from its last calibration (writing the changed rows only)."""
    if whole_fleet:
        fits = fit_priors(devices, events, points, fluid_ids)
        if fits != stored_fits():
            store_priors(fits)
    else:
        fits = stored_fits({m.principle for m in devices})
    by_meter = {m.pk: m for m in devices}
    results = {pk: (None, None) for pk in by_meter}
    if not last_events.empty:
        last = last_events[last_events.index.isin(list(by_meter))]
        pts = _last_points(last["id"].to_numpy())
        if not pts.empty:
            event_meter = pd.Series(last.index.to_numpy(), index=last["id"].to_numpy())
            device_ids = event_meter.reindex(pts["event_id"].to_numpy()).to_numpy()
            rules = pd.Series(last["decision_rule"].to_numpy(), index=last["id"].to_numpy())
            groups = {}   # one prior per (principle, fluid), looked up once
            prior_of = {}
            for pk in set(device_ids.tolist()):
                device = by_meter[pk]
                key = (device.principle, _fluid_id(device, fluid_ids))
                if key not in groups:
                    groups[key] = conformity.choose_prior(fits, *key)[:2]
                prior_of[pk] = groups[key]
            priors = np.array([prior_of[pk] for pk in device_ids.tolist()], dtype=float).reshape(len(device_ids), 2)
            pc, pfa = point_risks(pts["error"], pts["mpe"], pts["expanded_uncertainty"], pts["coverage_factor"],
                                  rules.reindex(pts["event_id"].to_numpy()).to_numpy(), priors[:, 0], priors[:, 1],
                                  accept_limit=pts["acceptance_limit"].to_numpy())
            inside = np.abs(pts["error"].to_numpy()) <= pts["mpe"].to_numpy()
            frame = pd.DataFrame({"device_id": device_ids, "pfa": pfa, "pc": np.where(inside, pc, np.nan)})
            grouped = frame.groupby("device_id").agg(pfa=("pfa", "max"), pc=("pc", "min"))
            for pk, worst, lowest in zip(grouped.index.tolist(), grouped["pfa"].tolist(), grouped["pc"].tolist()):
                results[int(pk)] = (None if worst != worst else worst, None if lowest != lowest else lowest)
    write_conformity(results)
    return results


def _same(a, b) -> bool:
    if a is None or b is None:
        return a is b
    return abs(a - b) <= 1e-12


def write_conformity(results: dict, batch_size=1000):
    """Store {device_id: (pfa, min_pc)} for the rows whose stored values differ (one transaction)."""
    from plant.models import Device

    ids = list(results)
    current = {}
    if len(ids) > 5000:   # most of the fleet: one read of every row is cheaper than many chunks
        current = {pk: (pfa, pc) for pk, pfa, pc in Device.objects.order_by().values_list("pk", *CONFORMITY_FIELDS)}
    else:
        for start in range(0, len(ids), 900):
            current.update((pk, (pfa, pc)) for pk, pfa, pc in Device.objects.filter(pk__in=ids[start:start + 900])
                           .order_by().values_list("pk", *CONFORMITY_FIELDS))
    changed = [(pfa, pc, pk) for pk, (pfa, pc) in results.items()
               if pk in current and not (_same(pfa, current[pk][0]) and _same(pc, current[pk][1]))]
    if not changed:
        return 0
    connection = connections[Device.objects.db]
    quote = connection.ops.quote_name
    sql = (f"UPDATE {quote(Device._meta.db_table)} SET {quote('conformity_pfa')} = %s, "
           f"{quote('conformity_min_pc')} = %s WHERE {quote(Device._meta.pk.column)} = %s")
    with transaction.atomic(using=connection.alias), connection.cursor() as cursor:
        for start in range(0, len(changed), batch_size):
            cursor.executemany(sql, changed[start:start + batch_size])
    return len(changed)


# One calibration: what its results page and certificate state ------------------------------------------
def _tur_text(mpe, U) -> str:
    if not U:
        return "TUR not stated"
    return f"TUR {mpe / U:.1f}:1"


def event_conformity(points, rule: str, prior: Prior, target: float | None = None) -> dict:
    """The conformity risk of one calibration, from its point contents (dicts with kind, nominal_pct, error, mpe,
    expanded_uncertainty, coverage_factor, decision; signed_content.point_content): per point p_c (JCGM 106 §7)
    and the global PFA of the rule applied (JCGM 106 §9.5.2, with `prior`); for the calibration the worst PFA,
    and the points inside the MPE that the rule did not accept ("conformity not decided": a prompt for a better
    reference, not a finding against the device). Plain JSON-able numbers and words."""
    target = pfa_target() if target is None else float(target)
    if not points:
        return {"prior": prior.as_dict(), "target_pfa": target, "rule": rule, "pfa": None,
                "pfa_above_target": False, "points": [], "not_decided": [], "statement": ""}

    def num(p, key):
        value = p.get(key)
        return np.nan if value is None else float(value)

    error = np.array([num(p, "error") for p in points])
    mpe = np.array([num(p, "mpe") for p in points])
    U = np.array([num(p, "expanded_uncertainty") for p in points])
    k = np.array([num(p, "coverage_factor") for p in points])
    pc, pfa = point_risks(error, mpe, U, k, rule, prior.mean, prior.sd, target=target,
                          accept_limit=np.array([num(p, "acceptance_limit") for p in points]))
    rows, not_decided = [], []
    for p, c, f in zip(points, pc.tolist(), pfa.tolist()):
        rows.append({"kind": p["kind"], "nominal_pct": p["nominal_pct"], "p_c": None if c != c else c,
                     "pfa": None if f != f else f})
        inside = p.get("error") is not None and p.get("mpe") is not None and abs(p["error"]) <= p["mpe"]
        if inside and p.get("decision") not in ("pass", ""):
            label = "as found" if p["kind"] == "as_found" else "as left"
            tur = _tur_text(p["mpe"], p.get("expanded_uncertainty"))
            not_decided.append(f"{label} at {p['nominal_pct']:g} % ({tur})")
    known = [f for f in pfa.tolist() if f == f]
    worst = max(known) if known else None
    statement = ""
    if worst is not None:
        statement = (f"Probability of false accept of the decision rule applied: {100 * worst:.2g} % at the worst "
                     f"point (target {100 * target:.3g} %), the global consumer's risk of JCGM 106:2012 §9.5.2 for a "
                     f"device drawn from its like devices, prior: {prior.describe()}.")
    return {"prior": prior.as_dict(), "target_pfa": target, "rule": rule, "pfa": worst,
            "pfa_above_target": worst is not None and worst > target, "points": rows,
            "not_decided": not_decided, "statement": statement}
