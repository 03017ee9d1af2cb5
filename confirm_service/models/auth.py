"""API tokens and idempotency records."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, Integer, String, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column

from confirm_service.models.base import Base
from confirm_service.roles import ROLES
from confirm_service.timeutil import utc_now

__all__ = ["ROLES", "ApiToken", "IdempotencyRecord"]


class ApiToken(Base):
    """A bearer token. Only the SHA-256 of the secret is stored; the name is unique."""

    __tablename__ = "api_tokens"

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(200), unique=True)
    role: Mapped[str] = mapped_column(String(32))
    secret_sha256: Mapped[str] = mapped_column(String(64), unique=True)
    site_code: Mapped[str | None] = mapped_column(String(32))
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    last_used_at: Mapped[datetime | None]
    revoked_at: Mapped[datetime | None]
    expires_at: Mapped[datetime | None]


class IdempotencyRecord(Base):
    """The stored answer to a request sent with an ``Idempotency-Key`` header."""

    __tablename__ = "idempotency_records"
    __table_args__ = (UniqueConstraint("scope", "key"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    scope: Mapped[str] = mapped_column(String(200))
    key: Mapped[str] = mapped_column(String(200))
    request_sha256: Mapped[str] = mapped_column(String(64))
    status_code: Mapped[int] = mapped_column(Integer)
    response: Mapped[dict[str, Any]] = mapped_column(JSON)
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
