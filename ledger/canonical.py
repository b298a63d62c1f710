"""Canonical JSON and its SHA-256: the same content gives the same bytes on any machine and either database.

Keys sorted, fixed separators, UTF-8 (not escaped), no NaN or infinity (written as strings). Floats are written
by Python's shortest round-trip repr, so a stored double is reproduced exactly. Inside JSON values a whole float
is written as an integer: PostgreSQL's jsonb may give 1e20 back as an integer where SQLite gives a float.
"""
import datetime as dt
import hashlib
import json
import math
import uuid
from decimal import Decimal

GENESIS = "0" * 64  # the previous hash of the first entry of a chain


def dumps(obj) -> bytes:
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False).encode("utf-8")


def digest(obj) -> str:
    return hashlib.sha256(dumps(obj)).hexdigest()


def number(value: float):
    """A float as canonical JSON holds it: itself when finite, else its name."""
    return value if math.isfinite(value) else repr(value)


def json_value(value):
    """A JSON field's value, normalised (see the module's note on whole floats)."""
    if isinstance(value, dict):
        return {str(k): json_value(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_value(v) for v in value]
    if isinstance(value, float):
        return int(value) if value.is_integer() else number(value)
    return value


def scalar(value):
    """A column's value as JSON: dates and times in ISO 8601 (UTC for an aware moment), decimals and UUIDs as
    text, bytes as hex; numbers, text, booleans and null as they are."""
    if value is None or isinstance(value, (bool, int, str)):
        return value
    if isinstance(value, float):
        return number(value)
    if isinstance(value, dt.datetime):
        if value.tzinfo is not None:
            value = value.astimezone(dt.timezone.utc)
        return value.isoformat()
    if isinstance(value, (dt.date, dt.time)):
        return value.isoformat()
    if isinstance(value, dt.timedelta):
        return repr(value.total_seconds())
    if isinstance(value, Decimal):
        return format(value, "f")
    if isinstance(value, uuid.UUID):
        return str(value)
    if isinstance(value, (bytes, bytearray, memoryview)):
        return bytes(value).hex()
    raise TypeError(f"No canonical form for a {type(value).__name__} value.")


def chain_hash(sequence, kind, record_id, layout_digest, content_hash, previous_hash, sealed_at):
    """The hash that links an entry to the one before it: everything the entry states, with the previous hash."""
    return digest({"sequence": sequence, "kind": kind, "record": record_id, "layout": layout_digest,
                   "content": content_hash, "previous": previous_hash, "sealed_at": scalar(sealed_at)})
