"""Screening a cadence when its scans are complete: arrays out of the database, reasons back.

The rules themselves are pure (``protocol.screening``); this module loads the cadence's hits as
numpy arrays (one query), asks the physics engine for each scan's Doppler factor and Earth-drift
rate toward the target, writes one reason per judged hit in bulk (one UPDATE per reason), records
the run (``screening_runs``) with one audit entry, and turns the surviving signals into
candidates. No ORM object is made per hit.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from datetime import timedelta
from typing import Any

import numpy as np
from sqlalchemy import func, or_, select
from sqlalchemy.orm import Session

from confirm_service import metrics
from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import NotFound
from confirm_service.models import Detection, Observation, ScreeningRun
from confirm_service.protocol import LoadedProtocol, default_physics_context
from confirm_service.protocol.screening import (
    BandEdges,
    Decisions,
    IntArray,
    OccupancyHits,
    Reason,
    ScanHits,
    ScreeningRules,
    decided_digest,
    screen_cadence,
)
from confirm_service.services import facts as factbook
from confirm_service.services.hit_arrays import ScanKey, after_run, hit_tables
from confirm_service.services.protocols import configured_protocol, ensure_recorded

SPEED_OF_LIGHT_M_S = 299_792_458.0
"""Exact, by the SI definition of the metre."""


@dataclass(frozen=True)
class ScanRow:
    """The columns of a scan that screening reads."""

    id: int
    target_id: int | None
    start_unix_s: float
    duration_s: float
    channel_width_hz: float
    frequency_min_hz: float
    frequency_max_hz: float
    on_source: bool
    complete: bool
    detection_count: int = 0
    screened_run_id: int | None = None

    @property
    def key(self) -> ScanKey:
        """What identifies the state of the scan's hits (for the array cache)."""
        return ScanKey(self.id, self.detection_count, self.screened_run_id, self.complete)


def cadence_scans(session: Session, observation: Observation) -> list[Observation]:
    """The scans screened together with ``observation``: its cadence at its site, or itself."""
    if observation.cadence is None:
        return [observation]
    query = (
        select(Observation)
        .where(
            Observation.site_id == observation.site_id, Observation.cadence == observation.cadence
        )
        .order_by(Observation.start, Observation.id)
    )
    return list(session.execute(query).scalars())


def _scan_row(observation: Observation) -> ScanRow:
    return ScanRow(
        observation.id,
        observation.target_id,
        observation.start.timestamp(),
        observation.duration_s,
        observation.channel_width_hz,
        observation.frequency_min_hz,
        observation.frequency_max_hz,
        observation.on_source,
        observation.completed_at is not None,
        observation.detection_count,
        observation.screened_run_id,
    )


def _doppler(
    observation: Observation, scans: Sequence[ScanRow], target: Any
) -> tuple[np.ndarray, np.ndarray]:
    """Per scan: Doppler factor 1 + v/c and (dv/dt)/(c + v) (1/s) toward ``target``."""
    if target is None:
        return np.ones(len(scans)), np.zeros(len(scans))
    context = default_physics_context()
    request = context.track_request(
        factbook.site_fact(observation.site), factbook.target_fact(target)
    )
    times = np.array([s.start_unix_s for s in scans], dtype=np.float64)
    velocity, acceleration = context.cache.kinematics(
        [request], np.zeros(len(scans), dtype=np.int64), times
    )
    return 1.0 + velocity / SPEED_OF_LIGHT_M_S, acceleration / (SPEED_OF_LIGHT_M_S + velocity)


