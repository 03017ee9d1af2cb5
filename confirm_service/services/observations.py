"""Observations (scans) and the bulk ingest of their detections: the pipeline's hot path."""

from __future__ import annotations

import hashlib
import json
from collections.abc import Sequence
from datetime import datetime, timedelta
from typing import Any

from sqlalchemy import func, select, text
from sqlalchemy.orm import Session

from confirm_service import metrics
from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.db import parameter_marker
from confirm_service.errors import Invalid, NotFound, TooLarge
from confirm_service.models import Detection, Observation, Site, Target
from confirm_service.protocol.screening import Reason
from confirm_service.schemas.log import DETECTION_DEFAULTS, DetectionIn, ObservationIn
from confirm_service.services import intake, scans
from confirm_service.services.sites import site_by_code, target_by_name
from confirm_service.timeutil import utc_now

DETECTION_COLUMNS = (
    "id",
    "observation_id",
    "frequency_hz",
    "drift_hz_s",
    "snr",
    "time_offset_s",
    "bandwidth_hz",
    "beam",
    "flagged_candidate",
    "screen_reason",
)
FLAGGED = Reason.FLAGGED.value


def observation_end(observation: Observation) -> datetime:
    return observation.start + timedelta(seconds=observation.duration_s)


def refuse_future_start(start: datetime, now: datetime, skew_s: float) -> None:
    if start > now + timedelta(seconds=skew_s):
        raise Invalid(
            "observation starts in the future",
            [("start", f"is later than now plus the {skew_s:g} s clock-skew allowance")],
        )


def detection_errors(
    rows: Sequence[DetectionIn], observation: Observation, prefix: str = "detections"
) -> list[tuple[str, str]]:
    """Rows that fall outside the scan's band or time span, each named by index and field."""
    low, high = observation.frequency_min_hz, observation.frequency_max_hz
    duration = observation.duration_s
    errors: list[tuple[str, str]] = []
    for index, row in enumerate(rows):
        frequency = row["frequency_hz"]
        if not low <= frequency <= high:
            errors.append(
                (
                    f"{prefix}[{index}].frequency_hz",
                    f"{frequency!r} Hz is outside the scan's band {low!r}–{high!r} Hz",
                )
            )
        offset = row.get("time_offset_s", 0.0)
        if offset > duration:
            errors.append(
                (
                    f"{prefix}[{index}].time_offset_s",
                    f"{offset!r} s is beyond the scan's duration {duration!r} s",
                )
            )
    return errors


def _allocate_detection_ids(session: Session, count: int) -> list[int]:
    """Ids for ``count`` new detections, reserved inside the current write transaction."""
    if count == 0:
        return []
    if session.get_bind().dialect.name == "postgresql":
        statement = text(
            "SELECT nextval(pg_get_serial_sequence('detections', 'id')) FROM generate_series(1, :n)"
        )
        return [int(v) for v in session.execute(statement, {"n": count}).scalars()]
    highest = session.execute(select(func.coalesce(func.max(Detection.id), 0))).scalar_one()
    return list(range(highest + 1, highest + 1 + count))


def _insert_detection_rows(session: Session, rows: list[tuple[Any, ...]]) -> None:
    """Write ``rows`` (in :data:`DETECTION_COLUMNS` order) in one statement of the driver.

    PostgreSQL gets ``COPY ... FROM STDIN`` in psycopg's binary format (float64 values travel
    as their eight bytes, so nothing is rounded); other databases get a positional
    ``executemany`` through the DB-API, the fastest insert SQLAlchemy offers.
    """
    connection = session.connection()
    columns = ", ".join(DETECTION_COLUMNS)
    if connection.dialect.name == "postgresql":
        _copy_detection_rows(connection.connection.driver_connection, columns, rows)
        return
    placeholders = ", ".join([parameter_marker(connection.dialect)] * len(DETECTION_COLUMNS))
    statement = f"INSERT INTO detections ({columns}) VALUES ({placeholders})"
    connection.exec_driver_sql(statement, rows)


