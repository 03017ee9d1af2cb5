"""Signed checkpoints of the stored audit tree.

A checkpoint row holds what :class:`~confirm_service.audit.signing.Checkpoint` signs: origin,
tree size, root, timestamp (``at``, signed to the microsecond) and key id, plus the signature and
a short reason. :func:`take_checkpoint` refuses to sign a tree that does not extend the latest
checkpoint, so a rewritten history never gets a fresh signature from the service.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey
from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.audit import store
from confirm_service.audit.merkle import EMPTY_ROOT, MerkleAccumulator
from confirm_service.audit.signing import (
    Checkpoint,
    generate_key,
    key_id,
    load_private_key,
    public_key_pem,
    sign_checkpoint,
    utc_timestamp,
)
from confirm_service.config import ConfigError, Settings
from confirm_service.errors import Invalid
from confirm_service.models import AuditCheckpoint
from confirm_service.timeutil import utc_now

TIMESTAMP_PRECISION = "microseconds"
"""``timespec`` of the signed timestamp; the stored ``at`` keeps microseconds on both backends."""

MAX_REASON_CHARS = 64
SIGNATURE_ALGORITHM = "Ed25519"


WHERE_THE_KEY_IS = (
    "set CONFIRM_INSTANCE_PATH (or CONFIRM_SIGNING_KEY_FILE) to the instance that holds it"
)


def signing_key(settings: Settings) -> Ed25519PrivateKey:
    """The instance's checkpoint key. Only set-up creates one (:func:`set_up_signing_key`): a key
    made on the fly by a command run from another folder would sign checkpoints the log's
    verifiers cannot check."""
    path = settings.resolved_signing_key_file()
    try:
        return load_private_key(path)
    except FileNotFoundError:
        raise ConfigError(
            f"no audit signing key at {path}: {WHERE_THE_KEY_IS}; "
            "a new instance is set up by `confirm-service db upgrade`"
        ) from None
    except ValueError as exc:
        raise ConfigError(f"audit signing key {path} unusable: {exc}") from None


def set_up_signing_key(
    session: Session, settings: Settings, replacing: bool = False
) -> tuple[Path, bool]:
    """Set-up only: create the instance's key (mode 0600) if it has none.

    Returns ``(path, created)``. Unless ``replacing`` (a deliberate key rotation, see
    docs/operations.md), refuses (:class:`ConfigError`) when the key is missing but the log
    already has checkpoints: they were signed by a key kept elsewhere, and a new one would make
    the log unverifiable.
    """
    path = settings.resolved_signing_key_file()
    if path.exists():
        return path, False
    previous = latest_checkpoint(session)
    if previous is not None and not replacing:
        raise ConfigError(
            f"no audit signing key at {path}, and this log's checkpoints are signed by key "
            f"{previous.key_id}: {WHERE_THE_KEY_IS}"
        )
    try:
        generate_key(path)
    except FileExistsError:  # another set-up created it meanwhile
        return path, False
    return path, True


def service_public_key(settings: Settings) -> tuple[str, str]:
    """``(public key PEM, key id)`` of the instance's checkpoint key."""
    key = signing_key(settings)
    return public_key_pem(key), key_id(key)


def as_checkpoint(row: AuditCheckpoint) -> Checkpoint:
    """The signed statement a row holds; raises :class:`ValueError` if a field is malformed."""
    return Checkpoint(
        origin=row.origin,
        tree_size=int(row.tree_size),
        root_hash_hex=row.root_hash,
        timestamp=utc_timestamp(row.at, TIMESTAMP_PRECISION),
        key_id=row.key_id,
    )


def checkpoint_document(row: AuditCheckpoint) -> dict[str, Any]:
    """JSON-ready checkpoint with the exact signed text, for partners who verify offline."""
    try:
        signed_text = as_checkpoint(row).signed_bytes().decode("utf-8")
    except ValueError:
        signed_text = None
    return {
        "id": row.id,
        "origin": row.origin,
        "tree_size": int(row.tree_size),
        "root_hash_hex": row.root_hash,
        "timestamp": utc_timestamp(row.at, TIMESTAMP_PRECISION),
        "key_id": row.key_id,
        "signature_algorithm": SIGNATURE_ALGORITHM,
        "signature_b64": row.signature,
        "signed_text": signed_text,
        "reason": row.reason,
    }


