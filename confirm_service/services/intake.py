"""Candidates from hits: the same-signal test, creation under the configured protocol, and
explicit promotion by a person or a pipeline.
"""

from __future__ import annotations

from collections.abc import Sequence

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import Conflict, Invalid, NotFound
from confirm_service.models import Candidate, CandidateDetection, Detection, Observation
from confirm_service.protocol import (
    LoadedProtocol,
    default_physics_context,
    initial_stage,
    reference_of,
    search_windows_hz,
    stage_entry_actions,
)
from confirm_service.services import facts as factbook
from confirm_service.services import protocols
from confirm_service.services.evaluation import record_actions, reevaluate
from confirm_service.services.history import add_history
from confirm_service.services.protocols import configured_protocol, protocol_of
from confirm_service.timeutil import utc_now

SAME_SIGNAL_SEARCH_HZ = 100_000.0
"""Candidates whose barycentric frequency lies within this of a new hit are tested as the same
signal (a residual drift of 1 Hz/s moves a signal 86 kHz in a day)."""


def _could_be_same_signal(
    candidate: Candidate, barycentric_frequency_hz: float, unix_s: float
) -> bool:
    """Coarse test from stored columns: the candidate's barycentric track passes near the hit.

    Allows 1 kHz plus 0.05 Hz/s of drift error per second of gap; the exact predicted window is
    computed only for candidates that pass.
    """
    gap_s = unix_s - candidate.reference_unix_s
    expected = candidate.barycentric_frequency_hz + candidate.residual_drift_hz_s * gap_s
    return abs(expected - barycentric_frequency_hz) <= 1_000.0 + 0.05 * abs(gap_s)


def same_signal_candidate(
    session: Session,
    protocol: LoadedProtocol,
    detection: Detection,
    observation: Observation,
) -> Candidate | None:
    """An existing candidate of the same target whose predicted track this detection lies on."""
    target = observation.target
    if target is None:
        return None
    detection_f = factbook.detection_fact(detection)
    observation_f = factbook.observation_fact(observation)
    target_f = factbook.target_fact(target)
    signal = reference_of(
        (detection_f, observation_f, target_f), protocol.model, default_physics_context()
    )
    nearby = session.execute(
        select(Candidate).where(
            Candidate.target_id == target.id,
            Candidate.barycentric_frequency_hz.between(
                signal.barycentric_frequency_hz - SAME_SIGNAL_SEARCH_HZ,
                signal.barycentric_frequency_hz + SAME_SIGNAL_SEARCH_HZ,
            ),
        )
    ).scalars()
    for candidate in nearby:
        if not _could_be_same_signal(candidate, signal.barycentric_frequency_hz, signal.unix_s):
            continue
        reference, reference_observation, _ = factbook.reference_parts(
            session, candidate.reference_detection_id
        )
        if reference_observation.id == observation.id:
            continue  # one signal gives one hit per scan: another hit of the same scan differs
        windows = search_windows_hz(
            protocol_of(session, candidate),
            factbook.detection_fact(reference),
            factbook.observation_fact(reference_observation),
            target_f,
            [observation_f],
            default_physics_context(),
        )
        low, high = windows[observation.id]
        if low <= detection.frequency_hz <= high:
            return candidate
    return None


def create_candidate(
    session: Session,
    actor: Actor,
    detection: Detection,
    observation: Observation,
    origin: str,
    note: str | None = None,
) -> Candidate:
    """A new candidate from ``detection`` under the configured protocol, evaluated at once."""
    if observation.target is None:
        raise Invalid(
            "the detection's scan has no target",
            [("detection_id", "only detections from scans of a registered target can be followed")],
        )
    protocol = configured_protocol(session)
    protocols.ensure_recorded(session, actor, protocol)
    signal = reference_of(
        (
            factbook.detection_fact(detection),
            factbook.observation_fact(observation),
            factbook.target_fact(observation.target),
        ),
        protocol.model,
        default_physics_context(),
    )
    now = utc_now()
    stage = initial_stage(protocol)
    candidate = Candidate(
        reference_detection_id=detection.id,
        target_id=observation.target_id,
        site_id=observation.site_id,
        protocol_name=protocol.name,
        protocol_sha256=protocol.content_sha256,
        bands_sha256=protocol.bands_sha256,
        state="open",
        stage=stage,
        stage_entered_at=now,
        origin=origin,
        reference_unix_s=signal.unix_s,
        barycentric_frequency_hz=signal.barycentric_frequency_hz,
        residual_drift_hz_s=signal.residual_drift_hz_s,
        evaluation_count=0,
    )
    session.add(candidate)
    session.flush()
    session.add(
        CandidateDetection(
            candidate_id=candidate.id,
            detection_id=detection.id,
            observation_id=observation.id,
            role="reference",
        )
    )
    reason = f"created ({origin})" + (f": {note}" if note else "")
    add_history(session, actor, candidate.id, (None, stage), (None, "open"), reason, at=now)
    record(
        session,
        actor,
        "candidate.created",
        f"candidate:{candidate.id}",
        {
            "detection_id": detection.id,
            "origin": origin,
            "note": note,
            "protocol": protocol.name,
            "protocol_sha256": protocol.content_sha256,
            "bands_sha256": protocol.bands_sha256,
            "barycentric_frequency_hz": signal.barycentric_frequency_hz,
            "residual_drift_hz_s": signal.residual_drift_hz_s,
            "reference_unix_s": signal.unix_s,
            "stage": stage,
        },
    )
    entered = stage_entry_actions(protocol, stage, candidate.id, now.timestamp(), signal)
    record_actions(session, actor, candidate, entered)
    reevaluate(session, actor, candidate, now)
    return candidate


