"""Follow-up requests: drafted from protocol intents or by coordinators, sent, answered, closed.

Life cycle (``followup.states``): drafted -> sent -> acknowledged -> reported -> closed, or
expired / declined / failed. Every move sets its timestamp column and writes its audit entry in
the caller's transaction. Reports from partners, with or without a request, go through
:func:`record_report`, the one path that stores them and re-evaluates the candidate.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.config import Settings
from confirm_service.errors import Conflict, Forbidden, Invalid, NotFound
from confirm_service.followup.content import (
    Discovery,
    PartnerSite,
    build_request_content,
)
from confirm_service.followup.delivery import Attempt
from confirm_service.followup.states import OPEN_STATES, TIMESTAMP_COLUMN, FollowUpState, can_move
from confirm_service.models import (
    Candidate,
    FollowUpReport,
    FollowUpRequest,
    Observation,
    OutboundMessage,
    Site,
)
from confirm_service.protocol import default_physics_context, report_views
from confirm_service.schemas.followups import FollowUpCreate, ReportIn
from confirm_service.services import facts as factbook
from confirm_service.services import messages
from confirm_service.services.protocols import protocol_of
from confirm_service.services.sites import all_sites, site_by_code
from confirm_service.timeutil import utc_now

S = FollowUpState
REQUEST_KINDS = ("request_followup", "request_reobservation")
NOTICE_KINDS = ("escalate", "notify")
REQUEST_MESSAGE = "followup.request"


# --- life cycle -------------------------------------------------------------------------------


def move(
    session: Session,
    actor: Actor,
    request: FollowUpRequest,
    wanted: FollowUpState,
    reason: str | None = None,
    at: datetime | None = None,
) -> None:
    """Move ``request`` to ``wanted`` (refused if the life cycle forbids it), timestamped and
    audited."""
    if not can_move(request.status, wanted):
        raise Conflict(
            f"follow-up request {request.id} is {request.status}",
            [("status", f"cannot move from {request.status} to {wanted}")],
        )
    at = at or utc_now()
    previous = request.status
    request.status = wanted.value
    column = TIMESTAMP_COLUMN.get(wanted)
    if column:
        setattr(request, column, at)
    if reason is not None:
        request.state_reason = reason
    record(
        session,
        actor,
        f"followup.{wanted.value}",
        _audit_target(request),
        {"request_id": request.id, "from": previous, "to": wanted.value, "reason": reason},
    )


def _audit_target(request: FollowUpRequest) -> str:
    if request.candidate_id is not None:
        return f"candidate:{request.candidate_id}"
    return f"followup:{request.id}"


def get_request(session: Session, request_id: int, lock: bool = False) -> FollowUpRequest:
    request = session.get(FollowUpRequest, request_id, with_for_update=lock)
    if request is None:
        raise NotFound(f"no follow-up request {request_id}", [("id", "no such request")])
    return request


# --- drafting -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class DraftSpec:
    """What to ask: kind, horizon, deadline, the note, and where the request comes from."""

    kind: str
    stage: str
    horizon: tuple[datetime, datetime]
    deadline: datetime
    origin: str
    note: str = ""
    parent_id: int | None = None
    key_prefix: str = ""


def _discovery(session: Session, candidate: Candidate) -> Discovery:
    detection, observation, target = factbook.reference_parts(
        session, candidate.reference_detection_id
    )
    assert target is not None, "candidates always have a target"
    return Discovery(
        candidate.id,
        factbook.detection_fact(detection),
        factbook.observation_fact(observation),
        factbook.target_fact(target),
    )


def _partner(site: Site) -> PartnerSite:
    return PartnerSite(factbook.site_fact(site), site.min_elevation_deg, site.sun_avoidance_deg)


def _send_time(content: dict[str, Any], now: datetime, lead_s: float) -> datetime:
    """The first preferred window's opening (else the first window's) minus the lead time."""
    windows = content["windows"]
    if not windows:
        return now
    preferred = [windows[i] for i in content["preferred_windows"]] or windows
    opening = min(datetime.fromisoformat(w["start"]) for w in preferred)
    return max(now, opening - timedelta(seconds=lead_s))


def request_content(
    session: Session, settings: Settings, candidate: Candidate, site: Site, spec: DraftSpec
) -> dict[str, Any]:
    """The request body for ``site`` (windows, predicted track, band, drift range...)."""
    content = build_request_content(
        protocol_of(session, candidate),
        default_physics_context(),
        _discovery(session, candidate),
        _partner(site),
        spec.horizon,
        settings.site_code or "confirm-service",
        spec.note,
    )
    content["deadline"] = spec.deadline.isoformat()
    content["kind"] = spec.kind
    return content


def draft(
    session: Session,
    actor: Actor,
    settings: Settings,
    candidate: Candidate,
    site: Site,
    spec: DraftSpec,
    now: datetime,
    content: dict[str, Any] | None = None,
) -> FollowUpRequest:
    """Record a drafted request to ``site``, due at its send time; audited."""
    if content is None:
        content = request_content(session, settings, candidate, site, spec)
    prefix = spec.key_prefix or f"candidate/{candidate.id}/{spec.origin}/{now.timestamp()!r}"
    request = FollowUpRequest(
        intent_key=f"{prefix}/site/{site.code}",
        kind=spec.kind,
        candidate_id=candidate.id,
        site_id=site.id,
        stage=spec.stage,
        status=S.DRAFTED.value,
        payload=content,
        direction="outbound",
        origin=spec.origin,
        parent_id=spec.parent_id,
        send_at=_send_time(content, now, settings.followup_lead_time_s),
        deadline=spec.deadline,
        drafted_at=now,
        created_at=now,
    )
    session.add(request)
    session.flush()
    request.payload = {**content, "request_id": request.id}
    record(
        session,
        actor,
        "followup.drafted",
        f"candidate:{candidate.id}",
        {
            "request_id": request.id,
            "site": site.code,
            "kind": spec.kind,
            "origin": spec.origin,
            "send_at": request.send_at.isoformat() if request.send_at else None,
            "deadline": spec.deadline.isoformat(),
            "windows": len(content["windows"]),
            "preferred_windows": content["preferred_windows"],
        },
    )
    return request


def sites_seen(session: Session, candidate: Candidate) -> list[Site]:
    """Sites that have seen the signal: the discovery site and every site of a linked hit."""
    from confirm_service.models import CandidateDetection

    ids = {candidate.site_id}
    ids |= set(
        session.execute(
            select(Observation.site_id)
            .join(CandidateDetection, CandidateDetection.observation_id == Observation.id)
            .where(CandidateDetection.candidate_id == candidate.id)
        ).scalars()
    )
    return [site for site in all_sites(session) if site.id in ids]


def distant_sites(
    session: Session, candidate: Candidate, min_distance_km: float
) -> list[tuple[Site, float]]:
    """Registered sites at least ``min_distance_km`` from every site that saw the signal,
    nearest-first is irrelevant: returned with their distance to the nearest such site."""
    context = default_physics_context()
    seen = [factbook.site_fact(s) for s in sites_seen(session, candidate)]
    found = []
    for site in all_sites(session):
        fact = factbook.site_fact(site)
        nearest = min(context.distance_km(fact, other) for other in seen)
        if nearest >= min_distance_km:
            found.append((site, nearest))
    return found


def draft_to_distant_sites(
    session: Session,
    actor: Actor,
    settings: Settings,
    candidate: Candidate,
    min_distance_km: float,
    max_sites: int,
    spec: DraftSpec,
    now: datetime,
) -> list[FollowUpRequest]:
    """Requests to the ``max_sites`` far-enough sites that can see the target soonest; sites
    with no visibility window in the horizon are not asked."""
    options = []
    for site, _ in distant_sites(session, candidate, min_distance_km):
        content = request_content(session, settings, candidate, site, spec)
        if content["windows"]:
            first = min(w["start"] for w in content["windows"])
            options.append((first, site.code, site, content))
    options.sort(key=lambda option: (option[0], option[1]))
    return [
        draft(session, actor, settings, candidate, site, spec, now, content)
        for _, _, site, content in options[:max_sites]
    ]


def create_request(
    session: Session,
    actor: Actor,
    settings: Settings,
    candidate_id: int,
    data: FollowUpCreate,
    now: datetime | None = None,
) -> list[FollowUpRequest]:
    """A coordinator's request, to a named site or to every far-enough site that can look."""
    now = now or utc_now()
    candidate = session.get(Candidate, candidate_id, with_for_update=True)
    if candidate is None:
        raise NotFound(f"no candidate {candidate_id}", [("id", "no such candidate")])
    if candidate.state != "open":
        raise Conflict(
            f"candidate {candidate_id} is {candidate.state}",
            [("state", "follow-up is only asked for open candidates")],
        )
    horizon = (now, now + timedelta(hours=data.horizon_hours))
    deadline = data.deadline or horizon[1]
    spec = DraftSpec(
        "request_followup", candidate.stage, horizon, deadline, "coordinator", data.note
    )
    if data.site is not None:
        site = site_by_code(session, data.site)
        return [draft(session, actor, settings, candidate, site, spec, now)]
    assert data.min_distance_km is not None
    requests = draft_to_distant_sites(
        session, actor, settings, candidate, data.min_distance_km, data.max_sites, spec, now
    )
    if not requests:
        raise Invalid(
            "no site can look",
            [
                (
                    "min_distance_km",
                    f"no registered site {data.min_distance_km:g} km away sees the target "
                    f"within {data.horizon_hours:g} h",
                )
            ],
        )
    return requests


