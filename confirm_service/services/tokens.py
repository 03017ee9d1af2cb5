"""API tokens: creation (the secret is shown once), lookup by hash, expiry, rotation, revocation.

A token's name is unique: it names one holder (a person or a pipeline), and idempotency records
and audit entries are kept per token.
"""

from __future__ import annotations

import hashlib
import hmac
import re
import secrets
from datetime import datetime, timedelta

from sqlalchemy import select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import Conflict, Invalid, NotFound
from confirm_service.models import ROLES, ApiToken, Site
from confirm_service.timeutil import iso_utc, parse_aware_time, utc_now

TOKEN_PREFIX = "cs1_"
LAST_USED_GRANULARITY = timedelta(seconds=60)
"""``last_used_at`` is written at most once a minute per token, so reads do not become writes."""

_LIFETIME = re.compile(r"^\s*(\d{1,6})\s*([mhdw])\s*$")
_LIFETIME_UNITS = {"m": "minutes", "h": "hours", "d": "days", "w": "weeks"}


def hash_secret(secret: str) -> str:
    """SHA-256 hex of a token; tokens carry 256 random bits, so no slow hash is needed."""
    return hashlib.sha256(secret.encode("utf-8")).hexdigest()


def _new_secret() -> tuple[str, str]:
    secret = TOKEN_PREFIX + secrets.token_urlsafe(32)
    return secret, hash_secret(secret)


def expiry_from(text: str, now: datetime | None = None) -> datetime:
    """``30d``, ``12h``, ``90m``, ``2w`` from ``now``, or an ISO 8601 time with a UTC offset."""
    now = now or utc_now()
    match = _LIFETIME.match(text)
    if match:
        amount, unit = int(match.group(1)), match.group(2)
        if amount == 0:
            raise Invalid("empty lifetime", [("expires", "must be longer than zero")])
        return now + timedelta(**{_LIFETIME_UNITS[unit]: amount})
    try:
        return parse_aware_time(text)
    except ValueError:
        raise Invalid(
            f"expiry {text!r} not understood",
            [("expires", "give a lifetime such as 30d, 12h, 90m, 2w, or an ISO time with offset")],
        ) from None


def is_live(token: ApiToken, now: datetime | None = None) -> bool:
    """Not revoked and not past its expiry."""
    if token.revoked_at is not None:
        return False
    return token.expires_at is None or (now or utc_now()) < token.expires_at


def state_of(token: ApiToken, now: datetime | None = None) -> str:
    """``live``, ``revoked`` or ``expired``."""
    if token.revoked_at is not None:
        return "revoked"
    return "live" if is_live(token, now) else "expired"


def _check_holder(session: Session, role: str, site_code: str | None) -> None:
    if role not in ROLES:
        raise Invalid("unknown role", [("role", f"must be one of {', '.join(ROLES)}")])
    if role == "site" and not site_code:
        raise Invalid("a site token needs its site", [("site", "required for role 'site'")])
    if role != "site" and site_code:
        raise Invalid("only site tokens name a site", [("site", "only for role 'site'")])
    if site_code and session.execute(select(Site.id).where(Site.code == site_code)).first() is None:
        raise NotFound(f"no site {site_code!r}", [("site", f"unknown site {site_code!r}")])


def _check_expiry(expires_at: datetime | None) -> None:
    if expires_at is not None and expires_at <= utc_now():
        raise Invalid("expiry in the past", [("expires", "must lie in the future")])


def create_token(
    session: Session,
    actor: Actor,
    name: str,
    role: str,
    site_code: str | None = None,
    expires_at: datetime | None = None,
) -> tuple[ApiToken, str]:
    """Create a token; return the row and the secret, which is never stored."""
    name = name.strip()
    if not name:
        raise Invalid("empty name", [("name", "must not be empty")])
    _check_holder(session, role, site_code)
    _check_expiry(expires_at)
    duplicate = Conflict(f"a token named {name!r} exists", [("name", "already used")])
    if session.execute(select(ApiToken.id).where(ApiToken.name == name)).first():
        raise duplicate
    secret, digest = _new_secret()
    token = ApiToken(
        name=name, role=role, secret_sha256=digest, site_code=site_code, expires_at=expires_at
    )
    session.add(token)
    try:
        with session.begin_nested():
            session.flush()
    except IntegrityError:
        raise duplicate from None
    payload = {"name": name, "role": role, "site": site_code}
    if expires_at is not None:
        payload["expires_at"] = iso_utc(expires_at)
    record(session, actor, "token.created", f"token:{token.id}", payload)
    return token, secret


def authenticate(session: Session, secret: str) -> ApiToken | None:
    """The live token whose secret is ``secret``, or None."""
    digest = hash_secret(secret)
    token = session.execute(
        select(ApiToken).where(ApiToken.secret_sha256 == digest)
    ).scalar_one_or_none()
    if token is None or not hmac.compare_digest(token.secret_sha256, digest):
        return None
    return token if is_live(token) else None


def token_by_name(session: Session, name: str) -> ApiToken:
    token = session.execute(select(ApiToken).where(ApiToken.name == name)).scalar_one_or_none()
    if token is None:
        raise NotFound(f"no token named {name!r}", [("name", "no such token")])
    return token


def rotate_token(
    session: Session, actor: Actor, name: str, expires_at: datetime | None = None
) -> tuple[ApiToken, str]:
    """Give the token ``name`` a new secret (the old one stops working at once); keep its id,
    role and site. ``expires_at`` replaces the expiry when given."""
    token = token_by_name(session, name)
    if token.revoked_at is not None:
        raise Conflict(f"token {name!r} is revoked", [("name", "revoked tokens stay revoked")])
    _check_expiry(expires_at)
    secret, token.secret_sha256 = _new_secret()
    if expires_at is not None:
        token.expires_at = expires_at
    session.flush()
    payload = {"name": token.name}
    if token.expires_at is not None:
        payload["expires_at"] = iso_utc(token.expires_at)
    record(session, actor, "token.rotated", f"token:{token.id}", payload)
    return token, secret


def needs_last_used_update(token: ApiToken, now: datetime | None = None) -> bool:
    now = now or utc_now()
    return token.last_used_at is None or now - token.last_used_at >= LAST_USED_GRANULARITY


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
