"""Idempotency keys: a retried request returns the first answer and writes nothing new."""

from __future__ import annotations

from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.errors import ServiceError
from confirm_service.models import IdempotencyRecord


class KeyReused(ServiceError):
    def __init__(self) -> None:
        super().__init__(
            "this Idempotency-Key was used with a different request body",
            [("Idempotency-Key", "already used for a different request")],
            422,
            "Unprocessable content",
        )


def stored_answer(
    session: Session, scope: str, key: str, request_sha256: str
) -> tuple[int, dict[str, Any]] | None:
    """The stored (status, body) for this key, or None when the key is new."""
    found = session.execute(
        select(IdempotencyRecord).where(
            IdempotencyRecord.scope == scope, IdempotencyRecord.key == key
        )
    ).scalar_one_or_none()
    if found is None:
        return None
    if found.request_sha256 != request_sha256:
        raise KeyReused()
    return found.status_code, found.response


def remember_answer(
    session: Session,
    scope: str,
    key: str,
    request_sha256: str,
    status_code: int,
    body: dict[str, Any],
) -> None:
    session.add(
        IdempotencyRecord(
            scope=scope,
            key=key,
            request_sha256=request_sha256,
            status_code=status_code,
            response=body,
        )
    )