def _copy_detection_rows(driver: Any, columns: str, rows: list[tuple[Any, ...]]) -> None:
    """``COPY detections FROM STDIN (FORMAT BINARY)`` through psycopg, inside the open
    transaction; the column types are declared so that psycopg's C extension packs each row
    without looking at its values' Python types."""
    statement = f"COPY detections ({columns}) FROM STDIN (FORMAT BINARY)"
    with driver.cursor() as cursor, cursor.copy(statement) as copy:
        copy.set_types(_COPY_TYPES)
        for row in rows:
            copy.write_row(row)


_COPY_TYPES = (  # the detections table's column types, in DETECTION_COLUMNS order
    "int4",
    "int4",
    "float8",
    "float8",
    "float8",
    "float8",
    "float8",
    "varchar",
    "bool",
    "varchar",
)


def _frequency_of(row: tuple[Any, ...]) -> float:
    return row[2]


def insert_detections(
    session: Session, observation: Observation, rows: Sequence[DetectionIn]
) -> list[int]:
    """Insert already validated rows for ``observation``; return their ids in order."""
    ids = _allocate_detection_ids(session, len(rows))
    defaults = DETECTION_DEFAULTS
    observation_id = observation.id
    tuples = [
        (
            new_id,
            observation_id,
            row["frequency_hz"],
            row["drift_hz_s"],
            row["snr"],
            row.get("time_offset_s", defaults["time_offset_s"]),
            row.get("bandwidth_hz"),
            row.get("beam"),
            bool(row.get("candidate", False)),
            FLAGGED if row.get("candidate", False) else None,
        )
        for new_id, row in zip(ids, rows, strict=True)
    ]
    if tuples:
        tuples.sort(key=_frequency_of)  # index-friendly order; ids keep the request's order
        _insert_detection_rows(session, tuples)
        observation.detection_count = (observation.detection_count or 0) + len(tuples)
        observation.last_ingest_at = utc_now()
    return ids


