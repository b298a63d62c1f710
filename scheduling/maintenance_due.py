"""Maintenance due dates for many tasks at once: two reads, the loop vectorised over tasks, one batched write.

Run by the calibration recompute (scheduling/fleet.py) before it judges each meter, so the fouling finding
of maintenance/loop.py reaches the calibration interval from the same read. The per-task reference is the pure
loop (maintenance/loop.py: next_frequency, next_due); tests hold both to the same stored fields.
"""
from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
from django.db import connections, transaction
from django.db.models import Prefetch, Q

from maintenance import loop
from maintenance.models import MaintenanceRecord, MaintenanceTask
from scheduling import reads

CODES = [code for code, _ in loop.CONDITIONS]
GOOD = np.array([c in loop.GOOD for c in CODES])
SHORTENS = np.array([c in loop.SHORTENS for c in CODES])
FOULED = np.array([c in loop.FOULED for c in CODES])
WRITTEN = ["frequency_days", "last_done", "last_condition", "next_due_date"]


def meter_evidence(device_id) -> list:
    """The fouling finding of one meter from its last inspections (one query); [] when it has none."""
    recent = (MaintenanceRecord.objects.filter(device_id=device_id, state=MaintenanceRecord.State.SIGNED)
              .order_by("-performed_on", "-id").values_list("performed_on", "condition")[:loop.FOULED_WINDOW])
    finding = loop.fouling_finding(list(recent))
    return [finding] if finding else []


PREFETCHED = "signed_maintenance_newest"


def evidence_prefetch():
    """Prefetch for a list of meters: their signed records newest first, so the fouling finding of every meter on a
    page comes from one query (findings_of reads it)."""
    return Prefetch("maintenance_records", to_attr=PREFETCHED, queryset=MaintenanceRecord.objects.filter(
        state=MaintenanceRecord.State.SIGNED).order_by("-performed_on", "-id").only("device_id", "performed_on",
                                                                                     "condition"))


def evidence_from_prefetched(records) -> list:
    finding = loop.fouling_finding([(r.performed_on, r.condition) for r in records[:loop.FOULED_WINDOW]])
    return [finding] if finding else []


def findings_of(device) -> list:
    """The evidence source plant asks (plant/evidence.py): from the records prefetched with evidence_prefetch()
    when the page read them, else one query."""
    if hasattr(device, PREFETCHED):
        return evidence_from_prefetched(getattr(device, PREFETCHED))
    return meter_evidence(device.pk)


def vector_frequencies(start: np.ndarray, codes: np.ndarray) -> np.ndarray:
    """The loop of maintenance/loop.py for many tasks at once.

    start: derived frequency per task (n,); codes: condition index per task and visit, oldest first, -1 after the
    last visit (n, k). Same rounding (half up) and bounds as loop.next_frequency.
    """
    start = start.astype(np.int64)
    lower = np.maximum(loop.MIN_DAYS, np.floor(start / 4 + 0.5)).astype(np.int64)
    upper = np.minimum(loop.MAX_DAYS, start * 4)
    current = np.clip(start, lower, upper)
    streak = np.zeros_like(start)
    for k in range(codes.shape[1]):
        c = codes[:, k]
        seen = c >= 0
        ci = np.where(seen, c, 0)
        good = seen & GOOD[ci]
        shorten = seen & SHORTENS[ci]
        streak = np.where(good, streak + 1, np.where(seen, 0, streak))
        lengthen = good & (streak == loop.CLEAN_STREAK)
        longer = np.clip(np.floor(current * loop.LENGTHEN + 0.5).astype(np.int64), lower, upper)
        shorter = np.clip(np.floor(current * loop.SHORTEN + 0.5).astype(np.int64), lower, upper)
        current = np.where(lengthen, longer, np.where(shorten, shorter, current))
        streak = np.where(lengthen, 0, streak)
    return current


