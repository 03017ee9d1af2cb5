"""Partners that run this service too: shared secrets, signed messages in, reports relayed back.

A partner is a registered site with a shared secret. Its messages arrive signed
(``followup.signing``); each message id is kept, so a replay has no effect and is refused.
Kinds: ``followup.request`` (a partner asks us to look; it becomes an incoming request) and
``followup.report`` (a partner answers a request we made; it goes through
``followups.record_report``).
"""

from __future__ import annotations

import hashlib
import json
from datetime import datetime
from typing import Any

from pydantic import ValidationError
from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import Conflict, Forbidden, Invalid, NotFound, ServiceError
from confirm_service.followup import signing
from confirm_service.followup.states import FollowUpState
from confirm_service.models import (
    Detection,
    FollowUpRequest,
    Observation,
    OutboundMessage,
    PartnerSecret,
    ReceivedMessage,
    Site,
    Target,
)
from confirm_service.schemas.followups import ReportIn
from confirm_service.schemas.log import TargetIn
from confirm_service.services import followups, messages
from confirm_service.services.sites import create_target, site_by_code
from confirm_service.timeutil import utc_now

S = FollowUpState
REPORT_MESSAGE = "followup.report"


class Unauthenticated(ServiceError):
    def __init__(self, field: str, message: str) -> None:
        super().__init__(message, [(field, message)], 401, "Unauthorized")


def set_partner_secret(
    session: Session, actor: Actor, site_code: str, secret: str | None = None
) -> str:
    """Give ``site_code`` a shared secret (a new random one unless given); audited, not the
    secret itself."""
    site = site_by_code(session, site_code)
    secret = secret or signing.new_secret()
    row = session.execute(
        select(PartnerSecret).where(PartnerSecret.site_id == site.id)
    ).scalar_one_or_none()
    if row is None:
        session.add(PartnerSecret(site_id=site.id, secret=secret))
    else:
        row.secret, row.created_at = secret, utc_now()
    record(session, actor, "partner.secret_set", f"site:{site.code}", {"site": site.code})
    return secret


def _partner(session: Session, code: str) -> tuple[Site, str]:
    site = session.execute(select(Site).where(Site.code == code)).scalar_one_or_none()
    secret = None
    if site is not None:
        secret = session.execute(
            select(PartnerSecret.secret).where(PartnerSecret.site_id == site.id)
        ).scalar_one_or_none()
    if site is None or secret is None:
        raise Unauthenticated(signing.SENDER_HEADER, "not a partner of this service")
    return site, secret


def receive(
    session: Session, headers: Any, body: bytes, now_s: float | None = None
) -> tuple[int, dict[str, Any]]:
    """Verify and act on one signed message; returns (HTTP status, answer)."""
    try:
        envelope = signing.envelope_of(headers)
        site, secret = _partner(session, envelope.sender)
        signing.verify(secret, envelope, body, now_s)
    except signing.SignatureRefused as refused:
        raise Unauthenticated(refused.field, refused.message) from None
    seen = session.execute(
        select(ReceivedMessage.id).where(ReceivedMessage.message_id == envelope.message_id)
    ).first()
    if seen:
        raise Conflict(
            f"message {envelope.message_id} was received before",
            [(signing.MESSAGE_ID_HEADER, "already received; a replay has no effect")],
        )
    try:
        message = json.loads(body)
    except (UnicodeDecodeError, json.JSONDecodeError):
        raise Invalid("the body is not JSON", [("body", "not valid JSON")]) from None
    if not isinstance(message, dict):
        raise Invalid("the body must be a JSON object", [("body", "must be a JSON object")])
    actor = Actor(name=f"partner:{site.code}", role="site", site_code=site.code)
    kind = message.get("kind")
    if kind == followups.REQUEST_MESSAGE:
        status, answer = 201, _incoming_request(session, actor, site, message)
    elif kind == REPORT_MESSAGE:
        status, answer = 201, _incoming_report(session, actor, site, message)
    else:
        raise Invalid("unknown message kind", [("kind", f"not a known kind: {kind!r}")])
    session.add(
        ReceivedMessage(
            message_id=envelope.message_id,
            site_id=site.id,
            kind=str(kind),
            body_sha256=hashlib.sha256(body).hexdigest(),
            result=answer,
        )
    )
    record(
        session,
        actor,
        "partner.message_received",
        f"site:{site.code}",
        {"message": envelope.message_id, "kind": kind, "result": answer},
    )
    return status, answer


def _ensure_target(session: Session, actor: Actor, target: dict[str, Any]) -> Target:
    existing = session.execute(
        select(Target).where(Target.name == target.get("name"))
    ).scalar_one_or_none()
    if existing is not None:
        return existing
    fields = {k: v for k, v in target.items() if v is not None}
    try:
        data = TargetIn.model_validate(fields)
    except ValidationError as exc:
        raise Invalid("the request's target is unusable", [("content.target", str(exc))]) from None
    return create_target(session, actor, data)