def rows_digest(rows: Sequence[DetectionIn]) -> str:
    """SHA-256 of the rows as compact JSON with sorted keys: the batch's content digest."""
    text = json.dumps(list(rows), sort_keys=True, separators=(",", ":"), allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def flagged_ids(rows: Sequence[DetectionIn], ids: list[int]) -> list[int]:
    """Ids of the rows the pipeline flagged as candidates itself."""
    return [new_id for new_id, row in zip(ids, rows, strict=True) if row.get("candidate", False)]


def ingest_detections(
    session: Session,
    actor: Actor,
    observation_id: int,
    rows: Sequence[DetectionIn],
    max_batch: int,
    content_sha256: str | None = None,
    complete: bool = False,
) -> tuple[list[int], list[int]]:
    """All-or-nothing bulk ingest. Returns (detection ids, ids of candidates it created).

    Hits are only written here; they are screened when the scan is complete (``complete`` on
    the last batch, the completion route or the scheduler's quiet-period close). Hits the
    pipeline flagged become candidates at once. A complete scan refuses the batch (409).
    ``content_sha256`` is the digest of the batch as received (the request body); when absent,
    :func:`rows_digest` of the rows is recorded instead.
    """
    if len(rows) > max_batch:
        raise TooLarge(
            f"{len(rows)} detections in one batch; the limit is {max_batch}",
            [("detections", f"at most {max_batch} per request")],
        )
    observation = session.get(Observation, observation_id)
    if observation is None:
        raise NotFound(f"no observation {observation_id}", [("id", "no such observation")])
    scans.refuse_if_complete(observation)
    errors = detection_errors(rows, observation)
    if errors:
        raise Invalid(f"{len(errors)} detection field(s) refused; nothing was written", errors)
    ids = insert_detections(session, observation, rows)
    metrics.count_on_commit(session, metrics.HIT_BATCHES)
    metrics.count_on_commit(session, metrics.HITS_WRITTEN, len(ids))
    record(
        session,
        actor,
        "detections.ingested",
        f"observation:{observation.id}",
        {
            "count": len(ids),
            "first_id": ids[0] if ids else None,
            "last_id": ids[-1] if ids else None,
            "content_sha256": content_sha256 or rows_digest(rows),
            "complete": complete,
        },
    )
    candidate_ids = intake.promote_flagged(session, actor, observation, flagged_ids(rows, ids))
    if complete:
        candidate_ids += scans.complete_scan(session, actor, observation, scans.BATCH_FLAG)
    return ids, candidate_ids


def _sky_position(data: ObservationIn, target: Target | None) -> tuple[float, float]:
    """The scan's pointing (deg), or its target's position where a coordinate is not given."""
    if data.pointing_ra_deg is not None and data.pointing_dec_deg is not None:
        return data.pointing_ra_deg, data.pointing_dec_deg
    assert target is not None  # create_observation refuses a scan with neither
    ra = data.pointing_ra_deg if data.pointing_ra_deg is not None else target.ra_deg
    dec = data.pointing_dec_deg if data.pointing_dec_deg is not None else target.dec_deg
    return ra, dec


def create_observation(
    session: Session, actor: Actor, data: ObservationIn, clock_skew_s: float, max_batch: int
) -> tuple[Observation, list[int], list[int]]:
    """Create a scan and, optionally, its inline detections, in one transaction."""
    refuse_future_start(data.start, utc_now(), clock_skew_s)
    if data.target is None and (data.pointing_ra_deg is None or data.pointing_dec_deg is None):
        raise Invalid(
            "no sky position", [("target", "give a target or pointing_ra_deg and pointing_dec_deg")]
        )
    site: Site = site_by_code(session, data.site)
    target: Target | None = target_by_name(session, data.target) if data.target else None
    ra, dec = _sky_position(data, target)
    if len(data.detections) > max_batch:
        raise TooLarge(
            f"{len(data.detections)} inline detections; the limit is {max_batch}",
            [("detections", f"at most {max_batch} per request")],
        )
    observation = Observation(
        site_id=site.id,
        target_id=target.id if target else None,
        pointing_ra_deg=ra,  # finite: validated, or from a registered target
        pointing_dec_deg=dec,
        start=data.start,
        duration_s=data.duration_s,
        frequency_min_hz=data.frequency_min_hz,
        frequency_max_hz=data.frequency_max_hz,
        channel_width_hz=data.channel_width_hz,
        time_resolution_s=data.time_resolution_s,
        on_source=data.on_source,
        beam=data.beam,
        cadence=data.cadence,
        pipeline_run=data.pipeline_run,
        sefd_jy=data.sefd_jy,
        threshold_snr=data.threshold_snr,
        detection_count=0,
    )
    observation.site = site
    observation.target = target
    errors = detection_errors(data.detections, observation)
    if errors:
        raise Invalid(f"{len(errors)} detection field(s) refused; nothing was written", errors)
    session.add(observation)
    session.flush()
    payload = data.model_dump(mode="json", exclude={"detections"})
    payload["id"] = observation.id
    payload["detections_sha256"] = rows_digest(data.detections)
    payload["detection_count"] = len(data.detections)
    record(session, actor, "observation.created", f"observation:{observation.id}", payload)
    ids = insert_detections(session, observation, data.detections)
    candidate_ids = intake.promote_flagged(
        session, actor, observation, flagged_ids(data.detections, ids)
    )
    if data.is_complete():
        candidate_ids += scans.complete_scan(session, actor, observation, scans.INLINE)
    return observation, ids, candidate_ids


def complete_observation(session: Session, actor: Actor, observation_id: int) -> list[int]:
    """The pipeline says every hit of the scan is in: close it and screen its cadence."""
    observation = session.get(Observation, observation_id, with_for_update={"of": Observation})
    if observation is None:
        raise NotFound(f"no observation {observation_id}", [("id", "no such observation")])
    return scans.complete_scan(session, actor, observation, scans.ENDPOINT)


def screening_counts(session: Session, observation_id: int) -> dict[str, Any]:
    """A scan's hits per screening reason (``pending``: not judged yet) and the runs."""
    from confirm_service.models import ScreeningRun

    observation = get_observation(session, observation_id)
    pending, reasons = reason_counts(session, [observation_id])[observation_id]
    runs = session.execute(
        select(ScreeningRun.id)
        .join(Detection, Detection.screening_run_id == ScreeningRun.id)
        .where(Detection.observation_id == observation_id)
        .distinct()
        .order_by(ScreeningRun.id)
    ).scalars()
    return {
        "observation_id": observation_id,
        "complete": observation.completed_at is not None,
        "detection_count": observation.detection_count,
        "pending": pending,
        "reasons": reasons,
        "runs": list(runs),
    }


def get_observation(session: Session, observation_id: int) -> Observation:
    observation = session.get(Observation, observation_id)
    if observation is None:
        raise NotFound(f"no observation {observation_id}", [("id", "no such observation")])
    return observation


def list_observations(
    session: Session,
    after_id: int,
    limit: int,
    site: str | None = None,
    target: str | None = None,
    start_from: datetime | None = None,
    start_to: datetime | None = None,
    cadence: str | None = None,
) -> list[Observation]:
    query = select(Observation).where(Observation.id > after_id)
    if site is not None:
        query = query.join(Site, Site.id == Observation.site_id).where(Site.code == site)
    if target is not None:
        query = query.join(Target, Target.id == Observation.target_id).where(Target.name == target)
    if start_from is not None:
        query = query.where(Observation.start >= start_from)
    if start_to is not None:
        query = query.where(Observation.start < start_to)
    if cadence is not None:
        query = query.where(Observation.cadence == cadence)
    query = query.order_by(Observation.id).limit(limit)
    return list(session.execute(query).unique().scalars())


def list_detections(
    session: Session, observation_id: int, after_id: int, limit: int
) -> list[Detection]:
    get_observation(session, observation_id)
    query = (
        select(Detection)
        .where(Detection.observation_id == observation_id, Detection.id > after_id)
        .order_by(Detection.id)
        .limit(limit)
    )
    return list(session.execute(query).scalars())


def recent_screening_counts(session: Session, limit: int = 100) -> list[dict[str, Any]]:
    """The latest scans with their hits per screening reason (two queries, newest first)."""
    scans = session.execute(
        select(Observation).order_by(Observation.start.desc(), Observation.id.desc()).limit(limit)
    ).scalars()
    rows: dict[int, dict[str, Any]] = {
        o.id: {
            "observation_id": o.id,
            "site": o.site.code,
            "target": o.target.name if o.target else None,
            "start": o.start,
            "on_source": o.on_source,
            "complete": o.completed_at is not None,
            "hits_in": o.detection_count,
            "pending": 0,
            "reasons": {},
        }
        for o in scans
    }
    for observation_id, (pending, reasons) in reason_counts(session, list(rows)).items():
        rows[observation_id]["pending"] = pending
        rows[observation_id]["reasons"] = reasons
    return list(rows.values())


def reason_counts(
    session: Session, observation_ids: Sequence[int]
) -> dict[int, tuple[int, dict[str, int]]]:
    """Per scan: hits not judged yet, and hits per screening reason (sorted), in one query."""
    counts: dict[int, tuple[int, dict[str, int]]] = {i: (0, {}) for i in observation_ids}
    if not observation_ids:
        return counts
    rows = session.execute(
        select(Detection.observation_id, Detection.screen_reason, func.count())
        .where(Detection.observation_id.in_(observation_ids))
        .group_by(Detection.observation_id, Detection.screen_reason)
        .order_by(Detection.observation_id, Detection.screen_reason)
    ).all()
    for observation_id, reason, count in rows:
        pending, reasons = counts[observation_id]
        if reason is None:
            counts[observation_id] = (int(count), reasons)
        else:
            reasons[reason] = int(count)
    return counts
