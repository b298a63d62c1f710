"""Today's date where the meters are, not in UTC.

A calibration entered at 07:30 on a site at UTC+10 happens on that site's date, which is still yesterday in UTC.
Each site may name its IANA time zone (``Site.time_zone``); a blank one means the plant's ``TIME_ZONE`` setting
(set with the ``QUENBY_TIME_ZONE`` environment variable). Basis: the IANA time zone database, through Python's
``zoneinfo``.

:func:`local_date` is pure (an aware instant and a zone name in, a date out); :func:`today` reads the clock.
"""
from __future__ import annotations

import datetime as dt
import zoneinfo

from django.conf import settings
from django.core.exceptions import ValidationError
from django.utils import timezone


def zone_name(name: str | None) -> str:
    """The zone to use: the given one, else the plant's TIME_ZONE setting."""
    return (name or "").strip() or settings.TIME_ZONE


def local_date(instant: dt.datetime, name: str) -> dt.date:
    """The calendar date of the aware ``instant`` in the IANA zone ``name``."""
    if instant.tzinfo is None:
        raise ValueError("need an aware datetime")
    return instant.astimezone(zoneinfo.ZoneInfo(name)).date()


def today(name: str | None = None) -> dt.date:
    """Today's date in the zone ``name`` (blank: the plant's)."""
    return local_date(timezone.now(), zone_name(name))


def validate_time_zone(value: str):
    """Refuse a name that is not an IANA time zone, at the field."""
    if not value:
        return
    try:
        zoneinfo.ZoneInfo(value)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError, OSError):
        raise ValidationError(
            f'"{value}" is not a time zone name; use an IANA name such as Europe/London or Australia/Brisbane.',
            code="invalid_time_zone") from None
