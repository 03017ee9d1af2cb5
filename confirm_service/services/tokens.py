"""API tokens: creation (the secret is shown once), lookup by hash, revocation."""

from __future__ import annotations

import hashlib
import secrets
from datetime import timedelta

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import Invalid, NotFound
from confirm_service.models import ROLES, ApiToken
from confirm_service.timeutil import utc_now

TOKEN_PREFIX = "cs1_"
LAST_USED_GRANULARITY = timedelta(seconds=60)


def hash_secret(secret: str) -> str:
    """SHA-256 hex of a token; tokens carry 256 random bits, so no slow hash is needed."""
    return hashlib.sha256(secret.encode("utf-8")).hexdigest()


def create_token(
    session: Session, actor: Actor, name: str, role: str, site_code: str | None = None
) -> tuple[ApiToken, str]:
    """Create a token; return the row and the secret, which is never stored."""
    if role not in ROLES:
        raise Invalid("unknown role", [("role", f"must be one of {', '.join(ROLES)}")])
    if not name.strip():
        raise Invalid("empty name", [("name", "must not be empty")])
    secret = TOKEN_PREFIX + secrets.token_urlsafe(32)
    token = ApiToken(name=name, role=role, secret_sha256=hash_secret(secret), site_code=site_code)
    session.add(token)
    session.flush()
    record(session, actor, "token.created", f"token:{token.id}", {"name": name, "role": role})
    return token, secret


def authenticate(session: Session, secret: str) -> ApiToken | None:
    """The live token whose secret is ``secret``, or None."""
    token = session.execute(
        select(ApiToken).where(ApiToken.secret_sha256 == hash_secret(secret))
    ).scalar_one_or_none()
    if token is None or token.revoked_at is not None:
        return None
    return token


def needs_last_used_update(token: ApiToken) -> bool:
    return token.last_used_at is None or utc_now() - token.last_used_at > LAST_USED_GRANULARITY


def touch(session: Session, token_id: int) -> None:
    token = session.get(ApiToken, token_id)
    if token is not None:
        token.last_used_at = utc_now()


def list_tokens(session: Session) -> list[ApiToken]:
    return list(session.execute(select(ApiToken).order_by(ApiToken.id)).scalars())


def revoke_token(session: Session, actor: Actor, token_id: int) -> ApiToken:
    token = session.get(ApiToken, token_id)
    if token is None:
        raise NotFound(f"no token {token_id}", [("id", "no such token")])
    if token.revoked_at is None:
        token.revoked_at = utc_now()
        record(session, actor, "token.revoked", f"token:{token.id}", {"name": token.name})
    return token