def dispatch_intent(
    session: Session, actor: Actor, settings: Settings, intent: FollowUpRequest, now: datetime
) -> int:
    """Turn one protocol intent into requests or notifications; returns how many were made.

    A request intent of a stage the candidate has already left (or a decided candidate) makes
    nothing: the evidence it asked for is no longer needed."""
    candidate = session.get(Candidate, intent.candidate_id, with_for_update=True)
    assert candidate is not None
    made = 0
    current = candidate.state == "open" and candidate.stage == intent.stage
    if current and intent.kind in REQUEST_KINDS:
        made = _requests_for_intent(session, actor, settings, candidate, intent, now)
    elif intent.kind in NOTICE_KINDS:
        from confirm_service.services import notifications

        made = notifications.notify_intent(session, actor, settings, candidate, intent, now)
    move(
        session,
        actor,
        intent,
        S.DISPATCHED,
        f"{made} request(s) or notice(s) made" if made else "nothing to send",
        now,
    )
    return made


def _requests_for_intent(
    session: Session,
    actor: Actor,
    settings: Settings,
    candidate: Candidate,
    intent: FollowUpRequest,
    now: datetime,
) -> int:
    params = intent.payload
    hours = float(params.get("window_hours", 168.0))
    if intent.kind == "request_reobservation":
        reference = datetime.fromtimestamp(candidate.reference_unix_s, now.tzinfo)
        begin = max(now, reference + timedelta(hours=float(params.get("min_gap_hours", 0.0))))
        spec = DraftSpec(
            intent.kind,
            intent.stage,
            (begin, begin + timedelta(hours=hours)),
            begin + timedelta(hours=hours),
            "protocol",
            str(params.get("note", "")),
            intent.id,
            intent.intent_key,
        )
        site = session.get(Site, candidate.site_id)
        assert site is not None
        draft(session, actor, settings, candidate, site, spec, now)
        return 1
    spec = DraftSpec(
        intent.kind,
        intent.stage,
        (now, now + timedelta(hours=hours)),
        now + timedelta(hours=hours),
        "protocol",
        str(params.get("note", "")),
        intent.id,
        intent.intent_key,
    )
    if isinstance(params.get("site"), str):
        site = site_by_code(session, params["site"])
        draft(session, actor, settings, candidate, site, spec, now)
        return 1
    requests = draft_to_distant_sites(
        session,
        actor,
        settings,
        candidate,
        float(params.get("min_distance_km", 1000.0)),
        int(params.get("max_sites") or 3),
        spec,
        now,
    )
    return len(requests)