def recompute_maintenance(device_ids=None, today=None) -> dict:
    """Store every active task's frequency, last visit and next due date for the meters (all when None).

    meter_ids: None, or anything `device_id__in` accepts (a values("pk") queryset). Returns {device_id: [finding]}
    for the meters found fouled (maintenance/loop.py fouling_finding).
    """
    where = Q() if device_ids is None else Q(device_id__in=device_ids)
    tasks = reads.frame(MaintenanceTask.objects.filter(where, active=True).order_by("pk"),
                  ["id", "device_id", "start_days", "since"] + WRITTEN)
    records = reads.frame(MaintenanceRecord.objects.filter(where, state=MaintenanceRecord.State.SIGNED).order_by(),
                    ["id", "task_id", "device_id", "performed_on", "condition"])
    records["day"] = reads.epoch_days(records["performed_on"])
    records["code"] = records["condition"].map({c: i for i, c in enumerate(CODES)}).astype(np.int64)
    records = records.sort_values(["day", "id"], kind="stable")
    fouling = _fouling(records)
    if tasks.empty:
        return fouling

    visits = records[records["task_id"].isin(tasks["id"])]
    position = visits.groupby("task_id").cumcount().to_numpy()
    row_of = pd.Series(np.arange(len(tasks)), index=tasks["id"].to_numpy())
    rows = row_of.reindex(visits["task_id"].to_numpy()).to_numpy()
    width = int(position.max()) + 1 if len(position) else 0
    codes = np.full((len(tasks), width), -1, dtype=np.int64)
    codes[rows, position] = visits["code"].to_numpy()
    frequency = vector_frequencies(tasks["start_days"].to_numpy(), codes)

    last = visits.drop_duplicates("task_id", keep="last").set_index("task_id")
    last_day = last["day"].reindex(tasks["id"]).to_numpy()
    last_condition = last["condition"].reindex(tasks["id"]).fillna("").to_numpy()
    since = reads.epoch_days(tasks["since"])
    done = ~np.isnan(last_day)
    due_day = np.where(done, np.nan_to_num(last_day) + frequency, since).astype(np.int64)

    to_date = reads.EPOCH_ORDINAL
    computed = pd.DataFrame({
        "id": tasks["id"].to_numpy(),
        "frequency_days": frequency,
        "last_done": [dt.date.fromordinal(int(d) + to_date) if ok else None for d, ok in zip(last_day, done)],
        "last_condition": last_condition,
        "next_due_date": [dt.date.fromordinal(int(d) + to_date) for d in due_day],
    })
    stored = tasks[["id"] + WRITTEN].copy()
    for column in ("last_done", "next_due_date"):
        stored[column] = [None if v is None or v != v else (v if isinstance(v, dt.date) else dt.date.fromisoformat(v))
                          for v in stored[column]]
    stored["last_condition"] = stored["last_condition"].fillna("")
    changed = np.zeros(len(tasks), dtype=bool)
    for column in WRITTEN:
        changed |= np.array([a != b for a, b in zip(computed[column], stored[column])])
    write_task_fields(computed[changed])
    return fouling


def _fouling(records: pd.DataFrame) -> dict:
    """{device_id: [finding]} for meters with heavy deposit or blocked in FOULED_OF of their last FOULED_WINDOW."""
    if records.empty:
        return {}
    newest = records.iloc[::-1]
    window = newest[newest.groupby("device_id").cumcount() < loop.FOULED_WINDOW]
    counts = window.assign(fouled=FOULED[window["code"].to_numpy()]).groupby("device_id")["fouled"].agg(["sum", "size"])
    hit = counts[(counts["size"] >= loop.FOULED_WINDOW) & (counts["sum"] >= loop.FOULED_OF)].index
    out = {}
    for device_id, frame in window[window["device_id"].isin(hit)].groupby("device_id"):
        recent = [(dt.date.fromordinal(int(d) + reads.EPOCH_ORDINAL), c) for d, c in zip(frame["day"], frame["condition"])]
        out[int(device_id)] = [loop.fouling_finding(recent)]
    return out


def write_task_fields(frame: pd.DataFrame, batch_size=5000):
    """One batched UPDATE of the stored task fields (PostgreSQL: from unnest(arrays); SQLite: executemany)."""
    if frame.empty:
        return
    connection = connections[MaintenanceTask.objects.db]
    quote = connection.ops.quote_name
    table = quote(MaintenanceTask._meta.db_table)
    ids = [int(i) for i in frame["id"]]
    freq = [int(f) for f in frame["frequency_days"]]
    last = list(frame["last_done"])
    cond = list(frame["last_condition"])
    due = list(frame["next_due_date"])
    with transaction.atomic(using=connection.alias), connection.cursor() as cursor:
        if connection.vendor == "postgresql":
            sql = (f"UPDATE {table} AS t SET frequency_days = v.f, last_done = v.l, last_condition = v.c, "
                   f"next_due_date = v.d FROM unnest(%s::bigint[], %s::integer[], %s::date[], %s::varchar[], "
                   f"%s::date[]) AS v(id, f, l, c, d) WHERE t.id = v.id")
            for start in range(0, len(ids), batch_size):
                part = slice(start, start + batch_size)
                cursor.execute(sql, [ids[part], freq[part], last[part], cond[part], due[part]])
        else:
            adapt = connection.ops.adapt_datefield_value
            sql = (f"UPDATE {table} SET frequency_days = %s, last_done = %s, last_condition = %s, "
                   f"next_due_date = %s WHERE id = %s")
            rows = [(f, adapt(l), c, adapt(d), i) for i, f, l, c, d in zip(ids, freq, last, cond, due)]
            for start in range(0, len(rows), batch_size):
                cursor.executemany(sql, rows[start:start + batch_size])