def _incoming_request(
    session: Session, actor: Actor, partner: Site, message: dict[str, Any]
) -> dict[str, Any]:
    """A partner asks one of our sites to look: recorded as received (sent) and acknowledged."""
    content = message.get("content")
    remote_id = message.get("request_id")
    if not isinstance(content, dict) or not isinstance(remote_id, int):
        raise Invalid("a request needs content and request_id", [("content", "missing")])
    key = f"inbound/{partner.code}/{remote_id}"
    known = session.execute(
        select(FollowUpRequest).where(FollowUpRequest.intent_key == key)
    ).scalar_one_or_none()
    if known is not None:
        return {"request_id": known.id, "acknowledged": True}
    ours = site_by_code(session, str(content.get("site", "")), "content.site")
    _ensure_target(session, actor, dict(content.get("target") or {}))
    deadline = content.get("deadline")
    now = utc_now()
    request = FollowUpRequest(
        intent_key=key,
        kind=str(content.get("kind", "request_followup")),
        candidate_id=None,
        site_id=ours.id,
        stage="incoming",
        status=S.DRAFTED.value,
        payload=content,
        direction="inbound",
        origin="partner",
        remote_id=remote_id,
        remote_site=partner.code,
        reply_url=str(message.get("reply_url") or ""),
        deadline=datetime.fromisoformat(deadline) if isinstance(deadline, str) else None,
        drafted_at=now,
        created_at=now,
    )
    session.add(request)
    session.flush()
    followups.move(session, actor, request, S.SENT, f"received from {partner.code}", now)
    followups.move(session, actor, request, S.ACKNOWLEDGED, "accepted on receipt", now)
    return {"request_id": request.id, "acknowledged": True}


def _incoming_report(
    session: Session, actor: Actor, partner: Site, message: dict[str, Any]
) -> dict[str, Any]:
    """A partner answers a request we made to it."""
    request_id = message.get("request_id")
    if not isinstance(request_id, int):
        raise Invalid("a report needs request_id", [("request_id", "missing")])
    request = followups.get_request(session, request_id)
    if request.site_id != partner.id:
        raise Forbidden("not your request", [("request_id", "made to another site")])
    try:
        data = ReportIn.model_validate(message.get("report"))
    except ValidationError as exc:
        raise Invalid("the report is unusable", [("report", str(exc)[:500])]) from None
    report = followups.record_report(session, actor, data, request_id=request_id)
    return {"report_id": report.id, "candidate_id": report.candidate_id}


def _scan_as_report(session: Session, request: FollowUpRequest, observation_id: int) -> dict:
    """One of our scans in the observation log's shape, with its hits in the requested band."""
    observation = session.get(Observation, observation_id)
    if observation is None:
        raise NotFound(f"no observation {observation_id}", [("observation_id", "no such scan")])
    if observation.site_id != request.site_id:
        raise Invalid("the scan is from another site", [("observation_id", "not the asked site")])
    band = request.payload.get("record_band_hz") or [
        observation.frequency_min_hz,
        observation.frequency_max_hz,
    ]
    hits = session.execute(
        select(Detection)
        .where(
            Detection.observation_id == observation.id,
            Detection.frequency_hz.between(band[0], band[1]),
        )
        .order_by(Detection.frequency_hz)
    ).scalars()
    return {
        "site": observation.site.code,
        "target": (request.payload.get("target") or {}).get("name"),
        "pointing_ra_deg": observation.pointing_ra_deg,
        "pointing_dec_deg": observation.pointing_dec_deg,
        "start": observation.start.isoformat(),
        "duration_s": observation.duration_s,
        "frequency_min_hz": observation.frequency_min_hz,
        "frequency_max_hz": observation.frequency_max_hz,
        "channel_width_hz": observation.channel_width_hz,
        "time_resolution_s": observation.time_resolution_s,
        "on_source": observation.on_source,
        "beam": observation.beam,
        "cadence": observation.cadence,
        "pipeline_run": observation.pipeline_run,
        "detections": [
            {
                "frequency_hz": d.frequency_hz,
                "drift_hz_s": d.drift_hz_s,
                "snr": d.snr,
                "time_offset_s": d.time_offset_s,
            }
            for d in hits
        ],
    }


def relay_report(
    session: Session, actor: Actor, request_id: int, data: ReportIn, now: datetime | None = None
) -> OutboundMessage:
    """Our answer to a partner's request: queued, signed at delivery, to its reply address."""
    now = now or utc_now()
    request = followups.get_request(session, request_id, lock=True)
    if request.direction != "inbound" or not request.reply_url or not request.remote_site:
        raise Conflict("not an incoming request", [("id", "reports on it are stored here")])
    site = session.get(Site, request.site_id)
    assert site is not None
    if actor.site_code and actor.site_code != site.code:
        raise Forbidden(
            f"this token reports for site {actor.site_code}",
            [("site", f"this token may only report for {actor.site_code}")],
        )
    report = data.model_dump(mode="json", exclude_none=True, exclude={"observation_id"})
    report["site"] = site.code
    if data.observation_id is not None:
        report["observation"] = _scan_as_report(session, request, data.observation_id)
        for name in ("observed_at", "duration_s", "frequency_min_hz", "frequency_max_hz"):
            report.pop(name, None)
    origin = site_by_code(session, request.remote_site)
    message = messages.queue_message(
        session,
        actor,
        kind=REPORT_MESSAGE,
        channel="webhook",
        destination=request.reply_url,
        subject=f"Report on follow-up request {request.remote_id}",
        body={"kind": REPORT_MESSAGE, "request_id": request.remote_id, "report": report},
        due=now,
        request_id=request.id,
        site_id=origin.id,
    )
    followups.move(session, actor, request, S.REPORTED, "report relayed to the requester", now)
    return message
