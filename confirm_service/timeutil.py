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
