"""People's accounts for the web pages: creation, password sign-in with lock-out, listing.

A person is bound to an API token row of their own whose secret is thrown away at creation, so
everything a person records names one token and one person, exactly as for a machine token.
After :data:`MAX_FAILED_SIGN_INS` wrong passwords in a row the account is locked for
:data:`LOCK_S` seconds; a correct password during the lock is refused too.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import timedelta

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import Conflict, Invalid, NotFound
from confirm_service.models import PERSON_ROLES, ApiToken, Person
from confirm_service.services import passwords, tokens
from confirm_service.timeutil import utc_now

MAX_FAILED_SIGN_INS = 5
LOCK_S = 15 * 60.0
USERNAME_PATTERN = "letters, digits, '.', '-' or '_', 2 to 64 characters"


def _username_problem(username: str) -> str | None:
    allowed = all(ch.isascii() and (ch.isalnum() or ch in "._-") for ch in username)
    if not allowed or not 2 <= len(username) <= 64:
        return f"use {USERNAME_PATTERN}"
    return None


def create_person(
    session: Session, actor: Actor, username: str, display_name: str, role: str, password: str
) -> Person:
    """A new account; refuses a taken name, an unknown role or a weak password."""
    errors = []
    if problem := _username_problem(username):
        errors.append(("username", problem))
    if role not in PERSON_ROLES:
        errors.append(("role", f"must be one of {', '.join(PERSON_ROLES)}"))
    if problem := passwords.password_problem(password, username):
        errors.append(("password", problem))
    if errors:
        raise Invalid("the account was refused", errors)
    if session.execute(select(Person.id).where(Person.username == username)).first():
        raise Conflict(f"user {username!r} exists", [("username", "this name is taken")])
    token, _secret = tokens.create_token(session, actor, username, role)
    person = Person(
        username=username,
        display_name=display_name.strip() or username,
        role=role,
        password_hash=passwords.hash_password(password),
        token_id=token.id,
    )
    session.add(person)
    session.flush()
    record(session, actor, "person.created", f"person:{username}", {"role": role})
    return person


@dataclass(frozen=True)
class SignInResult:
    """The actor on success; otherwise why not (``locked`` says the account is locked)."""

    actor: Actor | None
    locked: bool = False
    person_id: int | None = None


def sign_in(session: Session, username: str, password: str) -> SignInResult:
    """Check a name and password, counting failures and locking the account after too many."""
    person = session.execute(select(Person).where(Person.username == username)).scalar_one_or_none()
    if person is None or person.disabled_at is not None:
        passwords.spend_like_a_check(password)
        return SignInResult(None)
    now = utc_now()
    if person.locked_until is not None and person.locked_until > now:
        passwords.spend_like_a_check(password)
        return SignInResult(None, locked=True)
    if not passwords.verify_password(password, person.password_hash):
        person.failed_sign_ins += 1
        if person.failed_sign_ins >= MAX_FAILED_SIGN_INS:
            person.locked_until = now + timedelta(seconds=LOCK_S)
            person.failed_sign_ins = 0
            record(session, Actor(username, person.role), "person.locked", f"person:{username}", {})
            return SignInResult(None, locked=True)
        return SignInResult(None)
    person.failed_sign_ins = 0
    person.locked_until = None
    person.last_sign_in_at = now
    return SignInResult(actor_of(person), person_id=person.id)


def actor_of(person: Person) -> Actor:
    return Actor(name=person.username, role=person.role, token_id=person.token_id)


def active_actor(session: Session, person_id: int) -> Actor | None:
    """The actor of an account that may still act (not disabled, its token not revoked)."""
    person = session.get(Person, person_id)
    if person is None or person.disabled_at is not None:
        return None
    if live_token(session, person.token_id) is None:
        return None
    return actor_of(person)


def live_token(session: Session, token_id: int) -> ApiToken | None:
    """The token with this id unless it is revoked or expired."""
    token = session.get(ApiToken, token_id)
    return token if token is not None and tokens.is_live(token) else None


def list_people(session: Session) -> list[Person]:
    return list(session.execute(select(Person).order_by(Person.username)).scalars())


def _by_name(session: Session, username: str) -> Person:
    person = session.execute(select(Person).where(Person.username == username)).scalar_one_or_none()
    if person is None:
        raise NotFound(f"no user {username!r}", [("username", "no such user")])
    return person


def unlock(session: Session, actor: Actor, username: str) -> Person:
    person = _by_name(session, username)
    person.locked_until = None
    person.failed_sign_ins = 0
    record(session, actor, "person.unlocked", f"person:{username}", {})
    return person


def disable(session: Session, actor: Actor, username: str) -> Person:
    """Ends the account: no sign-in, and its open sessions end at their next request."""
    person = _by_name(session, username)
    if person.disabled_at is None:
        person.disabled_at = utc_now()
        tokens.revoke_token(session, actor, person.token_id)
        record(session, actor, "person.disabled", f"person:{username}", {})
    return person


def set_password(session: Session, actor: Actor, username: str, password: str) -> Person:
    person = _by_name(session, username)
    if problem := passwords.password_problem(password, username):
        raise Invalid("the password was refused", [("password", problem)])
    person.password_hash = passwords.hash_password(password)
    person.failed_sign_ins = 0
    person.locked_until = None
    record(session, actor, "person.password_changed", f"person:{username}", {})
    return person
