"""What a follow-up request asks of a partner site: when to look, where the signal should be.

From the candidate's reference detection and the partner site, over the request's horizon:

* the target's visibility windows at the site (elevation above the site's minimum, Sun farther
  than the site's declared avoidance angle), from :func:`physics.visibility_windows`;
* in each window, the predicted topocentric frequency and drift at the site every
  ``slot_s`` seconds (the sky-fixed hypothesis of :mod:`protocol.reference`), with the band a
  scan starting then must record for the protocol's matcher to find the signal
  (:func:`protocol.search_windows_hz`: the protocol's sigma multiplier, 3 in the shipped files);
* which windows can tell a sky-fixed transmitter from a local one: those where Earth's drift
  at the partner differs from the drift Earth gave at discovery by enough drift tolerances for
  the doppler_consistency check to have power (the rule's one home: ``protocol.drift_power``).

Everything is JSON-ready (floats in Hz, Hz/s, s, deg; times ISO 8601 UTC).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

import numpy as np

from confirm_service import physics
from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION, FOLLOWUP_EMBARGO
from confirm_service.protocol import (
    DetectionFact,
    ObservationFact,
    PhysicsContext,
    SiteFact,
    TargetFact,
    search_windows_hz,
)
from confirm_service.protocol.drift_power import DriftRule, drift_rule
from confirm_service.protocol.reference import predict_from_reference

DEFAULT_SLOT_S = 600.0
MAX_SLOTS_PER_WINDOW = 36


@dataclass(frozen=True)
class PartnerSite:
    """The site asked to look, with its own limits (deg)."""

    fact: SiteFact
    min_elevation_deg: float
    sun_avoidance_deg: float


@dataclass(frozen=True)
class Discovery:
    """The candidate's reference detection, its scan and its target, as the protocol sees them."""

    candidate_id: int
    detection: DetectionFact
    observation: ObservationFact
    target: TargetFact


def _slots(start: datetime, end: datetime, slot_s: float) -> list[float]:
    """Scan start times (unix s) filling the window, thinned to at most MAX_SLOTS_PER_WINDOW."""
    begin, finish = start.timestamp(), end.timestamp() - slot_s
    if finish < begin:
        return [begin]
    times = np.arange(begin, finish + 1e-6, slot_s)
    if times.size > MAX_SLOTS_PER_WINDOW:
        times = np.linspace(begin, finish, MAX_SLOTS_PER_WINDOW)
    return [float(t) for t in times]


def _prospective_scans(
    partner: PartnerSite, discovery: Discovery, starts: list[float], slot_s: float
) -> list[ObservationFact]:
    """Scans the partner could make, with the discovery scan's band and resolution."""
    reference = discovery.observation
    return [
        ObservationFact(
            id=index,
            site=partner.fact,
            target_name=discovery.target.name,
            pointing_ra_deg=discovery.target.ra_deg,
            pointing_dec_deg=discovery.target.dec_deg,
            start_unix_s=start,
            duration_s=slot_s,
            frequency_min_hz=reference.frequency_min_hz,
            frequency_max_hz=reference.frequency_max_hz,
            channel_width_hz=reference.channel_width_hz,
            time_resolution_s=reference.time_resolution_s,
            on_source=True,
        )
        for index, start in enumerate(starts)
    ]


def _iso(unix_s: float) -> str:
    return physics.utc_datetime(unix_s).isoformat()


def _window_entry(
    protocol: Any,
    context: PhysicsContext,
    partner: PartnerSite,
    discovery: Discovery,
    window: Any,
    slot_s: float,
    discovery_earth_drift_hz_s: float,
    tolerance_hz_s: float,
    rule: DriftRule,
) -> dict[str, Any]:
    starts = _slots(window.start, window.end, slot_s)
    middles = np.asarray(starts) + slot_s / 2.0
    _, track = predict_from_reference(
        context,
        discovery.detection,
        discovery.observation,
        discovery.target,
        [partner.fact],
        np.zeros(middles.size, dtype=np.int64),
        middles,
        protocol,
    )
    scans = _prospective_scans(partner, discovery, starts, slot_s)
    bands = search_windows_hz(
        protocol, discovery.detection, discovery.observation, discovery.target, scans, context
    )
    difference = np.abs(track.earth_drift_hz_s - discovery_earth_drift_hz_s)
    best = int(np.argmax(difference))
    ratio = rule.tolerances_apart(float(difference[best]), tolerance_hz_s)
    discriminating = rule.has_power(float(difference[best]), tolerance_hz_s)
    why = (
        f"Earth's drift here reaches {track.earth_drift_hz_s[best]:+.4f} Hz/s at "
        f"{_iso(float(middles[best]))[:16]}Z against {discovery_earth_drift_hz_s:+.4f} Hz/s at "
        f"discovery: {difference[best]:.4f} Hz/s apart, {ratio:.1f} drift tolerances of "
        f"{tolerance_hz_s:.4f} Hz/s ("
        + ("at least" if discriminating else "fewer than")
        + f" the {rule.power_tolerances:g} that tell a sky-fixed source from a local one)."
    )
    return {
        "start": window.start.isoformat(),
        "end": window.end.isoformat(),
        "max_elevation_deg": window.max_elevation_deg,
        "discriminating": discriminating,
        "earth_drift_difference_hz_s": float(difference[best]),
        "drift_tolerances": ratio,
        "why": why,
        "track": [
            {
                "scan_start": _iso(start),
                "time": _iso(float(middle)),
                "frequency_hz": float(f),
                "frequency_sigma_hz": float(sigma),
                "band_low_hz": float(bands[i][0]),
                "band_high_hz": float(bands[i][1]),
                "drift_hz_s": float(drift),
                "drift_sigma_hz_s": 0.0,
                "earth_drift_hz_s": float(earth),
            }
            for i, (start, middle, f, sigma, drift, earth) in enumerate(
                zip(
                    starts,
                    middles,
                    track.frequency_hz,
                    track.frequency_uncertainty_hz,
                    track.drift_hz_s,
                    track.earth_drift_hz_s,
                    strict=True,
                )
            )
        ],
    }


