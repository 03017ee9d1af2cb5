"""Response models of the physics services (pydantic v2).

Datetimes are timezone-aware UTC and serialise to ISO 8601 with ``+00:00``.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Annotated

from pydantic import AfterValidator, BaseModel, ConfigDict, PlainSerializer


def _as_utc(value: datetime) -> datetime:
    if value.tzinfo is None or value.utcoffset() is None:
        raise ValueError("naive datetime refused: give a timezone (UTC)")
    return value.astimezone(UTC)


UtcDateTime = Annotated[
    datetime,
    AfterValidator(_as_utc),
    PlainSerializer(lambda value: value.isoformat(), return_type=str, when_used="json"),
]


class PredictionResult(BaseModel):
    """Doppler quantities at a detection and, optionally, the signal expected elsewhere/later.

    Signs: radial_velocity_m_s > 0 when the observer moves toward the target; drift > 0 when
    the frequency rises; f_site = f_bary * (1 + v/c).
    """

    model_config = ConfigDict(frozen=True)

    # inputs, echoed
    site_lat_deg: float
    site_lon_deg: float
    site_elevation_m: float
    ra_deg: float
    dec_deg: float
    pm_ra_mas_yr: float | None = None
    pm_dec_mas_yr: float | None = None
    parallax_mas: float | None = None
    distance_pc: float | None = None
    time: UtcDateTime
    observed_frequency_hz: float
    frequency_uncertainty_hz: float = 0.0
    observed_drift_hz_s: float | None = None
    drift_uncertainty_hz_s: float | None = None
    to_site_lat_deg: float | None = None
    to_site_lon_deg: float | None = None
    to_site_elevation_m: float | None = None
    to_time: UtcDateTime | None = None

    # at the detection
    radial_velocity_m_s: float
    earth_drift_hz_s: float
    barycentric_frequency_hz: float
    residual_drift_hz_s: float | None = None

    # at the second site / time
    predicted_frequency_hz: float | None = None
    predicted_drift_hz_s: float | None = None
    predicted_frequency_uncertainty_hz: float | None = None
    predicted_drift_uncertainty_hz_s: float | None = None
    to_radial_velocity_m_s: float | None = None
    to_earth_drift_hz_s: float | None = None
    time_gap_s: float | None = None
    barycentric_gap_s: float | None = None
    site_distance_km: float | None = None

    ephemeris: str
    model: str | None = None
    notes: list[str] = []


class VisibilityWindowResult(BaseModel):
    """One observable span; the flags mark spans cut by the searched period."""

    model_config = ConfigDict(frozen=True)

    start: UtcDateTime
    end: UtcDateTime
    duration_s: float
    max_elevation_deg: float
    starts_at_search_start: bool = False
    ends_at_search_end: bool = False


class VisibilityResult(BaseModel):
    """Windows when the target is above min_elevation_deg and farther than sun_avoidance_deg
    from the Sun (geometry only; the site's own safety rules still apply)."""

    model_config = ConfigDict(frozen=True)

    site_lat_deg: float
    site_lon_deg: float
    site_elevation_m: float
    ra_deg: float
    dec_deg: float
    start: UtcDateTime
    end: UtcDateTime
    days: float
    min_elevation_deg: float
    sun_avoidance_deg: float
    step_s: float
    windows: list[VisibilityWindowResult]
    notes: list[str] = []


class SiteWindows(BaseModel):
    """The next windows of a target at one registered site."""

    model_config = ConfigDict(frozen=True)

    site: str
    windows: list[VisibilityWindowResult]


class NextWindows(BaseModel):
    """The next windows of a target at every registered site (``/visibility`` without a site)."""

    model_config = ConfigDict(frozen=True)

    target: str | None
    start: UtcDateTime
    sites: list[SiteWindows]
    notes: list[str] = []