def latest_checkpoint(session: Session) -> AuditCheckpoint | None:
    """The checkpoint of the largest tree; the most recent one among equals."""
    statement = (
        select(AuditCheckpoint)
        .order_by(AuditCheckpoint.tree_size.desc(), AuditCheckpoint.id.desc())
        .limit(1)
    )
    return session.execute(statement).scalar_one_or_none()


def checkpoint_at_size(session: Session, tree_size: int) -> AuditCheckpoint | None:
    """The most recent checkpoint of exactly ``tree_size`` entries, or None."""
    statement = (
        select(AuditCheckpoint)
        .where(AuditCheckpoint.tree_size == tree_size)
        .order_by(AuditCheckpoint.id.desc())
        .limit(1)
    )
    return session.execute(statement).scalar_one_or_none()


def list_checkpoints(session: Session, after_id: int, limit: int) -> list[AuditCheckpoint]:
    """Checkpoints with ``id > after_id`` in the order they were taken, at most ``limit``."""
    statement = (
        select(AuditCheckpoint)
        .where(AuditCheckpoint.id > after_id)
        .order_by(AuditCheckpoint.id)
        .limit(limit)
    )
    return list(session.execute(statement).scalars())


def take_checkpoint(session: Session, settings: Settings, reason: str) -> AuditCheckpoint:
    """Sign the root of the whole current tree, computed from the stored leaf hashes, and store it.

    Raises :class:`~confirm_service.audit.store.LogDamaged` (HTTP 409) when the stored entries do
    not form entries 1..``audit_head.size`` or do not extend the latest checkpoint.
    """
    reason = _checked_reason(reason)
    size = store.head_size(session)
    if size is None:
        raise store.LogDamaged("the audit_head row is missing")
    previous = latest_checkpoint(session)
    root = _root_extending(session, size, previous)
    key = signing_key(settings)
    moment = utc_now()  # stored to the microsecond, so the signed text is rebuilt exactly
    statement = Checkpoint(
        origin=settings.service_origin,
        tree_size=size,
        root_hash_hex=root.hex(),
        timestamp=utc_timestamp(moment, TIMESTAMP_PRECISION),
        key_id=key_id(key),
    )
    row = AuditCheckpoint(
        tree_size=statement.tree_size,
        root_hash=statement.root_hash_hex,
        at=moment,
        origin=statement.origin,
        key_id=statement.key_id,
        signature=sign_checkpoint(key, statement),
        reason=reason,
    )
    session.add(row)
    session.flush()
    return row


def _root_extending(session: Session, size: int, previous: AuditCheckpoint | None) -> bytes:
    """Root of entries 1..size; checks on the way that entries 1..previous keep their root."""
    if previous is not None and previous.tree_size > size:
        raise store.LogDamaged(
            f"checkpoint {previous.id} covers {previous.tree_size} entries, "
            f"audit_head counts {size}"
        )
    accumulator = MerkleAccumulator()
    if previous is not None and previous.tree_size == 0:
        _require_previous_root(previous, EMPTY_ROOT)
    for hashed in store.contiguous_leaf_hashes(session, size):
        accumulator.append(hashed)
        if previous is not None and accumulator.size == previous.tree_size:
            _require_previous_root(previous, accumulator.root())
    return accumulator.root()


def _require_previous_root(previous: AuditCheckpoint, root: bytes) -> None:
    if previous.root_hash != root.hex():
        raise store.LogDamaged(
            f"entries 1..{previous.tree_size} no longer have the root of checkpoint {previous.id}"
        )


def _checked_reason(reason: str) -> str:
    reason = reason.strip()
    if not 1 <= len(reason) <= MAX_REASON_CHARS:
        raise Invalid(
            "checkpoint reason refused",
            [("reason", f"must be 1-{MAX_REASON_CHARS} characters")],
        )
    return reason