def promote_detection(
    session: Session, actor: Actor, detection_id: int, note: str | None
) -> Candidate:
    """Explicit promotion of a detection by a coordinator or a pipeline.

    One signal, one candidate: a detection already linked to a candidate, or lying on the
    predicted track of one (open or closed), is answered with that candidate (409), never a
    second candidate.
    """
    detection = session.get(Detection, detection_id)
    if detection is None:
        raise NotFound(f"no detection {detection_id}", [("detection_id", "no such detection")])
    observation = session.get(Observation, detection.observation_id)
    assert observation is not None
    linked = session.execute(
        select(CandidateDetection.candidate_id).where(
            CandidateDetection.detection_id == detection_id
        )
    ).first()
    holder = session.get(Candidate, linked[0]) if linked else None
    if holder is None and observation.target is not None:
        holder = same_signal_candidate(
            session, configured_protocol(session), detection, observation
        )
    if holder is not None:
        raise _already_followed(detection_id, holder, bool(linked))
    return create_candidate(session, actor, detection, observation, "explicit", note)


def _already_followed(detection_id: int, holder: Candidate, linked: bool) -> Conflict:
    """The answer to promoting a hit of an existing candidate: which one, and what to do."""
    how = "is linked to" if linked else "lies on the predicted track of"
    where = f"/api/v1/candidates/{holder.id}"
    if holder.state == "open":
        action = f"see {where}"
    elif holder.state == "rejected":
        action = f"it is rejected; a coordinator can reopen it: POST {where}/reopen"
    elif holder.reason_class == "person":
        action = (
            f"it is {holder.state} by a person's decision; a coordinator can retract it: "
            f"POST {where}/retract"
        )
    else:
        action = f"it is {holder.state}, as recorded at {where}"
    return Conflict(
        f"detection {detection_id} {how} candidate {holder.id} ({action})",
        [("detection_id", f"already followed as candidate {holder.id}: {action}")],
    )


def join_or_create(
    session: Session,
    actor: Actor,
    detection: Detection,
    members: Sequence[tuple[int, int]],
    origin: str,
) -> int:
    """The candidate for a signal: the one already on its track, else a new one.

    ``members`` are (hit id, scan id) of every hit of the signal; all are linked.
    """
    observation = session.get(Observation, detection.observation_id)
    assert observation is not None
    existing = same_signal_candidate(session, configured_protocol(session), detection, observation)
    if existing is None:
        return create_candidate(session, actor, detection, observation, origin).id
    known = set(
        session.execute(
            select(CandidateDetection.detection_id).where(
                CandidateDetection.candidate_id == existing.id
            )
        ).scalars()
    )
    for hit_id, scan_id in members:
        if hit_id not in known:
            session.add(
                CandidateDetection(
                    candidate_id=existing.id, detection_id=hit_id, observation_id=scan_id
                )
            )
    return existing.id


def candidates_from_signals(
    session: Session, actor: Actor, signals: Sequence[Sequence[tuple[int, int, float]]]
) -> list[int]:
    """One candidate per surviving signal (hits as (hit id, scan id, SNR), earliest scan first).

    The reference is the strongest hit of the signal's earliest scan. Survivors are few: this
    runs per signal, never per screened hit.
    """
    made: list[int] = []
    for signal in signals:
        first_scan = signal[0][1]
        reference_id = max((h for h in signal if h[1] == first_scan), key=lambda h: h[2])[0]
        detection = session.get(Detection, reference_id)
        assert detection is not None
        members = [(hit, scan) for hit, scan, _ in signal]
        candidate_id = join_or_create(session, actor, detection, members, "screening")
        if candidate_id not in made:
            made.append(candidate_id)
    return made


def promote_flagged(
    session: Session, actor: Actor, observation: Observation, hit_ids: Sequence[int]
) -> list[int]:
    """Hits the pipeline flagged itself: candidates at once (or joined to one on their track)."""
    if observation.target is None:
        return []
    made: list[int] = []
    for hit_id in hit_ids:
        detection = session.get(Detection, hit_id)
        assert detection is not None
        candidate_id = join_or_create(
            session, actor, detection, [(hit_id, observation.id)], "pipeline_flag"
        )
        if candidate_id not in made:
            made.append(candidate_id)
    return made
