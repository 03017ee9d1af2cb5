"""Database rows to the protocol core's frozen facts, fetching only what bears on a candidate.

A candidate's related scans are: every scan of its target, every scan of the reference scan's
cadence, and every scan at any pointing that overlaps one of the target's scans in time (other
beams). Of each, only the detections inside the search window the protocol computes for that
scan are read, through the (observation_id, frequency_hz) index.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import replace
from datetime import UTC, datetime, timedelta
from typing import Any

from sqlalchemy import or_, select
from sqlalchemy.orm import Session

from confirm_service.db import parameter_marker
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
MAX_SCAN = timedelta(hours=6)
"""Longest scan considered when looking for scans that overlap another in time."""


def site_fact(site: Site) -> SiteFact:
    return SiteFact(
        site.code, site.latitude_deg, site.longitude_deg, site.elevation_m, site.min_elevation_deg
    )


def target_fact(target: Target) -> TargetFact:
    return TargetFact(
        target.name,
        target.ra_deg,
        target.dec_deg,
        target.pm_ra_mas_yr,
        target.pm_dec_mas_yr,
        target.parallax_mas,
        target.distance_pc,
        target.epoch,
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
    observation: Observation, detections: Iterable[DetectionFact] = ()
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
        complete=observation.completed_at is not None,
        detections=tuple(detections),
        sefd_jy=observation.sefd_jy,
        threshold_snr=observation.threshold_snr,
    )


_SCAN_COLUMNS = (
    Observation.id,
    Site.code,
    Site.latitude_deg,
    Site.longitude_deg,
    Site.elevation_m,
    Target.name,
    Observation.pointing_ra_deg,
    Observation.pointing_dec_deg,
    Observation.start,
    Observation.duration_s,
    Observation.frequency_min_hz,
    Observation.frequency_max_hz,
    Observation.channel_width_hz,
    Observation.time_resolution_s,
    Observation.on_source,
    Observation.beam,
    Observation.cadence,
    Observation.completed_at,
    Site.min_elevation_deg,
    Observation.sefd_jy,
    Observation.threshold_snr,
)


_SCAN_QUERY = (
    select(*_SCAN_COLUMNS)
    .join(Site, Site.id == Observation.site_id)
    .outerjoin(Target, Target.id == Observation.target_id)
)
"""Every scan column the facts need, with its site and target (statements are immutable)."""


def _scan_fact(row: Any) -> ObservationFact:
    return ObservationFact(
        id=row[0],
        site=SiteFact(row[1], row[2], row[3], row[4], row[18]),
        target_name=row[5],
        pointing_ra_deg=row[6],
        pointing_dec_deg=row[7],
        start_unix_s=row[8].timestamp(),
        duration_s=row[9],
        frequency_min_hz=row[10],
        frequency_max_hz=row[11],
        channel_width_hz=row[12],
        time_resolution_s=row[13],
        on_source=row[14],
        beam=row[15],
        cadence=row[16],
        complete=row[17] is not None,
        sefd_jy=row[19],
        threshold_snr=row[20],
    )


def related_scans(
    session: Session, target_id: int | None, reference: Observation
) -> list[ObservationFact]:
    """Every scan that can bear on a candidate of ``target_id`` found in ``reference``.

    Column queries straight into facts (no ORM objects): this runs on every evaluation.
    """
    conditions = [Observation.id == reference.id]
    if target_id is not None:
        conditions.append(Observation.target_id == target_id)
    if reference.cadence:
        conditions.append(Observation.cadence == reference.cadence)
    direct = [_scan_fact(row) for row in session.execute(_SCAN_QUERY.where(or_(*conditions)))]
    spans = [(o.start_unix_s, o.end_unix_s) for o in direct if o.on_source]
    if not spans:
        return direct
    # Other pointings/beams during the target's on-source scans (multi-beam check).
    earliest = datetime.fromtimestamp(min(s for s, _ in spans), UTC) - OVERLAP_MARGIN
    latest = datetime.fromtimestamp(max(e for _, e in spans), UTC) + OVERLAP_MARGIN
    known = {o.id for o in direct}
    overlapping = []
    window = _SCAN_QUERY.where(Observation.start >= earliest - MAX_SCAN, Observation.start < latest)
    if target_id is not None:
        window = window.where(
            or_(Observation.target_id.is_(None), Observation.target_id != target_id)
        )
    for row in session.execute(window):
        scan = _scan_fact(row)
        if scan.id in known:
            continue
        if any(scan.start_unix_s < e and scan.end_unix_s > s for s, e in spans):
            overlapping.append(scan)
            known.add(scan.id)
    return direct + overlapping


_WINDOW_QUERY = (
    "WITH w(observation_id, low_hz, high_hz) AS (VALUES {rows}) "
    "SELECT d.id, d.observation_id, d.frequency_hz, d.drift_hz_s, d.snr, d.time_offset_s, "
    "d.bandwidth_hz, d.beam FROM w CROSS JOIN detections d "
    "WHERE d.observation_id = w.observation_id AND d.frequency_hz BETWEEN w.low_hz AND w.high_hz "
    "ORDER BY d.id"
)
"""One statement for many windows: each (scan, band) row of ``w`` is one range scan of the
(observation_id, frequency_hz) index. ``CROSS JOIN`` keeps SQLite's loop over ``w`` outermost;
PostgreSQL plans the join itself."""


WINDOWS_PER_STATEMENT = 1_000
"""Windows per statement: three parameters each, well inside SQLite's 32,766."""