def scan_hits(
    session: Session,
    observation: Observation,
    scans: Sequence[ScanRow],
    target: Any,
    on_source_target_id: int | None,
    all_pending: bool = False,
) -> list[ScanHits]:
    """The scans' hits as frequency-sorted arrays (frequency referred to each scan's start).

    A hit is pending when it has no screening reason yet (``all_pending``: every hit, for a
    replay that then removes what was decided before the run it replays).
    """
    tables = hit_tables(session, [s.key for s in scans], cached=not all_pending)
    doppler, earth_per_hz = _doppler(observation, scans, target)
    result = []
    for k, scan in enumerate(scans):
        table = tables[scan.id]
        result.append(
            ScanHits(
                observation_id=scan.id,
                start_unix_s=scan.start_unix_s,
                duration_s=scan.duration_s,
                channel_width_hz=scan.channel_width_hz,
                frequency_min_hz=scan.frequency_min_hz,
                frequency_max_hz=scan.frequency_max_hz,
                on_source=scan.on_source and scan.target_id == on_source_target_id,
                complete=scan.complete,
                doppler_factor=float(doppler[k]),
                earth_drift_per_hz=float(earth_per_hz[k]),
                hit_id=table.hit_id,
                frequency_hz=table.frequency_hz,
                drift_hz_s=table.drift_hz_s,
                snr=table.snr,
                pending=np.ones(table.hit_id.size, dtype=bool) if all_pending else table.pending,
            )
        )
    return result


def occupancy_scan_ids(
    session: Session,
    observation: Observation,
    scans: Sequence[ScanRow],
    target_id: int | None,
    span_s: float,
) -> list[int]:
    """Scans of other targets (or none) at the same site within ``span_s`` of the cadence."""
    if span_s <= 0 or not scans:
        return []
    first = min(s.start_unix_s for s in scans) - span_s
    last = max(s.start_unix_s + s.duration_s for s in scans) + span_s
    origin = observation.start.timestamp()
    query = select(Observation.id).where(
        Observation.site_id == observation.site_id,
        Observation.start >= observation.start + timedelta(seconds=first - origin),
        Observation.start <= observation.start + timedelta(seconds=last - origin),
        Observation.id.not_in([s.id for s in scans]),
    )
    if target_id is not None:
        query = query.where(
            or_(Observation.target_id.is_(None), Observation.target_id != target_id)
        )
    return list(session.execute(query.order_by(Observation.id)).scalars())


def occupancy_hits(
    session: Session, observation_ids: Sequence[int], max_detection_id: int | None
) -> OccupancyHits:
    """The hits of ``observation_ids`` (up to ``max_detection_id``), sorted by start frequency."""
    if not observation_ids:
        return OccupancyHits.empty()
    scans = session.execute(
        select(
            Observation.id,
            Observation.channel_width_hz,
            Observation.duration_s,
            Observation.detection_count,
            Observation.screened_run_id,
            Observation.completed_at,
        ).where(Observation.id.in_(observation_ids))
    ).all()
    keys = [ScanKey(row[0], row[3], row[4], row[5] is not None) for row in scans]
    tables = hit_tables(session, keys)
    parts = [(tables[row[0]], np.full(tables[row[0]].hit_id.size, row[1]), row[2]) for row in scans]
    if not parts:
        return OccupancyHits.empty()
    frequency = np.concatenate([t.frequency_hz for t, _, _ in parts])
    drift = np.concatenate([t.drift_hz_s for t, _, _ in parts])
    width = np.concatenate([w for _, w, _ in parts])
    resolution = np.concatenate([w / duration for _, w, duration in parts])
    if max_detection_id is not None:
        keep = np.concatenate([t.hit_id for t, _, _ in parts]) <= max_detection_id
        frequency, drift, width, resolution = (
            a[keep] for a in (frequency, drift, width, resolution)
        )
    order = np.argsort(frequency, kind="stable")
    return OccupancyHits(frequency[order], drift[order], resolution[order], width[order])


@dataclass
class RunSummary:
    """What one screening run decided: counts per reason, the digest, candidates made."""

    run_id: int
    counts: dict[str, int]
    decided_sha256: str
    candidate_ids: list[int]


