"""The audit log over HTTP: signed checkpoints, inclusion and consistency proofs, the key."""

from __future__ import annotations

from flask import Blueprint, Response, request

from confirm_service.api.common import (
    READ_ROLES,
    database,
    json_response,
    page_of,
    parse_body,
    parse_query,
    roles,
    settings,
)
from confirm_service.api.spec import documented
from confirm_service.audit import checkpoints, proofs
from confirm_service.errors import NotFound
from confirm_service.models import AuditCheckpoint
from confirm_service.schemas.audit import (
    CheckpointIn,
    CheckpointOut,
    ConsistencyProofOut,
    ConsistencyQuery,
    EntryProofQuery,
    InclusionProofOut,
    PublicKeyOut,
)
from confirm_service.schemas.common import Page
from confirm_service.schemas.queries import ListQuery
from confirm_service.services import access

bp = Blueprint("audit", __name__, url_prefix="/api/v1/audit")


def _checkpoint_out(row: AuditCheckpoint) -> dict:
    document = checkpoints.checkpoint_document(row)
    return CheckpointOut.model_validate(document).model_dump(mode="json")


@bp.get("/checkpoints")
@documented(
    "List signed checkpoints in the order they were taken",
    query=ListQuery,
    response=Page[CheckpointOut],
    tag="audit",
)
@roles(*READ_ROLES)
def list_checkpoints() -> Response:
    query = parse_query(ListQuery)
    with database().read() as session:
        rows = checkpoints.list_checkpoints(session, query.after, query.limit + 1)
        return json_response(page_of(rows, query.limit, _checkpoint_out))


@bp.get("/checkpoints/latest")
@documented(
    "The checkpoint of the largest tree",
    response=CheckpointOut,
    error_statuses=(401, 403, 404),
    tag="audit",
)
@roles(*READ_ROLES)
def latest_checkpoint() -> Response:
    with database().read() as session:
        row = checkpoints.latest_checkpoint(session)
        if row is None:
            raise NotFound("no checkpoint has been taken yet")
        return json_response(_checkpoint_out(row))


@bp.post("/checkpoints")
@documented(
    "Sign a checkpoint of the whole current tree",
    request=CheckpointIn,
    response=CheckpointOut,
    status=201,
    error_statuses=(401, 403, 409, 415, 422),
    tag="audit",
)
@roles(*access.CHECKPOINT)
def take_checkpoint() -> Response:
    data = parse_body(CheckpointIn) if request.content_length else CheckpointIn()
    with database().write() as session:
        row = checkpoints.take_checkpoint(session, settings(), data.reason)
        body = _checkpoint_out(row)
    return json_response(body, 201)


@bp.get("/entries/<int:seq>")
@documented(
    "An audit entry and its inclusion proof against a signed checkpoint",
    query=EntryProofQuery,
    response=InclusionProofOut,
    error_statuses=(401, 403, 404, 409, 422),
    tag="audit",
)
@roles(*READ_ROLES)
def entry_with_proof(seq: int) -> Response:
    query = parse_query(EntryProofQuery)
    with database().read() as session:
        proof = proofs.prove_inclusion(session, seq, query.tree_size)
    return json_response(InclusionProofOut.model_validate(proof.to_dict()))


@bp.get("/consistency")
@documented(
    "Consistency proof between two signed checkpoints",
    query=ConsistencyQuery,
    response=ConsistencyProofOut,
    error_statuses=(401, 403, 404, 409, 422),
    tag="audit",
)
@roles(*READ_ROLES)
def consistency() -> Response:
    query = parse_query(ConsistencyQuery)
    with database().read() as session:
        proof = proofs.prove_consistency(session, query.old, query.new)
    return json_response(ConsistencyProofOut.model_validate(proof.to_dict()))


@bp.get("/public-key")
@documented(
    "The Ed25519 public key that signs checkpoints",
    response=PublicKeyOut,
    error_statuses=(401, 403),
    tag="audit",
)
@roles(*READ_ROLES)
def public_key() -> Response:
    config = settings()
    pem, identifier = checkpoints.service_public_key(config)
    body = PublicKeyOut(key_id=identifier, public_key_pem=pem, origin=config.service_origin)
    return json_response(body)