def window_statement(count: int, dialect: Any) -> str:
    """The window query for ``count`` windows, with ``dialect``'s parameter markers."""
    m = parameter_marker(dialect)
    row = f"({m}, {m}, {m})"
    if dialect.name == "postgresql":  # the first row types the VALUES columns
        first = (
            f"(CAST({m} AS integer), CAST({m} AS double precision), CAST({m} AS double precision))"
        )
    else:
        first = row
    return _WINDOW_QUERY.format(rows=", ".join([first] + [row] * (count - 1)))


def detections_in_windows(
    session: Session, windows: dict[int, tuple[float, float]]
) -> dict[int, list[DetectionFact]]:
    """The detections of each scan inside its frequency window (Hz), by the frequency index.

    One statement per thousand windows, read straight off the DB-API cursor into facts, in id
    order: only the rows inside their own scan's window leave the database.
    """
    found: dict[int, list[DetectionFact]] = {observation_id: [] for observation_id in windows}
    if not windows:
        return found
    connection = session.connection()
    items = list(windows.items())
    for first in range(0, len(items), WINDOWS_PER_STATEMENT):
        chunk = items[first : first + WINDOWS_PER_STATEMENT]
        statement = window_statement(len(chunk), connection.dialect)
        parameters = tuple(
            value
            for observation_id, (low, high) in chunk
            for value in (observation_id, float(low), float(high))
        )
        cursor = connection.exec_driver_sql(statement, parameters)
        for row in cursor.cursor.fetchall():
            found[row[1]].append(DetectionFact(*row))
    return found


def report_facts(session: Session, candidate_id: int) -> tuple[ReportFact, ...]:
    """Reports that are evidence of their own: looks that happened and whose scan is not in
    the log (a report carrying its scan is counted once, through that scan)."""
    rows = session.execute(
        select(FollowUpReport, Site)
        .join(Site, Site.id == FollowUpReport.site_id)
        .where(
            FollowUpReport.candidate_id == candidate_id,
            FollowUpReport.observed.is_(True),
            FollowUpReport.observation_id.is_(None),
        )
        .order_by(FollowUpReport.id)
    ).all()
    return tuple(report_fact(report, site) for report, site in rows)


def report_fact(report: FollowUpReport, site: Site) -> ReportFact:
    """A stored report as the protocol sees it."""
    return ReportFact(
        id=report.id,
        site=site_fact(site),
        unix_s=report.observed_at.timestamp(),
        detected=report.detected,
        frequency_hz=report.frequency_hz,
        drift_hz_s=report.drift_hz_s,
        frequency_min_hz=report.frequency_min_hz,
        frequency_max_hz=report.frequency_max_hz,
        duration_s=report.duration_s,
        threshold_snr=report.threshold_snr,
        sefd_jy=report.sefd_jy,
        pointing_ra_deg=report.pointing_ra_deg,
        pointing_dec_deg=report.pointing_dec_deg,
        time_offset_s=report.time_offset_s or 0.0,
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
) -> CandidateFacts:
    """Everything the protocol looks at for ``candidate`` as of ``now_unix_s``."""
    detection, reference_observation, target = reference_parts(
        session, candidate.reference_detection_id
    )
    assert target is not None, "candidates always have a target"
    target_f = target_fact(target)
    reference_f = detection_fact(detection)
    bare = {o.id: o for o in related_scans(session, target.id, reference_observation)}
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
    facts = {oid: replace(scan, detections=tuple(found.get(oid, ()))) for oid, scan in bare.items()}
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
        overruled_checks=tuple(candidate.overruled_checks or ()),
    )