def _linked_pending(session: Session, scans: Sequence[ScanHits]) -> IntArray:
    """Pending hits of the scans that an existing candidate's evaluation already linked."""
    from confirm_service.models import CandidateDetection

    linked = session.execute(
        select(CandidateDetection.detection_id).where(
            CandidateDetection.observation_id.in_([scan.observation_id for scan in scans])
        )
    ).scalars()
    candidates = np.fromiter(linked, dtype=np.int64)
    pending = np.concatenate([scan.hit_id[scan.pending] for scan in scans] or [candidates[:0]])
    return np.intersect1d(pending, candidates)


def _without(scans: Sequence[ScanHits], hit_ids: IntArray) -> list[ScanHits]:
    """The scans with ``hit_ids`` no longer pending."""
    if hit_ids.size == 0:
        return list(scans)
    return [replace(scan, pending=scan.pending & ~np.isin(scan.hit_id, hit_ids)) for scan in scans]


@dataclass
class Judgement:
    """Reasons decided for pending hits of a cadence and the surviving signals."""

    decided: Decisions
    signals: list[list[tuple[int, int, float]]]
    occupancy_ids: list[int]


def judge_cadence(
    session: Session,
    observation: Observation,
    rows: Sequence[ScanRow],
    protocol: LoadedProtocol,
    max_detection_id: int | None,
    not_pending: IntArray | None = None,
    occupancy_ids: Sequence[int] | None = None,
) -> Judgement:
    """Judge every pending hit of the complete scans in ``rows`` (one cadence at one site).

    Each target of the cadence is screened with its own on-source scans as "on" and every scan
    that is not on-source as "off"; hits of on-source scans without a target cannot be followed.
    ``not_pending`` and ``occupancy_ids`` let a replay see exactly what the run saw.
    """
    from confirm_service.models import Target

    rules = ScreeningRules.from_protocol(protocol.model)
    bands = BandEdges.of(protocol.bands)
    decided = Decisions.empty()
    signals: list[list[tuple[int, int, float]]] = []
    used_occupancy: list[int] = []
    targets = sorted({r.target_id for r in rows if r.on_source and r.target_id is not None})
    screened: Sequence[int | None] = targets or [None]  # a targetless cadence still screens
    for target_id in screened:
        target = session.get(Target, target_id) if target_id is not None else None
        scans = scan_hits(session, observation, rows, target, target_id, not_pending is not None)
        scans = [
            _judged_in_pass(scan, row, target_id) for scan, row in zip(scans, rows, strict=True)
        ]
        given = decided.ids if not_pending is None else np.concatenate([decided.ids, not_pending])
        scans = _without(scans, given)
        if not_pending is None:
            linked = _linked_pending(session, scans)
            decided = decided + Decisions.of(linked, Reason.LINKED)
            scans = _without(scans, linked)
        if occupancy_ids is None:
            ids = occupancy_scan_ids(session, observation, rows, target_id, rules.occupancy_span_s)
        else:
            ids = list(occupancy_ids)
        used_occupancy += [i for i in ids if i not in used_occupancy]
        occupancy = occupancy_hits(session, ids, max_detection_id)
        outcome = screen_cadence(scans, rules, bands, occupancy, observation.cadence is not None)
        decided = decided + outcome.decided(scans)
        signals += [
            [
                (int(scans[k].hit_id[p]), scans[k].observation_id, float(scans[k].snr[p]))
                for k, p in group
            ]
            for group in outcome.signals
        ]
    return Judgement(decided, signals, used_occupancy)


def _judged_in_pass(scan: ScanHits, row: ScanRow, target_id: int | None) -> ScanHits:
    """Another target's on-source scan is evidence in this pass, not judged in it."""
    if row.on_source and row.target_id != target_id:
        return replace(scan, pending=np.zeros(scan.size, dtype=bool))
    return scan


UPDATE_CHUNK = 10_000
"""Ids per SQLite UPDATE (its default limit is 32,766 bound parameters)."""


