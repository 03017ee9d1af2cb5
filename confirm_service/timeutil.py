"""UTC time helpers: every timestamp in the service is timezone-aware UTC."""

from __future__ import annotations

from datetime import UTC, datetime


def utc_now() -> datetime:
    """The current time, timezone-aware UTC, to the microsecond."""
    return datetime.now(UTC)


def require_aware_utc(value: datetime, field: str = "time") -> datetime:
    """Return ``value`` converted to UTC; refuse a naive datetime."""
    if value.tzinfo is None or value.utcoffset() is None:
        raise ValueError(f"{field}: timestamp must carry a time-zone offset")
    return value.astimezone(UTC)


def iso_utc(value: datetime) -> str:
    """ISO 8601 with an explicit ``+00:00`` offset."""
    return require_aware_utc(value).isoformat()
