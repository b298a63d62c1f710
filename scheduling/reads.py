"""The engine's bulk reads: rows straight from the cursor into DataFrames, and dates as day numbers.

Shared by the calibration recompute (scheduling/fleet.py) and the maintenance one (scheduling/maintenance_due.py).
"""
from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
from django.db import connections

EPOCH = dt.date(1970, 1, 1)
EPOCH_ORDINAL = EPOCH.toordinal()


def frame(queryset, columns, numeric=False) -> pd.DataFrame:
    """Rows of a values_list queryset straight from the cursor (no per-row model or converter work).

    numeric: every column is a number or NULL, so the rows go through one float array (NULL -> NaN),
    much faster than column-by-column type inference for a million rows.
    """
    sql, params = queryset.values_list(*columns).query.sql_with_params()
    with connections[queryset.db].cursor() as cursor:
        cursor.execute(sql, params)
        rows = cursor.fetchall()
    if numeric:
        return pd.DataFrame(np.array(rows, dtype=float).reshape(len(rows), len(columns)), columns=columns)
    return pd.DataFrame.from_records(rows, columns=columns)


def epoch_days(values: pd.Series) -> np.ndarray:
    """Dates (date objects or ISO strings, as the database driver returns them) as days since 1970-01-01 (int64;
    NaT -> a very small number)."""
    if values.empty:
        return np.empty(0, dtype=np.int64)
    return pd.to_datetime(values).to_numpy(dtype="datetime64[D]").astype(np.int64)


def ordinal_days(values: pd.Series) -> np.ndarray:
    """The same dates as proleptic ordinals (date.toordinal()), as floats for the fits."""
    if values.empty:
        return np.empty(0, dtype=float)
    return (epoch_days(values) + EPOCH_ORDINAL).astype(float)
