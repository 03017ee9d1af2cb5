"""Numbers behind the pictures observers read: a candidate's hits against its predicted track
at each site, observed drift against Earth's drift, and a target's elevation at every site.

Read only. Times are POSIX seconds (UTC), frequencies Hz, drift rates Hz/s, angles degrees.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable, Hashable
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from typing import Any

import numpy as np
from numpy.typing import NDArray
from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service import physics
from confirm_service.models import (
    Candidate,
    CandidateDetection,
    Detection,
    Observation,
    Site,
    Target,
)
from confirm_service.protocol import default_physics_context, reference_of, target_coord_of
from confirm_service.services import facts as factbook
from confirm_service.services.candidate_views import get_candidate
from confirm_service.services.protocols import protocol_of
from confirm_service.services.sites import all_sites, target_by_name
from confirm_service.timeutil import utc_now

TRACK_SAMPLES = 400
ELEVATION_STEP_S = 600.0
SIGMA_BAND = 3.0
"""The predicted track is drawn with a band of this many standard deviations."""


@dataclass(frozen=True)
class HitPoint:
    """A linked hit: when (POSIX s) and what was seen, and what was predicted for it."""

    detection_id: int
    observation_id: int
    site: str
    unix_s: float
    frequency_hz: float
    drift_hz_s: float
    snr: float
    on_source: bool
    role: str
    predicted_frequency_hz: float
    frequency_sigma_hz: float
    predicted_drift_hz_s: float
    drift_sigma_hz_s: float
    earth_drift_hz_s: float


@dataclass(frozen=True)
class SiteTrack:
    """The predicted frequency at one site over the span of the candidate's scans."""

    site: str
    unix_s: NDArray[np.float64]
    frequency_hz: NDArray[np.float64]
    sigma_hz: NDArray[np.float64]


@dataclass(frozen=True)
class CandidateTracks:
    reference_frequency_hz: float
    residual_drift_hz_s: float
    hits: list[HitPoint]
    tracks: list[SiteTrack]


def _measurement(session: Session, candidate: Candidate) -> tuple[object, object]:
    """The reference signal as a physics measurement, and the target's coordinates."""
    protocol = protocol_of(session, candidate)
    context = default_physics_context()
    facts = factbook.candidate_facts(session, candidate, protocol, utc_now().timestamp(), context)
    signal = reference_of(facts, protocol.model, context)
    site = facts.reference_observation.site
    measurement = physics.SignalMeasurement(
        physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m),
        signal.unix_s,
        signal.observed_frequency_hz,
        signal.observed_drift_hz_s,
        signal.frequency_uncertainty_hz,
        signal.drift_uncertainty_hz_s,
    )
    target = target_coord_of(facts.target)
    return measurement, target


def _linked_rows(session: Session, candidate_id: int) -> list[tuple]:
    return list(
        session.execute(
            select(CandidateDetection.role, Detection, Observation, Site)
            .join(Detection, Detection.id == CandidateDetection.detection_id)
            .join(Observation, Observation.id == CandidateDetection.observation_id)
            .join(Site, Site.id == Observation.site_id)
            .where(CandidateDetection.candidate_id == candidate_id)
            .order_by(Observation.start, Detection.id)
        ).all()
    )


class _RecentResults:
    """A small thread-safe cache of recent results by key (oldest dropped first)."""

    def __init__(self, size: int) -> None:
        self.size = size
        self.items: OrderedDict[Hashable, Any] = OrderedDict()
        self.lock = threading.Lock()

    def get(self, key: Hashable, compute: Callable[[], Any]) -> Any:
        with self.lock:
            if key in self.items:
                self.items.move_to_end(key)
                return self.items[key]
        value = compute()
        with self.lock:
            self.items[key] = value
            while len(self.items) > self.size:
                self.items.popitem(last=False)
        return value


_tracks_cache = _RecentResults(64)
_elevation_cache = _RecentResults(32)


