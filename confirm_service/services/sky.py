"""Predictions and visibility for registered sites and targets, or for explicit positions.

Resolves site codes and target names from the log, then calls the plain-value functions of
:mod:`confirm_service.services.predictions`; physics refusals become field errors (422).
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

from sqlalchemy.orm import Session

from confirm_service import physics
from confirm_service.errors import Invalid, NotFound
from confirm_service.physics import PhysicsInputError
from confirm_service.schemas.predictions import (
    NextWindows,
    PredictionResult,
    SiteWindows,
    VisibilityResult,
)
from confirm_service.services import predictions
from confirm_service.services.sites import all_sites, site_by_code, target_by_name


@dataclass(frozen=True)
class SitePosition:
    code: str | None
    latitude_deg: float
    longitude_deg: float
    elevation_m: float
    min_elevation_deg: float = 10.0
    sun_avoidance_deg: float = 5.0


@dataclass(frozen=True)
class TargetPosition:
    name: str | None
    ra_deg: float
    dec_deg: float
    motion: dict[str, Any]


@contextmanager
def physics_refusals() -> Iterator[None]:
    """Turn a physics refusal into a 422 naming the field."""
    try:
        yield
    except PhysicsInputError as exc:
        raise Invalid(exc.message, [(exc.field, exc.message)]) from None


def _needed(session: Session | None) -> Session:
    """The session a look-up by code or name reads from."""
    if session is None:
        raise ValueError("a look-up by code or name needs a database session")
    return session


def resolve_site(
    session: Session | None,
    code: str | None,
    lat: float | None,
    lon: float | None,
    height: float | None,
    prefix: str = "site",
) -> SitePosition:
    """A registered site by code (needs a session), or an explicit position (degrees, metres)."""
    if code:
        site = site_by_code(_needed(session), code, prefix)
        return SitePosition(
            site.code,
            site.latitude_deg,
            site.longitude_deg,
            site.elevation_m,
            site.min_elevation_deg,
            site.sun_avoidance_deg,
        )
    if lat is None or lon is None:
        raise Invalid(
            "no site", [(prefix, f"give {prefix} (a code) or {prefix}_lat and {prefix}_lon")]
        )
    return SitePosition(None, lat, lon, height or 0.0)


def resolve_target(
    session: Session | None, name: str | None, ra: float | None, dec: float | None
) -> TargetPosition:
    """A registered target by name (needs a session), or an explicit ICRS position (deg)."""
    if name:
        target = target_by_name(_needed(session), name)
        motion = {
            "pm_ra_mas_yr": target.pm_ra_mas_yr,
            "pm_dec_mas_yr": target.pm_dec_mas_yr,
            "parallax_mas": target.parallax_mas,
            "distance_pc": target.distance_pc,
            "epoch": target.epoch,
        }
        return TargetPosition(target.name, target.ra_deg, target.dec_deg, motion)
    if ra is None or dec is None:
        raise Invalid("no target", [("target", "give target (a name) or ra and dec")])
    return TargetPosition(None, ra, dec, {})


@dataclass(frozen=True)
class StoredHit:
    """A stored hit as a measurement: where and when (scan start + time offset), what was
    measured, and its 1-sigma uncertainties under the configured protocol."""

    site: SitePosition
    target: TargetPosition
    time: datetime
    frequency_hz: float
    drift_hz_s: float
    frequency_uncertainty_hz: float
    drift_uncertainty_hz_s: float


def stored_hit(session: Session, detection_id: int) -> StoredHit:
    """The hit ``detection_id`` of an on-target scan, ready for :func:`predict`."""
    from confirm_service.models import Detection, Observation
    from confirm_service.protocol.reference import measurement_uncertainty
    from confirm_service.services.protocols import configured_protocol

    detection = session.get(Detection, detection_id)
    if detection is None:
        raise NotFound(f"no detection {detection_id}", [("detection", "no such detection")])
    scan = session.get(Observation, detection.observation_id)
    assert scan is not None  # a foreign key
    if scan.target is None:
        raise Invalid("the hit's scan has no target", [("detection", "its scan names no target")])
    sigma_f, sigma_drift = measurement_uncertainty(
        configured_protocol(session), scan.channel_width_hz, scan.duration_s
    )
    return StoredHit(
        site=resolve_site(session, scan.site.code, None, None, None),
        target=resolve_target(session, scan.target.name, None, None),
        time=scan.start + timedelta(seconds=detection.time_offset_s),
        frequency_hz=detection.frequency_hz,
        drift_hz_s=detection.drift_hz_s,
        frequency_uncertainty_hz=sigma_f,
        drift_uncertainty_hz_s=sigma_drift,
    )


def predict(
    site: SitePosition,
    target: TargetPosition,
    time: datetime,
    observed_frequency_hz: float,
    observed_drift_hz_s: float | None = None,
    drift_uncertainty_hz_s: float | None = None,
    to_site: SitePosition | None = None,
    to_time: datetime | None = None,
    frequency_uncertainty_hz: float = 0.0,
) -> PredictionResult:
    with physics_refusals():
        return predictions.compute_prediction(
            site.latitude_deg,
            site.longitude_deg,
            site.elevation_m,
            target.ra_deg,
            target.dec_deg,
            time,
            observed_frequency_hz,
            observed_drift_hz_s,
            drift_uncertainty_hz_s,
            (to_site.latitude_deg, to_site.longitude_deg, to_site.elevation_m) if to_site else None,
            to_time,
            frequency_uncertainty_hz=frequency_uncertainty_hz,
            **target.motion,
        )


def visibility(
    site: SitePosition,
    target: TargetPosition,
    start: datetime,
    days: float,
    min_elevation_deg: float | None = None,
    sun_avoidance_deg: float | None = None,
) -> VisibilityResult:
    with physics_refusals():
        return predictions.compute_visibility(
            site.latitude_deg,
            site.longitude_deg,
            site.elevation_m,
            target.ra_deg,
            target.dec_deg,
            start,
            days,
            site.min_elevation_deg if min_elevation_deg is None else min_elevation_deg,
            site.sun_avoidance_deg if sun_avoidance_deg is None else sun_avoidance_deg,
        )


def next_windows_everywhere(
    session: Session, target: TargetPosition, start: datetime, count: int
) -> NextWindows:
    """The next ``count`` windows of ``target`` at every registered site."""
    with physics_refusals():
        coord = physics.target_coord(target.ra_deg, target.dec_deg, **target.motion)
        sites = [
            (
                s.code,
                physics.site_location(s.latitude_deg, s.longitude_deg, s.elevation_m),
                s.min_elevation_deg,
                s.sun_avoidance_deg,
            )
            for s in all_sites(session)
        ]
        found = physics.next_windows(sites, coord, start, count)
    return NextWindows(
        target=target.name,
        start=start,
        sites=[
            SiteWindows(site=code, windows=[predictions.window_result(w) for w in windows])
            for code, windows in found.items()
        ],
        notes=[predictions.VISIBILITY_CAUTION],
    )
