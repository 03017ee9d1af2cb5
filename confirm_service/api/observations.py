"""Observations and their detections, including the bulk ingest path."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from flask import Blueprint, Response, request
from sqlalchemy.exc import IntegrityError

from confirm_service.api.common import (
    READ_ROLES,
    body_sha256,
    current_actor,
    database,
    json_response,
    page_of,
    parse_body,
    parse_query,
    roles,
    settings,
)
from confirm_service.api.serialise import detection_out, observation_model, observation_out
from confirm_service.api.spec import documented
from confirm_service.schemas.common import Page
from confirm_service.schemas.log import (
    DETECTION_BATCH,
    DetectionBatchOut,
    DetectionOut,
    ObservationIn,
    ObservationOut,
    ScreeningCountsOut,
)
from confirm_service.schemas.queries import ListQuery, ObservationQuery
from confirm_service.services import access, idempotency
from confirm_service.services import observations as service

bp = Blueprint("observations", __name__, url_prefix="/api/v1/observations")

IDEMPOTENCY_HEADER = {
    "Idempotency-Key": "a retry with the same key and body returns the first answer unchanged"
}


def _idempotent(produce: Callable[[Any], tuple[int, dict[str, Any]]]) -> Response:
    """Run ``produce(session)`` in one write transaction, at most once per Idempotency-Key."""
    key = request.headers.get("Idempotency-Key")
    scope = f"token:{current_actor().token_id}:{request.method}:{request.path}"
    digest = body_sha256()
    db = database()
    try:
        with db.write() as session:
            if key:
                stored = idempotency.stored_answer(session, scope, key, digest)
                if stored is not None:
                    status, body = stored
                    return json_response(body, status, {"Idempotent-Replayed": "true"})
            status, body = produce(session)
            if key:
                idempotency.remember_answer(session, scope, key, digest, status, body)
    except IntegrityError:
        if not key:
            raise
        with db.read() as session:  # a concurrent twin committed first: answer with its result
            stored = idempotency.stored_answer(session, scope, key, digest)
        if stored is None:
            raise
        status, body = stored
        return json_response(body, status, {"Idempotent-Replayed": "true"})
    return json_response(body, status)


@bp.post("")
@documented(
    "Record an observation (scan), optionally with its detections inline",
    request=ObservationIn,
    response=ObservationOut,
    status=201,
    headers=IDEMPOTENCY_HEADER,
    error_statuses=(401, 403, 404, 413, 415, 422),
)
@roles(*access.INGEST)
def create_observation() -> Response:
    data = parse_body(ObservationIn)
    config = settings()

    def produce(session: Any) -> tuple[int, dict[str, Any]]:
        observation, ids, candidate_ids = service.create_observation(
            session,
            current_actor(),
            data,
            config.clock_skew_allowance_s,
            config.max_batch_detections,
        )
        model = observation_model(observation, detection_ids=ids, candidate_ids=candidate_ids)
        return 201, model.model_dump(mode="json")

    return _idempotent(produce)


@bp.get("")
@documented("List observations", query=ObservationQuery, response=Page[ObservationOut])
@roles(*READ_ROLES)
def list_observations() -> Response:
    query = parse_query(ObservationQuery)
    with database().read() as session:
        rows = service.list_observations(
            session,
            query.after,
            query.limit + 1,
            query.site,
            query.target,
            query.start_from,
            query.start_to,
            query.cadence,
        )
        return json_response(page_of(rows, query.limit, observation_out))


@bp.get("/<int:observation_id>")
@documented("Get an observation", response=ObservationOut, error_statuses=(401, 403, 404))
@roles(*READ_ROLES)
def get_observation(observation_id: int) -> Response:
    with database().read() as session:
        return json_response(observation_out(service.get_observation(session, observation_id)))


@bp.get("/<int:observation_id>/detections")
@documented(
    "Page through an observation's detections",
    query=ListQuery,
    response=Page[DetectionOut],
    error_statuses=(401, 403, 404, 422),
)
@roles(*READ_ROLES)
def list_detections(observation_id: int) -> Response:
    query = parse_query(ListQuery)
    with database().read() as session:
        rows = service.list_detections(session, observation_id, query.after, query.limit + 1)
        return json_response(page_of(rows, query.limit, detection_out))


@bp.post("/<int:observation_id>/detections")
@documented(
    "Bulk ingest of up to 50,000 detections, all or nothing",
    request=DETECTION_BATCH,
    response=DetectionBatchOut,
    status=201,
    headers=IDEMPOTENCY_HEADER,
    error_statuses=(401, 403, 404, 413, 415, 422),
)
@roles(*access.INGEST)
def ingest_detections(observation_id: int) -> Response:
    batch = parse_body(DETECTION_BATCH)
    config = settings()

    def produce(session: Any) -> tuple[int, dict[str, Any]]:
        ids, candidate_ids = service.ingest_detections(
            session,
            current_actor(),
            observation_id,
            batch["detections"],
            config.max_batch_detections,
            body_sha256(),
            complete=batch.get("complete", False),
        )
        body = {
            "observation_id": observation_id,
            "count": len(ids),
            "ids": ids,
            "complete": batch.get("complete", False),
            "candidate_ids": candidate_ids,
        }
        return 201, body

    return _idempotent(produce)


@bp.post("/<int:observation_id>/complete")
@documented(
    "Mark a scan complete: every hit is in; its cadence is screened now",
    response=ObservationOut,
    headers=IDEMPOTENCY_HEADER,
    error_statuses=(401, 403, 404, 409),
)
@roles(*access.INGEST)
def complete_observation(observation_id: int) -> Response:
    def produce(session: Any) -> tuple[int, dict[str, Any]]:
        candidate_ids = service.complete_observation(session, current_actor(), observation_id)
        observation = service.get_observation(session, observation_id)
        return 200, observation_model(observation, candidate_ids=candidate_ids).model_dump(
            mode="json"
        )

    return _idempotent(produce)


@bp.get("/<int:observation_id>/screening")
@documented(
    "A scan's hits by screening outcome (reason codes and counts)",
    response=ScreeningCountsOut,
    error_statuses=(401, 403, 404),
)
@roles(*READ_ROLES)
def screening_counts(observation_id: int) -> Response:
    with database().read() as session:
        return json_response(service.screening_counts(session, observation_id))