def _database_key(session: Session) -> str:
    return str(session.get_bind().engine.url)


def candidate_tracks(session: Session, candidate_id: int) -> CandidateTracks:
    """Every linked hit against the prediction for its site and time, and each site's track.

    Kept for reuse until the candidate changes (its ``updated_at`` and evaluation count).
    """
    candidate = get_candidate(session, candidate_id)
    key = (
        _database_key(session),
        candidate_id,
        candidate.updated_at,
        candidate.evaluation_count,
        len(_linked_rows(session, candidate_id)),
    )
    return _tracks_cache.get(key, lambda: _candidate_tracks(session, candidate))


def _candidate_tracks(session: Session, candidate: Candidate) -> CandidateTracks:
    candidate_id = candidate.id
    measurement, target = _measurement(session, candidate)
    rows = _linked_rows(session, candidate_id)
    context = default_physics_context()
    by_site: dict[str, list[tuple]] = {}
    for row in rows:
        by_site.setdefault(row[3].code, []).append(row)
    starts = [o.start.timestamp() for _r, _d, o, _s in rows] or [measurement.unix_s]  # type: ignore[attr-defined]
    ends = [o.start.timestamp() + o.duration_s for _r, _d, o, _s in rows] or [measurement.unix_s]  # type: ignore[attr-defined]
    margin = max(1800.0, 0.05 * (max(ends) - min(starts)))
    span = np.linspace(min(starts) - margin, max(ends) + margin, TRACK_SAMPLES)
    hits: list[HitPoint] = []
    tracks: list[SiteTrack] = []
    for code, site_rows in sorted(by_site.items()):
        site = site_rows[0][3]
        location = physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m)
        track = physics.predict_signal(measurement, target, location, span, context.cache)  # type: ignore[arg-type]
        tracks.append(SiteTrack(code, span, track.frequency_hz, track.frequency_uncertainty_hz))
        times = np.array([o.start.timestamp() + d.time_offset_s for _r, d, o, _s in site_rows])
        at_hits = physics.predict_signal(measurement, target, location, times, context.cache)  # type: ignore[arg-type]
        for index, (role, detection, observation, _site) in enumerate(site_rows):
            hits.append(
                HitPoint(
                    detection_id=detection.id,
                    observation_id=observation.id,
                    site=code,
                    unix_s=float(times[index]),
                    frequency_hz=detection.frequency_hz,
                    drift_hz_s=detection.drift_hz_s,
                    snr=detection.snr,
                    on_source=observation.on_source,
                    role=role,
                    predicted_frequency_hz=float(at_hits.frequency_hz[index]),
                    frequency_sigma_hz=float(at_hits.frequency_uncertainty_hz[index]),
                    predicted_drift_hz_s=float(at_hits.drift_hz_s[index]),
                    drift_sigma_hz_s=float(at_hits.drift_uncertainty_hz_s[index]),
                    earth_drift_hz_s=float(at_hits.earth_drift_hz_s[index]),
                )
            )
    hits.sort(key=lambda h: (h.unix_s, h.detection_id))
    return CandidateTracks(
        reference_frequency_hz=float(measurement.frequency_hz),  # type: ignore[attr-defined]
        residual_drift_hz_s=candidate.residual_drift_hz_s,
        hits=hits,
        tracks=tracks,
    )


@dataclass(frozen=True)
class ElevationTrack:
    """A target's elevation at one site, its observable windows and Sun-avoidance periods."""

    site: str
    site_name: str
    min_elevation_deg: float
    sun_avoidance_deg: float
    unix_s: NDArray[np.float64]
    elevation_deg: NDArray[np.float64]
    sun_separation_deg: NDArray[np.float64]
    windows: list[tuple[datetime, datetime, float]] = field(default_factory=list)

    @property
    def sun_too_close(self) -> NDArray[np.bool_]:
        return self.sun_separation_deg < self.sun_avoidance_deg


