"""Query models of the prediction and visibility endpoints (same inputs as the CLI)."""

from __future__ import annotations

from typing import Annotated

from pydantic import Field

from confirm_service.schemas.bounds import (
    DriftHzS,
    DriftUncertaintyHzS,
    ElevationM,
    FrequencyHz,
    ObservationTime,
)
from confirm_service.schemas.common import Latitude, Longitude, StrictModel


class SiteQuery(StrictModel):
    site: str | None = Field(None, description="registered site code, or give site_lat/site_lon")
    site_lat: Latitude | None = Field(None, description="deg")
    site_lon: Longitude | None = Field(None, description="deg, east positive")
    site_height: ElevationM | None = Field(None, description="m above the WGS84 ellipsoid")
    target: str | None = Field(None, description="registered target name, or give ra/dec")
    ra: Annotated[float, Field(ge=0, lt=360)] | None = Field(None, description="ICRS deg")
    dec: Annotated[float, Field(ge=-90, le=90)] | None = Field(None, description="ICRS deg")


class PredictionQuery(SiteQuery):
    time: ObservationTime = Field(
        description="ISO 8601 with offset, 1950 to 2200: the instant observed_frequency_hz "
        "refers to. For a hit: its scan's start plus its time_offset_s (a candidate's "
        "reference_time, a linked detection's time). For a report: its observed_at plus its "
        "time_offset_s. Matching uses the same instants."
    )
    observed_frequency_hz: FrequencyHz = Field(
        description="Hz, topocentric at the site, at the instant given as time"
    )
    observed_drift_hz_s: DriftHzS | None = None
    drift_uncertainty_hz_s: DriftUncertaintyHzS | None = None
    to_site: str | None = None
    to_site_lat: Latitude | None = None
    to_site_lon: Longitude | None = None
    to_site_height: ElevationM | None = None
    to_time: ObservationTime | None = Field(
        default=None,
        description="The instant to predict for (default: time). A report made from this "
        "prediction states predicted_frequency_hz at observed_at + time_offset_s = to_time.",
    )


class VisibilityQuery(SiteQuery):
    from_: ObservationTime = Field(alias="from", description="ISO 8601 with offset, 1950 to 2200")
    days: Annotated[float, Field(gt=0, le=366)] = 1.0
    min_elevation_deg: Annotated[float, Field(ge=-10, le=90)] | None = None
    sun_avoidance_deg: Annotated[float, Field(ge=0, le=180)] | None = None
    count: Annotated[int, Field(ge=1, le=50)] = 3
