"""Dashboard sign-in: a person's name and password, or (for machines and scripts) an API token.

The signed session cookie keeps only the account's or the token's id, never a secret, and is
checked against the database on every request, so a disabled account or a revoked token ends
its sessions at once. The cookie is HttpOnly, SameSite=Lax, limited to ``/dashboard``, and
Secure except over plain HTTP to a loopback address (development and the demo). Every POST
carries a per-session CSRF token. Wrong passwords lock an account (see services.people).
"""

from __future__ import annotations

import functools
import hmac
import os
import secrets
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

from flask import Flask, abort, current_app, g, request, session
from flask.sessions import SecureCookieSessionInterface

from confirm_service.actor import Actor
from confirm_service.config import ConfigError, Settings
from confirm_service.db import Database
from confirm_service.services import access, people, tokens

F = TypeVar("F", bound=Callable[..., Any])

SECRET_KEY_FILE = "dashboard-secret-key"
MIN_SECRET_KEY_CHARS = 32
SESSION_MAX_AGE_S = 12 * 3600.0
"""A dashboard session ends 12 hours after sign-in, whatever the browser keeps."""

TOKEN_ID_KEY = "token_id"
PERSON_ID_KEY = "person_id"
LOOPBACK_HOSTS = ("localhost", "127.0.0.1", "[::1]")
SIGNED_IN_AT_KEY = "signed_in_unix_s"
CSRF_KEY = "csrf"
CSRF_FIELD = "csrf_token"

READ_ROLES = access.READ
SIGNOFF_ROLES = access.SIGNOFF
COMMENT_ROLES = access.COMMENT
DECISION_ROLES = access.DECIDE
HOLD_ROLES = access.RELEASE_HOLD
REOPEN_ROLES = access.REOPEN


# --- the key that signs session cookies ------------------------------------------------------