def build_request_content(
    protocol: Any,
    context: PhysicsContext,
    discovery: Discovery,
    partner: PartnerSite,
    horizon: tuple[datetime, datetime],
    requesting_site: str,
    note: str = "",
    slot_s: float = DEFAULT_SLOT_S,
) -> dict[str, Any]:
    """The body of a request to ``partner`` over ``horizon`` (start, end; aware UTC).

    Windows that discriminate come first (most drift tolerances first), then the others in
    time order; ``preferred_windows`` lists the discriminating ones' positions.
    """
    start, end = horizon
    target_coord = context.target(discovery.target)
    windows = physics.visibility_windows(
        context.location(partner.fact),
        target_coord,
        start,
        end,
        min_elevation_deg=partner.min_elevation_deg,
        sun_avoidance_deg=partner.sun_avoidance_deg,
    )
    reference, _ = predict_from_reference(
        context,
        discovery.detection,
        discovery.observation,
        discovery.target,
        [],
        np.empty(0, np.int64),
        np.empty(0),
        protocol,
    )
    partner_resolution = discovery.observation.channel_width_hz / slot_s
    rule = drift_rule(protocol)
    tolerance = rule.tolerance(partner_resolution, reference.drift_resolution_hz_s)
    entries = [
        _window_entry(
            protocol,
            context,
            partner,
            discovery,
            w,
            slot_s,
            reference.earth_drift_hz_s,
            tolerance,
            rule,
        )
        for w in windows
        if w.duration_s >= min(slot_s, 60.0)
    ]
    entries.sort(key=lambda e: (not e["discriminating"], e["start"]))
    points = [p for e in entries for p in e["track"]]
    drift_sigma = reference.drift_uncertainty_hz_s
    for point in points:
        point["drift_sigma_hz_s"] = drift_sigma
    content: dict[str, Any] = {
        "candidate_id": discovery.candidate_id,
        "requesting_site": requesting_site,
        "target": {
            "name": discovery.target.name,
            "ra_deg": discovery.target.ra_deg,
            "dec_deg": discovery.target.dec_deg,
            "pm_ra_mas_yr": discovery.target.pm_ra_mas_yr,
            "pm_dec_mas_yr": discovery.target.pm_dec_mas_yr,
            "parallax_mas": discovery.target.parallax_mas,
        },
        "site": partner.fact.code,
        "site_limits": {
            "min_elevation_deg": partner.min_elevation_deg,
            "sun_avoidance_deg": partner.sun_avoidance_deg,
        },
        "horizon": {"start": start.isoformat(), "end": end.isoformat()},
        "discovery": {
            "site": discovery.observation.site.code,
            "time": _iso(reference.unix_s),
            "frequency_hz": reference.observed_frequency_hz,
            "drift_hz_s": reference.observed_drift_hz_s,
            "earth_drift_hz_s": reference.earth_drift_hz_s,
            "barycentric_frequency_hz": reference.barycentric_frequency_hz,
            "residual_drift_hz_s": reference.residual_drift_hz_s,
        },
        "windows": entries,
        "preferred_windows": [i for i, e in enumerate(entries) if e["discriminating"]],
        "drift_tolerance_hz_s": tolerance,
        "channel_width_hz": discovery.observation.channel_width_hz,
        "time_resolution_s": discovery.observation.time_resolution_s,
        "scan_duration_s": slot_s,
        "confidentiality": f"{FOLLOWUP_EMBARGO} {CANDIDATE_IS_NOT_A_DETECTION}",
        "note": note,
    }
    if points:
        content["record_band_hz"] = [
            min(p["band_low_hz"] for p in points),
            max(p["band_high_hz"] for p in points),
        ]
        margin = 3.0 * drift_sigma + tolerance
        content["drift_range_hz_s"] = [
            min(p["drift_hz_s"] for p in points) - margin,
            max(p["drift_hz_s"] for p in points) + margin,
        ]
    else:
        content["record_band_hz"] = None
        content["drift_range_hz_s"] = None
    return content


def horizon_from(now: datetime, hours: float) -> tuple[datetime, datetime]:
    """The request's horizon: from ``now`` for ``hours``."""
    return now, now + timedelta(hours=hours)