def intended_ids(session: Session) -> list[int]:
    return list(
        session.execute(
            select(FollowUpRequest.id)
            .where(FollowUpRequest.status == S.INTENDED.value)
            .order_by(FollowUpRequest.id)
        ).scalars()
    )


# --- sending ---------------------------------------------------------------------------------


def due_to_send_ids(session: Session, now: datetime) -> list[int]:
    return list(
        session.execute(
            select(FollowUpRequest.id)
            .where(
                FollowUpRequest.status == S.DRAFTED.value,
                FollowUpRequest.direction == "outbound",
                FollowUpRequest.send_at <= now,
            )
            .order_by(FollowUpRequest.send_at, FollowUpRequest.id)
        ).scalars()
    )


def request_message_body(request: FollowUpRequest, settings: Settings) -> dict[str, Any]:
    """What the partner receives: the content plus where to report back."""
    return {
        "kind": REQUEST_MESSAGE,
        "request_id": request.id,
        "reply_url": settings.public_url.rstrip("/") + "/federation/v1/messages",
        "content": request.payload,
    }


def send(session: Session, actor: Actor, settings: Settings, request_id: int, now: datetime) -> str:
    """Queue the request for delivery to the partner's webhook, or offer it for pull (sent)."""
    request = get_request(session, request_id, lock=True)
    if request.status != S.DRAFTED.value:
        return "skipped"
    site = session.get(Site, request.site_id)
    assert site is not None
    if not site.webhook_url:
        move(session, actor, request, S.SENT, "offered for pull (the site has no webhook)", now)
        return "offered"
    waiting = session.execute(
        select(OutboundMessage.id).where(
            OutboundMessage.request_id == request.id,
            OutboundMessage.kind == REQUEST_MESSAGE,
            OutboundMessage.status.in_((messages.PENDING, messages.RETRYING)),
        )
    ).first()
    if waiting:
        return "queued already"
    messages.queue_message(
        session,
        actor,
        kind=REQUEST_MESSAGE,
        channel="webhook",
        destination=site.webhook_url,
        subject=f"Follow-up request {request.id} for candidate {request.candidate_id}",
        body=request_message_body(request, settings),
        due=now,
        candidate_id=request.candidate_id,
        request_id=request.id,
        site_id=site.id,
    )
    return "queued"


