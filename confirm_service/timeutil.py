"""UTC time helpers: every timestamp in the service is timezone-aware UTC."""

from __future__ import annotations

from datetime import UTC, datetime


def utc_now() -> datetime:
    """The current time, timezone-aware UTC, to the microsecond."""
    return datetime.now(UTC)


def is_aware(value: datetime) -> bool:
    """True when ``value`` carries a time-zone offset."""
    return value.tzinfo is not None and value.utcoffset() is not None


def parse_iso_time(text: str) -> datetime:
    """ISO 8601 text as a datetime, offset or not; ValueError for malformed text."""
    return datetime.fromisoformat(text.strip())


def parse_aware_time(text: str) -> datetime:
    """An ISO 8601 date-time with a UTC offset; ValueError for naive or malformed text."""
    value = parse_iso_time(text)
    if not is_aware(value):
        raise ValueError(f"{text!r} has no UTC offset")
    return value


def require_aware_utc(value: datetime, field: str = "time") -> datetime:
    """Return ``value`` converted to UTC; refuse a naive datetime."""
    if not is_aware(value):
        raise ValueError(f"{field}: timestamp must carry a time-zone offset")
    return value.astimezone(UTC)


def iso_utc(value: datetime) -> str:
    """ISO 8601 with an explicit ``+00:00`` offset."""
    return require_aware_utc(value).isoformat()


UNIX_EPOCH_MJD = 40587.0
"""The Modified Julian Date of 1970-01-01T00:00:00 UTC (MJD = JD - 2400000.5)."""


def mjd_utc(value: datetime) -> float:
    """Modified Julian Date on the UTC time scale (days; a leap second is not counted)."""
    return UNIX_EPOCH_MJD + require_aware_utc(value).timestamp() / 86_400.0


def utc_and_mjd(value: datetime | None) -> str:
    """``2026-11-20 03:00:00 UTC (MJD 61364.12500)``, or an em dash for no time."""
    if value is None:
        return "—"
    utc = require_aware_utc(value)
    return f"{utc:%Y-%m-%d %H:%M:%S} UTC (MJD {mjd_utc(utc):.5f})"