def write_reasons(session: Session, run_id: int, decided: Decisions) -> None:
    """One UPDATE per reason (ids in chunks) on the raw cursor: no ORM object, no per-hit call."""
    connection = session.connection()
    postgres = connection.dialect.name == "postgresql"
    cursor = connection.connection.driver_connection.cursor()  # type: ignore[union-attr]
    try:
        for reason, ids in decided.by_reason().items():
            if postgres:
                cursor.execute(
                    "UPDATE detections SET screen_reason = %s, screening_run_id = %s "
                    "WHERE id = ANY(%s)",
                    (reason.value, run_id, ids.tolist()),
                )
                continue
            for first in range(0, ids.size, UPDATE_CHUNK):
                chunk = ids[first : first + UPDATE_CHUNK].tolist()
                cursor.execute(
                    "UPDATE detections SET screen_reason = ?, screening_run_id = ? "
                    f"WHERE id IN ({', '.join('?' * len(chunk))})",
                    (reason.value, run_id, *chunk),
                )
    finally:
        cursor.close()


def _pending_count(session: Session, keys: Sequence[ScanKey]) -> int:
    """Hits of these complete scans still waiting for a decision (from the kept arrays)."""
    tables = hit_tables(session, keys)
    return int(sum(np.count_nonzero(table.pending) for table in tables.values()))


def screen_after_completion(session: Session, actor: Actor, observation: Observation) -> RunSummary:
    """Screen the cadence of a scan that just became complete; candidates from survivors.

    One run: every pending hit of the cadence's complete scans is judged, the reasons written in
    bulk, the run recorded and audited; surviving signals become candidates (or join the
    candidate already on their track).
    """
    from confirm_service.services import intake

    protocol = configured_protocol(session)
    ensure_recorded(session, actor, protocol)
    members = cadence_scans(session, observation)
    complete_members = [o for o in members if o.completed_at is not None]
    complete = [_scan_row(o) for o in complete_members]
    max_detection_id = session.execute(select(func.max(Detection.id))).scalar_one()
    judgement = judge_cadence(session, observation, complete, protocol, max_detection_id)
    decided = judgement.decided + _untargeted(session, complete, judgement.decided.ids)
    run = ScreeningRun(
        site_id=observation.site_id,
        cadence=observation.cadence,
        trigger_observation_id=observation.id,
        observation_ids=[r.id for r in complete],
        occupancy_observation_ids=judgement.occupancy_ids,
        occupancy_max_detection_id=max_detection_id,
        protocol_sha256=protocol.content_sha256,
        bands_sha256=protocol.bands_sha256,
        counts=decided.counts(),
        decided_sha256=decided.digest(),
        candidate_ids=[],
    )
    session.add(run)
    session.flush()
    write_reasons(session, run.id, decided)
    for member in complete_members:
        member.screened_run_id = run.id
    after_run(session, [r.key for r in complete], decided.ids, run.id)
    candidate_ids = intake.candidates_from_signals(session, actor, judgement.signals)
    run.candidate_ids = candidate_ids
    run.pending = _pending_count(
        session, [replace(r.key, screened_run_id=run.id) for r in complete]
    )
    record(
        session,
        actor,
        "screening.run",
        f"observation:{observation.id}",
        {
            "run_id": run.id,
            "cadence": observation.cadence,
            "observation_ids": run.observation_ids,
            "occupancy_observation_ids": run.occupancy_observation_ids,
            "occupancy_max_detection_id": max_detection_id,
            "protocol_sha256": protocol.content_sha256,
            "bands_sha256": protocol.bands_sha256,
            "counts": run.counts,
            "pending": run.pending,
            "decided_sha256": run.decided_sha256,
            "candidate_ids": candidate_ids,
        },
    )
    metrics.count_on_commit(session, metrics.SCREENING_RUNS)
    for reason, hits in run.counts.items():
        metrics.count_on_commit(session, metrics.SCREENED_HITS, hits, reason=reason)
    return RunSummary(run.id, run.counts, run.decided_sha256, candidate_ids)