def _stored_secret_key(instance_path: Path) -> str:
    """The key in the instance folder, created once (atomically, safe across workers)."""
    path = instance_path / SECRET_KEY_FILE
    if not path.exists():
        instance_path.mkdir(parents=True, exist_ok=True)
        draft = instance_path / f".{SECRET_KEY_FILE}.{os.getpid()}.{secrets.token_hex(4)}"
        descriptor = os.open(draft, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(descriptor, "w", encoding="ascii") as handle:
            handle.write(secrets.token_urlsafe(48))
        try:
            os.link(draft, path)  # fails if another worker was first: then use theirs
        except FileExistsError:
            pass
        finally:
            draft.unlink()
    key = path.read_text(encoding="ascii").strip()
    if len(key) < MIN_SECRET_KEY_CHARS:
        raise ConfigError(f"{path}: the dashboard secret key is shorter than 32 characters")
    return key


def secret_key_for(settings: Settings) -> str:
    """``settings.secret_key`` (CONFIRM_SECRET_KEY) if set, else the instance folder's key."""
    configured = str(getattr(settings, "secret_key", "") or "")
    if configured:
        if len(configured) < MIN_SECRET_KEY_CHARS:
            raise ConfigError("secret_key must be at least 32 characters long")
        return configured
    return _stored_secret_key(settings.instance_path)


class DashboardSessions(SecureCookieSessionInterface):
    """Flask's signed-cookie sessions, Secure unless served over plain HTTP to loopback."""

    def get_cookie_secure(self, app: Flask) -> bool:
        host = request.host.rsplit(":", 1)[0] if not request.host.endswith("]") else request.host
        return request.is_secure or host not in LOOPBACK_HOSTS


def configure_app(app: Flask) -> None:
    """Give ``app`` a session-signing key and strict session-cookie settings (once)."""
    app.session_interface = DashboardSessions()
    if not app.secret_key:
        app.secret_key = secret_key_for(app.extensions["confirm.settings"])
    if app.config.get("SESSION_COOKIE_SAMESITE") is None:
        app.config["SESSION_COOKIE_SAMESITE"] = "Lax"
    if app.config.get("SESSION_COOKIE_PATH") is None:
        app.config["SESSION_COOKIE_PATH"] = "/dashboard"  # never sent to the API
    app.config["SESSION_COOKIE_HTTPONLY"] = True


# --- CSRF ------------------------------------------------------------------------------------


def csrf_token() -> str:
    """This session's CSRF token, created on first use."""
    token = session.get(CSRF_KEY)
    if not isinstance(token, str) or not token:
        token = session[CSRF_KEY] = secrets.token_urlsafe(32)
    return token


def check_csrf() -> None:
    """Refuse (400) a form whose hidden CSRF field is missing or differs from the session's."""
    expected = session.get(CSRF_KEY)
    sent = request.form.get(CSRF_FIELD, "")
    if not isinstance(expected, str) or not expected or not sent:
        abort(400, description="the form's security token is missing; reload the page")
    if not hmac.compare_digest(expected.encode(), sent.encode()):
        abort(400, description="the form's security token does not match; reload the page")


# --- sessions --------------------------------------------------------------------------------


def _database() -> Database:
    return current_app.extensions["confirm.db"]


def _start_session(key: str, value: int) -> None:
    session.clear()  # a new session id-space: nothing from before sign-in survives
    session[key] = value
    session[SIGNED_IN_AT_KEY] = time.time()
    csrf_token()


def sign_in(secret: str) -> Actor | None:
    """Check a pasted token; on success start a fresh session for it and return its actor."""
    secret = secret.strip()
    if not secret:
        return None
    with _database().read() as db_session:
        token = tokens.authenticate(db_session, secret)
        if token is None:
            return None
        actor = Actor(name=token.name, role=token.role, token_id=token.id)
    _start_session(TOKEN_ID_KEY, token.id)
    return actor


def sign_in_person(username: str, password: str) -> people.SignInResult:
    """Check a name and password (counting failures); on success start a fresh session."""
    with _database().write() as db_session:
        result = people.sign_in(db_session, username.strip(), password)
    if result.actor is not None and result.person_id is not None:
        _start_session(PERSON_ID_KEY, result.person_id)
    return result


def sign_out() -> None:
    session.clear()


def _forget_token() -> None:
    for key in (TOKEN_ID_KEY, PERSON_ID_KEY, SIGNED_IN_AT_KEY):
        session.pop(key, None)


def _session_is_fresh() -> bool:
    started = session.get(SIGNED_IN_AT_KEY)
    if not isinstance(started, int | float):
        return False
    return 0.0 <= time.time() - started <= SESSION_MAX_AGE_S


def load_signed_in_actor() -> Actor | None:
    """The actor of this session, in ``g.actor``; None if signed out, disabled or revoked."""
    person_id = session.get(PERSON_ID_KEY)
    if isinstance(person_id, int) and _session_is_fresh():
        with _database().read() as db_session:
            actor = people.active_actor(db_session, person_id)
        if actor is None:
            _forget_token()
            return None
        g.actor = actor
        return actor
    token_id = session.get(TOKEN_ID_KEY)
    if not isinstance(token_id, int) or not _session_is_fresh():
        _forget_token()
        return None
    database = _database()
    with database.read() as db_session:
        token = people.live_token(db_session, token_id)
        if token is None:
            _forget_token()
            return None
        actor = Actor(name=token.name, role=token.role, token_id=token.id)
        stale = tokens.needs_last_used_update(token)
    if stale:
        with database.write() as db_session:
            tokens.touch(db_session, token_id)
    g.actor = actor
    return actor


def current_actor() -> Actor:
    return g.actor


def may(actor: Actor, allowed: tuple[str, ...]) -> bool:
    """Whether ``actor`` has one of the ``allowed`` roles (admin always may)."""
    return actor.role == "admin" or actor.role in allowed


def requires_role(*allowed: str) -> Callable[[F], F]:
    """Answer 403 (an HTML page) unless the signed-in token has one of ``allowed`` roles."""

    def decorate(view: F) -> F:
        @functools.wraps(view)
        def wrapper(*args: Any, **kwargs: Any) -> Any:
            if not may(current_actor(), allowed):
                abort(403, description=f"role {current_actor().role!r} may not do this")
            return view(*args, **kwargs)

        wrapper.allowed_roles = allowed  # type: ignore[attr-defined]
        return wrapper  # type: ignore[return-value]

    return decorate


def safe_next(target: str | None) -> str | None:
    """``target`` if it is a path inside the dashboard (no open redirects), else None."""
    if not target or not target.startswith("/dashboard") or target.startswith("//"):
        return None
    if "\\" in target or any(ord(ch) < 32 for ch in target):
        return None
    return target