def on_delivery_result(
    session: Session, actor: Actor, message: OutboundMessage, attempt: Attempt
) -> None:
    """A request message delivered moves its request to sent (and acknowledged when the
    partner said so); a dead one moves it to failed."""
    if message.kind != REQUEST_MESSAGE or message.request_id is None:
        return
    request = get_request(session, message.request_id, lock=True)
    request.attempts, request.last_error = message.attempts, message.last_error
    if message.status == messages.DELIVERED and request.status == S.DRAFTED.value:
        move(session, actor, request, S.SENT, f"delivered to {message.destination}")
        answer = attempt.response or {}
        if isinstance(answer.get("request_id"), int):
            request.remote_id = answer["request_id"]
        if answer.get("acknowledged") is True:
            move(session, actor, request, S.ACKNOWLEDGED, "acknowledged on delivery")
    elif message.status == messages.DEAD and request.status == S.DRAFTED.value:
        move(session, actor, request, S.FAILED, f"delivery gave up: {message.last_error}")


def resend_request(
    session: Session, actor: Actor, request_id: int, now: datetime | None = None
) -> FollowUpRequest:
    """A coordinator re-sends a failed request: drafted again and due now, so that the next
    pass queues a fresh message to the site's current webhook (the dead one stays on record)."""
    now = now or utc_now()
    request = get_request(session, request_id, lock=True)
    if request.status != S.FAILED.value:
        raise Conflict(
            f"follow-up request {request_id} is {request.status}",
            [("status", "only a failed request can be re-sent")],
        )
    move(session, actor, request, S.DRAFTED, "re-sent by a coordinator", now)
    request.send_at = now
    return request


def expire_due(session: Session, actor: Actor, now: datetime) -> tuple[int, int]:
    """Open requests past their deadline expire; reported requests whose candidate is decided
    close. Returns (expired, closed)."""
    expired = closed = 0
    rows = session.execute(
        select(FollowUpRequest)
        .where(
            FollowUpRequest.status.in_([s.value for s in OPEN_STATES]),
            FollowUpRequest.deadline < now,
        )
        .order_by(FollowUpRequest.id)
        .with_for_update()
    ).scalars()
    for request in list(rows):
        move(session, actor, request, S.EXPIRED, "deadline passed without a report", now)
        expired += 1
    reported = session.execute(
        select(FollowUpRequest)
        .join(Candidate, Candidate.id == FollowUpRequest.candidate_id)
        .where(FollowUpRequest.status == S.REPORTED.value, Candidate.state != "open")
        .with_for_update()
    ).scalars()
    for request in list(reported):
        move(session, actor, request, S.CLOSED, "the candidate is decided", now)
        closed += 1
    return expired, closed