def _untargeted(
    session: Session,
    rows: Sequence[ScanRow],
    decided: IntArray,
    not_pending: IntArray | None = None,
) -> Decisions:
    """Pending hits of on-source scans without a target: nothing to follow them up on.

    Pending means no reason yet, or (for a replay) not in ``not_pending``.
    """
    ids = [r.id for r in rows if r.on_source and r.target_id is None]
    if not ids:
        return Decisions.empty()
    query = select(Detection.id).where(Detection.observation_id.in_(ids))
    if not_pending is None:
        query = query.where(Detection.screen_reason.is_(None))
    found = np.fromiter(session.execute(query).scalars(), dtype=np.int64)
    skip = decided if not_pending is None else np.concatenate([decided, not_pending])
    return Decisions.of(found[~np.isin(found, skip)], Reason.NO_TARGET)


@dataclass
class RunReplay:
    """A screening run recomputed from what it saw, beside what it recorded and what is stored.

    ``recorded``: the run's digest as audited; ``replayed``: the rules applied again;
    ``stored``: the reasons the hits carry today. All three agree when nothing changed.
    """

    run_id: int
    recorded_sha256: str
    replayed_sha256: str
    stored_sha256: str
    recorded_counts: dict[str, int]
    replayed_counts: dict[str, int]

    @property
    def reproduced(self) -> bool:
        return (
            self.recorded_sha256 == self.replayed_sha256 == self.stored_sha256
            and self.recorded_counts == self.replayed_counts
        )


def replay_run(session: Session, run_id: int) -> RunReplay:
    """Recompute run ``run_id`` from its scans, occupancy snapshot and protocol (read only).

    Hits decided before the run, flagged by the pipeline, or linked to a candidate by its
    evaluation in the run are taken as they were; every other reason is recomputed by the rules.
    """
    from confirm_service.services.protocols import protocol_for

    run = session.get(ScreeningRun, run_id)
    if run is None:
        raise NotFound(f"no screening run {run_id}", [("run_id", "no such screening run")])
    observation = session.get(Observation, run.trigger_observation_id)
    assert observation is not None
    protocol = protocol_for(session, run.protocol_sha256, run.bands_sha256)
    scans = session.execute(
        select(Observation)
        .where(Observation.id.in_(run.observation_ids))
        .order_by(Observation.start, Observation.id)
    ).scalars()
    rows = [replace(_scan_row(o), complete=True) for o in scans]
    given = session.execute(
        select(Detection.id, Detection.screen_reason, Detection.screening_run_id).where(
            Detection.observation_id.in_(run.observation_ids),
            or_(
                Detection.screening_run_id < run.id,
                Detection.screen_reason.in_(
                    [Reason.FLAGGED.value, Reason.BEFORE_SCREENING.value, Reason.LINKED.value]
                ),
            ),
        )
    ).all()
    linked = [hit for hit, reason, by in given if by == run.id and reason == Reason.LINKED]
    not_pending = np.array([hit for hit, _, _ in given], dtype=np.int64)
    judgement = judge_cadence(
        session,
        observation,
        rows,
        protocol,
        run.occupancy_max_detection_id,
        not_pending,
        run.occupancy_observation_ids,
    )
    decided = judgement.decided + Decisions.of(linked, Reason.LINKED)
    decided = decided + _untargeted(session, rows, decided.ids, not_pending)
    stored = session.execute(
        select(Detection.id, Detection.screen_reason).where(Detection.screening_run_id == run.id)
    ).all()
    return RunReplay(
        run.id,
        run.decided_sha256,
        decided.digest(),
        decided_digest([(h, str(r)) for h, r in stored]),
        dict(run.counts),
        decided.counts(),
    )


def replay_runs(session: Session, run_ids: Sequence[int] | None = None) -> list[RunReplay]:
    """Replay the given runs (default: every run), oldest first."""
    if run_ids is None:
        run_ids = list(session.execute(select(ScreeningRun.id).order_by(ScreeningRun.id)).scalars())
    return [replay_run(session, run_id) for run_id in run_ids]