def elevation_tracks(
    session: Session, target_name: str, start: datetime, hours: float = 48.0
) -> list[ElevationTrack]:
    """The target's elevation every 10 minutes at each registered site, with its windows.

    ``start`` is taken back to the previous whole 10 minutes, and results are reused until
    then, or until a site or the target changes.
    """
    target = target_by_name(session, target_name)
    start = datetime.fromtimestamp(
        start.timestamp() // ELEVATION_STEP_S * ELEVATION_STEP_S, start.tzinfo
    )
    sites = tuple((s.id, s.updated_at) for s in all_sites(session))
    key = (_database_key(session), target.id, target.updated_at, start, hours, sites)
    return _elevation_cache.get(key, lambda: _elevation_tracks(session, target, start, hours))


def _elevation_tracks(
    session: Session, target: Target, start: datetime, hours: float
) -> list[ElevationTrack]:
    coord = physics.target_coord(target.ra_deg, target.dec_deg)
    end = start + timedelta(hours=hours)
    unix_s = np.arange(start.timestamp(), end.timestamp() + 1.0, ELEVATION_STEP_S)
    times = physics.time_from_unix_s(unix_s)
    found = []
    for site in all_sites(session):
        location = physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m)
        elevation, _azimuth = physics.altaz(location, coord, times)
        separation = physics.sun_separation_deg(location, coord, times)
        windows = physics.visibility_windows(
            location,
            coord,
            start,
            end,
            min_elevation_deg=site.min_elevation_deg,
            sun_avoidance_deg=site.sun_avoidance_deg,
        )
        found.append(
            ElevationTrack(
                site=site.code,
                site_name=site.name,
                min_elevation_deg=site.min_elevation_deg,
                sun_avoidance_deg=site.sun_avoidance_deg,
                unix_s=unix_s,
                elevation_deg=elevation,
                sun_separation_deg=np.asarray(separation, dtype=np.float64),
                windows=[(w.start, w.end, w.max_elevation_deg) for w in windows],
            )
        )
    return found


@dataclass(frozen=True)
class VisibilityNow:
    """Whether a target is observable from a site now, and its current or next window."""

    site: str
    target: str
    elevation_deg: float
    sun_separation_deg: float
    observable: bool
    window_start: datetime | None
    window_end: datetime | None


def open_targets(session: Session) -> list[Target]:
    """Targets of open candidates, by name."""
    return list(
        session.execute(
            select(Target)
            .where(Target.id.in_(select(Candidate.target_id).where(Candidate.state == "open")))
            .order_by(Target.name)
        ).scalars()
    )


def visibility_now(
    session: Session, now: datetime, site_code: str | None = None
) -> list[VisibilityNow]:
    """For each site (or one) and each open candidate's target: now, and the next 48 h."""
    targets = open_targets(session)
    sites = [s for s in all_sites(session) if site_code in (None, s.code)]
    found = []
    moment = physics.time_from_unix_s(np.array([now.timestamp()]))
    for site in sites:
        location = physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m)
        for target in targets:
            coord = physics.target_coord(target.ra_deg, target.dec_deg)
            elevation, _ = physics.altaz(location, coord, moment)
            separation = float(physics.sun_separation_deg(location, coord, moment)[0])
            windows = physics.visibility_windows(
                location,
                coord,
                now,
                now + timedelta(hours=48),
                min_elevation_deg=site.min_elevation_deg,
                sun_avoidance_deg=site.sun_avoidance_deg,
            )
            first = windows[0] if windows else None
            found.append(
                VisibilityNow(
                    site=site.code,
                    target=target.name,
                    elevation_deg=float(elevation[0]),
                    sun_separation_deg=separation,
                    observable=bool(first and first.start <= now <= first.end),
                    window_start=first.start if first else None,
                    window_end=first.end if first else None,
                )
            )
    return found