def acknowledge(session: Session, actor: Actor, request_id: int) -> FollowUpRequest:
    request = _partner_request(session, actor, request_id)
    move(session, actor, request, S.ACKNOWLEDGED, f"acknowledged by {actor.name}")
    return request


def decline(session: Session, actor: Actor, request_id: int, reason: str) -> FollowUpRequest:
    request = _partner_request(session, actor, request_id)
    move(session, actor, request, S.DECLINED, reason)
    return request


def close(session: Session, actor: Actor, request_id: int, reason: str) -> FollowUpRequest:
    request = get_request(session, request_id, lock=True)
    move(session, actor, request, S.CLOSED, reason)
    return request


def _partner_request(session: Session, actor: Actor, request_id: int) -> FollowUpRequest:
    """The request, refused to a site token of another site."""
    request = get_request(session, request_id, lock=True)
    site = session.get(Site, request.site_id) if request.site_id else None
    if actor.site_code and (site is None or actor.site_code != site.code):
        raise Forbidden(
            f"this token acts for site {actor.site_code}",
            [("site", f"this token may only answer requests to {actor.site_code}")],
        )
    return request


def list_requests(
    session: Session,
    site: str | None = None,
    state: str | None = None,
    candidate_id: int | None = None,
    direction: str | None = None,
    after_id: int = 0,
    limit: int = 100,
) -> list[FollowUpRequest]:
    query = select(FollowUpRequest).where(FollowUpRequest.id > after_id)
    if site is not None:
        site_id = site_by_code(session, site).id
        query = query.where(FollowUpRequest.site_id == site_id)
    if state is not None:
        query = query.where(FollowUpRequest.status == state)
    if candidate_id is not None:
        query = query.where(FollowUpRequest.candidate_id == candidate_id)
    if direction is not None:
        query = query.where(FollowUpRequest.direction == direction)
    return list(session.execute(query.order_by(FollowUpRequest.id).limit(limit)).scalars())


# --- reports ---------------------------------------------------------------------------------


def record_report(
    session: Session,
    actor: Actor,
    data: ReportIn,
    candidate_id: int | None = None,
    request_id: int | None = None,
) -> FollowUpReport:
    """A partner's report, with or without a request: the one path that stores reports.

    A report carrying its scan puts the scan and its hits in the observation log first (so the
    re-observation and independent-site checks both see it); the report row links to it. The
    candidate is re-evaluated at once. A token bound to a site reports only for that site.
    """
    from confirm_service.services.evaluation import locked_candidate, reevaluate

    request = get_request(session, request_id, lock=True) if request_id is not None else None
    if request is not None:
        if request.direction != "outbound" or request.candidate_id is None:
            raise Conflict(
                "an incoming request is answered to its sender",
                [("id", "report on an incoming request is relayed, not stored here")],
            )
        candidate_id = request.candidate_id
    assert candidate_id is not None
    candidate = locked_candidate(session, candidate_id)
    site = _report_site(session, actor, data, request)
    observation = _report_scan(session, actor, data, candidate, site)
    report = FollowUpReport(
        candidate_id=candidate.id,
        request_id=request.id if request else None,
        site_id=site.id,
        observed=data.observed,
        not_observed_reason=data.not_observed_reason,
        observed_at=data.observed_at or utc_now(),
        duration_s=data.duration_s or 0.0,
        detected=data.detected,
        frequency_hz=data.frequency_hz,
        drift_hz_s=data.drift_hz_s,
        frequency_min_hz=data.frequency_min_hz or 0.0,
        frequency_max_hz=data.frequency_max_hz or 0.0,
        threshold_snr=data.threshold_snr,
        sefd_jy=data.sefd_jy,
        pointing_ra_deg=data.pointing_ra_deg,
        pointing_dec_deg=data.pointing_dec_deg,
        observation_id=observation.id if observation else None,
        time_offset_s=data.time_offset_s or 0.0,
        notes=data.notes,
    )
    session.add(report)
    session.flush()
    report.warnings = report_warnings(session, candidate, report, site)
    summary = data.model_dump(mode="json", exclude={"observation"})
    record(
        session,
        actor,
        "followup.reported",
        f"candidate:{candidate.id}",
        {
            "report_id": report.id,
            "request_id": report.request_id,
            "observation_id": report.observation_id,
            **summary,
            "warnings": report.warnings,
        },
    )
    if request is not None and can_move(request.status, S.REPORTED):
        move(session, actor, request, S.REPORTED, "report received")
    if candidate.state == "open":
        reevaluate(session, actor, candidate)
    return report


