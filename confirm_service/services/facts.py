"""Database rows to the protocol core's frozen facts, fetching only what bears on a candidate.

A candidate's related scans are: every scan of its target, every scan of the reference scan's
cadence, and every scan at any pointing that overlaps one of the target's scans in time (other
beams). Of each, only the detections inside the search window the protocol computes for that
scan are read, through the (observation_id, frequency_hz) index.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from datetime import timedelta

from sqlalchemy import and_, or_, select
from sqlalchemy.orm import Session

from confirm_service.models import (
    Candidate,
    Detection,
    FollowUpReport,
    Observation,
    SignOff,
    Site,
    Target,
)
from confirm_service.protocol import (
    CandidateFacts,
    DetectionFact,
    LoadedProtocol,
    ObservationFact,
    ReportFact,
    SignoffFact,
    SiteFact,
    TargetFact,
    search_windows_hz,
)
from confirm_service.protocol.reference import PhysicsContext

OVERLAP_MARGIN = timedelta(minutes=1)


def site_fact(site: Site) -> SiteFact:
    return SiteFact(site.code, site.latitude_deg, site.longitude_deg, site.elevation_m)


def target_fact(target: Target) -> TargetFact:
    return TargetFact(
        target.name,
        target.ra_deg,
        target.dec_deg,
        target.pm_ra_mas_yr,
        target.pm_dec_mas_yr,
        target.parallax_mas,
    )


def detection_fact(detection: Detection) -> DetectionFact:
    return DetectionFact(
        detection.id,
        detection.observation_id,
        detection.frequency_hz,
        detection.drift_hz_s,
        detection.snr,
        detection.time_offset_s,
        detection.bandwidth_hz,
        detection.beam,
    )


def observation_fact(
    observation: Observation, detections: Iterable[Detection] = ()
) -> ObservationFact:
    return ObservationFact(
        id=observation.id,
        site=site_fact(observation.site),
        target_name=observation.target.name if observation.target else None,
        pointing_ra_deg=observation.pointing_ra_deg,
        pointing_dec_deg=observation.pointing_dec_deg,
        start_unix_s=observation.start.timestamp(),
        duration_s=observation.duration_s,
        frequency_min_hz=observation.frequency_min_hz,
        frequency_max_hz=observation.frequency_max_hz,
        channel_width_hz=observation.channel_width_hz,
        time_resolution_s=observation.time_resolution_s,
        on_source=observation.on_source,
        beam=observation.beam,
        cadence=observation.cadence,
        detections=tuple(detection_fact(d) for d in detections),
    )


def related_observations(
    session: Session, target_id: int | None, reference: Observation
) -> list[Observation]:
    """Every scan that can bear on a candidate of ``target_id`` found in ``reference``."""
    conditions = [Observation.id == reference.id]
    if target_id is not None:
        conditions.append(Observation.target_id == target_id)
    if reference.cadence:
        conditions.append(Observation.cadence == reference.cadence)
    direct = list(
        session.execute(select(Observation).where(or_(*conditions)).order_by(Observation.id))
        .unique()
        .scalars()
    )
    spans = [(o.start, o.start + timedelta(seconds=o.duration_s)) for o in direct if o.on_source]
    overlapping: list[Observation] = []
    if spans:
        # Other pointings/beams during the target's on-source scans (multi-beam check).
        window_conditions = [
            and_(
                Observation.start < end + OVERLAP_MARGIN,
                Observation.start >= start - timedelta(hours=6),
            )
            for start, end in spans
        ]
        known = {o.id for o in direct}
        for candidate in (
            session.execute(select(Observation).where(or_(*window_conditions))).unique().scalars()
        ):
            end = candidate.start + timedelta(seconds=candidate.duration_s)
            if candidate.id in known:
                continue
            if any(candidate.start < e and end > s for s, e in spans):
                overlapping.append(candidate)
                known.add(candidate.id)
    return direct + overlapping


def detections_in_windows(
    session: Session, windows: dict[int, tuple[float, float]]
) -> dict[int, list[Detection]]:
    """The detections of each scan inside its frequency window, by the frequency index."""
    found: dict[int, list[Detection]] = {observation_id: [] for observation_id in windows}
    items = list(windows.items())
    for start in range(0, len(items), 200):
        chunk = items[start : start + 200]
        condition = or_(
            *(
                and_(
                    Detection.observation_id == observation_id,
                    Detection.frequency_hz >= low,
                    Detection.frequency_hz <= high,
                )
                for observation_id, (low, high) in chunk
            )
        )
        for detection in session.execute(select(Detection).where(condition)).scalars():
            found[detection.observation_id].append(detection)
    for rows in found.values():
        rows.sort(key=lambda d: d.id)
    return found


def report_facts(session: Session, candidate_id: int) -> tuple[ReportFact, ...]:
    rows = session.execute(
        select(FollowUpReport, Site)
        .join(Site, Site.id == FollowUpReport.site_id)
        .where(FollowUpReport.candidate_id == candidate_id)
        .order_by(FollowUpReport.id)
    ).all()
    return tuple(
        ReportFact(
            id=report.id,
            site=site_fact(site),
            unix_s=report.observed_at.timestamp(),
            detected=report.detected,
            frequency_hz=report.frequency_hz,
            drift_hz_s=report.drift_hz_s,
            frequency_min_hz=report.frequency_min_hz,
            frequency_max_hz=report.frequency_max_hz,
            duration_s=report.duration_s,
        )
        for report, site in rows
    )


def signoff_facts(session: Session, candidate_id: int) -> tuple[SignoffFact, ...]:
    rows = session.execute(
        select(SignOff).where(SignOff.candidate_id == candidate_id).order_by(SignOff.id)
    ).scalars()
    return tuple(SignoffFact(s.stage, s.role, s.person, s.at.timestamp(), s.approve) for s in rows)


def reference_parts(
    session: Session, detection_id: int
) -> tuple[Detection, Observation, Target | None]:
    detection = session.get(Detection, detection_id)
    assert detection is not None
    observation = session.get(Observation, detection.observation_id)
    assert observation is not None
    return detection, observation, observation.target


def candidate_facts(
    session: Session,
    candidate: Candidate,
    protocol: LoadedProtocol,
    now_unix_s: float,
    context: PhysicsContext | None = None,
    observations: Sequence[Observation] | None = None,
) -> CandidateFacts:
    """Everything the protocol looks at for ``candidate`` as of ``now_unix_s``."""
    detection, reference_observation, target = reference_parts(
        session, candidate.reference_detection_id
    )
    assert target is not None, "candidates always have a target"
    target_f = target_fact(target)
    reference_f = detection_fact(detection)
    scans = (
        list(observations)
        if observations is not None
        else related_observations(session, target.id, reference_observation)
    )
    bare = {o.id: observation_fact(o) for o in scans}
    windows = search_windows_hz(
        protocol,
        reference_f,
        bare[reference_observation.id],
        target_f,
        list(bare.values()),
        context,
    )
    # Only scans whose band overlaps the window can hold the signal.
    usable = {
        oid: window
        for oid, window in windows.items()
        if window[1] >= bare[oid].frequency_min_hz and window[0] <= bare[oid].frequency_max_hz
    }
    found = detections_in_windows(session, usable)
    by_id = {o.id: o for o in scans}
    facts = {oid: observation_fact(by_id[oid], found.get(oid, ())) for oid in bare}
    return CandidateFacts(
        candidate_id=candidate.id,
        target=target_f,
        reference=reference_f,
        reference_observation=facts[reference_observation.id],
        observations=tuple(f for oid, f in facts.items() if oid != reference_observation.id),
        reports=report_facts(session, candidate.id),
        signoffs=signoff_facts(session, candidate.id),
        now_unix_s=now_unix_s,
        stage=candidate.stage,
        state=candidate.state,
        stage_entered_unix_s=candidate.stage_entered_at.timestamp(),
        manual_hold_released=candidate.hold_released,
    )