def report_warnings(
    session: Session, candidate: Candidate, report: FollowUpReport, site: Site
) -> list[str]:
    """What a partner should hear about its report on receipt: a sighting outside the band
    predicted for its site at the report's instant (``observed_at + time_offset_s``), a look
    whose band misses the prediction, a candidate already decided. The report is kept anyway."""
    warnings = []
    if candidate.state != "open":
        warnings.append(
            f"Candidate {candidate.id} is {candidate.state}: the report is stored and audited "
            "but does not change the candidate (a coordinator may reopen it)."
        )
    if not report.observed:
        return warnings
    detection, observation, target = factbook.reference_parts(
        session, candidate.reference_detection_id
    )
    assert target is not None, "candidates always have a target"
    (view,) = report_views(
        protocol_of(session, candidate),
        factbook.detection_fact(detection),
        factbook.observation_fact(observation),
        factbook.target_fact(target),
        [factbook.report_fact(report, site)],
    )
    instant = report.observed_at + timedelta(seconds=report.time_offset_s or 0.0)
    where = f"{site.code} at {instant.isoformat()}"
    if report.detected and report.frequency_hz is not None:
        offset_hz = report.frequency_hz - view.predicted_frequency_hz
        if abs(offset_hz) > view.frequency_tolerance_hz:
            warnings.append(
                f"The reported frequency {report.frequency_hz:.1f} Hz is {offset_hz:+.1f} Hz "
                f"from the {view.predicted_frequency_hz:.1f} Hz predicted for {where}, outside "
                f"the predicted band of +-{view.frequency_tolerance_hz:.1f} Hz: it is not "
                "counted as a sighting of this candidate's signal."
            )
        elif view.drift_mismatch:
            warnings.append(
                f"The reported drift {report.drift_hz_s:+.4f} Hz/s differs from the "
                f"{view.predicted_drift_hz_s:+.4f} Hz/s predicted for {where} by more than "
                f"{view.drift_tolerance_hz_s:.4f} Hz/s: it is not counted as a sighting."
            )
    elif not view.covers:
        warnings.append(
            f"The searched band {report.frequency_min_hz:.1f}-{report.frequency_max_hz:.1f} Hz "
            f"does not contain the band predicted for {site.code} during the look "
            f"({view.window_low_hz:.1f}-{view.window_high_hz:.1f} Hz): the look counts "
            "neither as a sighting nor as a miss."
        )
    return warnings


def _report_site(
    session: Session, actor: Actor, data: ReportIn, request: FollowUpRequest | None
) -> Site:
    if request is not None:
        site = session.get(Site, request.site_id)
        assert site is not None
        if data.site is not None and data.site != site.code:
            raise Invalid(
                "the report names another site",
                [("site", f"this request was made to {site.code}")],
            )
    elif data.site is None:
        raise Invalid("no site", [("site", "name the reporting site")])
    else:
        site = site_by_code(session, data.site)
    if actor.site_code and actor.site_code != site.code:
        raise Forbidden(
            f"this token reports for site {actor.site_code}",
            [("site", f"this token may only report for {actor.site_code}")],
        )
    return site


def _report_scan(
    session: Session, actor: Actor, data: ReportIn, candidate: Candidate, site: Site
) -> Observation | None:
    """The report's scan, put in the observation log with its hits."""
    if data.observation is None:
        return None
    from confirm_service.services import runtime
    from confirm_service.services.observations import create_observation

    scan = data.observation
    if scan.site != site.code:
        raise Invalid(
            "the scan is from another site",
            [("observation.site", f"must be {site.code}, the reporting site")],
        )
    target = candidate.target_id
    from confirm_service.models import Target

    target_row = session.get(Target, target)
    assert target_row is not None
    if scan.target is not None and scan.target != target_row.name:
        raise Invalid(
            "the scan is of another target",
            [("observation.target", f"must be {target_row.name}, the candidate's target")],
        )
    scan = scan.model_copy(update={"target": target_row.name})
    settings = runtime.settings()
    observation, _, _ = create_observation(
        session, actor, scan, settings.clock_skew_allowance_s, settings.max_batch_detections
    )
    return observation
