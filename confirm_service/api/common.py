"""Helpers shared by the API blueprints: body and query parsing, auth, pages, serialisation."""

from __future__ import annotations

import functools
import hashlib
import re
from collections.abc import Callable
from json import loads as json_loads
from typing import Any, TypeVar

from flask import Response, current_app, g, json, request
from pydantic import BaseModel, TypeAdapter, ValidationError

from confirm_service.actor import Actor
from confirm_service.api.problems import problem_response, validation_errors
from confirm_service.db import Database
from confirm_service.errors import Invalid, ServiceError
from confirm_service.services import access, tokens

M = TypeVar("M")
F = TypeVar("F", bound=Callable[..., Any])


class UnsupportedBody(ServiceError):
    def __init__(self, detail: str) -> None:
        super().__init__(detail, [("body", detail)], 415, "Unsupported media type")


def database() -> Database:
    return current_app.extensions["confirm.db"]


def settings() -> Any:
    return current_app.extensions["confirm.settings"]


UTF8_NAMES = ("utf-8", "utf8")
MAX_JSON_DEPTH = 200
"""Nesting limit of pydantic-core's JSON parser (its recursion limit); no request schema comes
near it, so a deeper body is hostile and refused before anything else reads it."""
_SPACE_BEFORE_COLON = re.compile(rb'"\s+:')


class DuplicateKey(ValueError):
    """An object in the body names the same key twice."""


def raw_json_body() -> bytes:
    """The request body, refused unless it is declared as JSON in UTF-8 (RFC 8259 section 8.1)."""
    if request.mimetype != "application/json":
        raise UnsupportedBody("Content-Type must be application/json")
    charset = request.mimetype_params.get("charset")
    if charset is not None and charset.lower() not in UTF8_NAMES:
        raise UnsupportedBody(f"JSON is read as UTF-8 only, not {charset!r}")
    return request.get_data(cache=True)


def _refuse_pairs_twice(pairs: list[tuple[str, Any]]) -> None:
    if len(pairs) > 1 and len({key for key, _ in pairs}) != len(pairs):
        seen: set[str] = set()
        for key, _ in pairs:
            if key in seen:
                raise DuplicateKey(key)
            seen.add(key)


def _key_count(text: bytes) -> int | None:
    """Keys in a JSON text: each is a string followed by a colon. None when the text has
    escapes or spaces before colons, which make that count unsafe."""
    if b"\\" in text or _SPACE_BEFORE_COLON.search(text):
        return None
    return text.count(b'":')


def refuse_duplicate_keys(raw: bytes, serialised_again: bytes) -> None:
    """Raise :class:`DuplicateKey` if an object of ``raw`` repeats a key.

    JSON parsers keep the last of two equal keys silently, so a body could say two things. The
    fast path compares the number of keys in the body with that in the validated value written
    back (which keeps each given key once); only when they differ is the body parsed again in
    Python to find the repeated key.
    """
    count = _key_count(raw)
    if count is not None and count == _key_count(serialised_again):
        return
    json_loads(raw, object_pairs_hook=_refuse_pairs_twice)


def parse_body(schema: type[M] | TypeAdapter[M]) -> M:
    """Validate the JSON body against a pydantic model or adapter; 422 names each bad field."""
    raw = raw_json_body()
    adapter = schema if isinstance(schema, TypeAdapter) else None
    try:
        if adapter is not None:
            value = adapter.validate_json(raw)
            again = adapter.dump_json(value, exclude_unset=True, by_alias=True)
        else:
            value = schema.model_validate_json(raw)  # type: ignore[union-attr]
            again = value.model_dump_json(exclude_unset=True, by_alias=True).encode()
    except ValidationError as exc:
        invalid = [e["msg"] for e in exc.errors() if e["type"] == "json_invalid"]
        if any("recursion limit" in message for message in invalid):
            raise Invalid(
                "the body is nested too deeply",
                [("body", f"JSON nested deeper than {MAX_JSON_DEPTH} levels")],
            ) from None
        if invalid:
            raise UnsupportedBody("the body is not valid JSON") from None
        if any(e["type"] in ("model_type", "dict_type") and not e["loc"] for e in exc.errors()):
            raise ServiceError(
                "the body must be a JSON object",
                [("body", "must be a JSON object")],
                422,
                "Unprocessable content",
            ) from None
        errors = validation_errors(exc)
        raise ServiceError(
            f"{len(errors)} field(s) refused; nothing was written",
            errors,
            422,
            "Unprocessable content",
        ) from None
    try:
        refuse_duplicate_keys(raw, again)
    except DuplicateKey as exc:
        raise ServiceError(
            "the body names a key twice",
            [("body", f"duplicate key {exc.args[0]!r}")],
            422,
            "Unprocessable content",
        ) from None
    return value


def body_sha256() -> str:
    return hashlib.sha256(request.get_data(cache=True)).hexdigest()


def parse_query(model: type[BaseModel]) -> Any:
    try:
        return model.model_validate(request.args.to_dict())
    except ValidationError as exc:
        errors = validation_errors(exc)
        raise ServiceError(
            "query parameter(s) refused", errors, 422, "Unprocessable content"
        ) from None


def json_response(
    payload: Any, status: int = 200, headers: dict[str, str] | None = None
) -> Response:
    text = payload.model_dump_json() if isinstance(payload, BaseModel) else json.dumps(payload)
    response = Response(text, status=status, mimetype="application/json")
    for name, value in (headers or {}).items():
        response.headers[name] = value
    return response


def page_of(items: list[Any], limit: int, serialise: Callable[[Any], Any]) -> dict[str, Any]:
    """A page with ``next``: the same path and query with ``after`` set past the last item."""
    has_more = len(items) > limit
    shown = items[:limit]
    next_path = None
    if has_more:
        args = request.args.to_dict()
        args["after"] = str(shown[-1].id)
        args["limit"] = str(limit)
        query = "&".join(f"{k}={v}" for k, v in sorted(args.items()))
        next_path = f"{request.path}?{query}"
    return {"items": [serialise(item) for item in shown], "next": next_path}


def current_actor() -> Actor:
    return g.actor


def authenticate_request() -> Response | None:
    """Resolve the bearer token into ``g.actor``; answer 401 when it is missing or bad."""
    header = request.headers.get("Authorization", "")
    scheme, _, secret = header.partition(" ")
    challenge = {"WWW-Authenticate": 'Bearer realm="confirm-service"'}
    if scheme.lower() != "bearer" or not secret.strip():
        return problem_response(
            401,
            "Unauthorized",
            "send Authorization: Bearer <token>",
            [("Authorization", "missing bearer token")],
            challenge,
        )
    db = database()
    with db.read() as session:
        token = tokens.authenticate(session, secret.strip())
        if token is None:
            return problem_response(
                401,
                "Unauthorized",
                "the token is unknown, revoked or expired",
                [("Authorization", "invalid token")],
                challenge,
            )
        g.actor = Actor(
            name=token.name, role=token.role, token_id=token.id, site_code=token.site_code
        )
        g.token_site_code = token.site_code
        stale = tokens.needs_last_used_update(token)
        token_id = token.id
    if stale:
        with db.write() as session:
            tokens.touch(session, token_id)
    return None


def roles(*allowed: str) -> Callable[[F], F]:
    """Allow the wrapped view only to tokens of ``allowed`` roles (admin always allowed)."""

    def decorate(view: F) -> F:
        @functools.wraps(view)
        def wrapper(*args: Any, **kwargs: Any) -> Any:
            actor: Actor = g.actor
            if actor.role != "admin" and actor.role not in allowed:
                return problem_response(
                    403,
                    "Forbidden",
                    f"role {actor.role!r} may not do this",
                    [("Authorization", f"needs role {' or '.join(allowed)}")],
                )
            return view(*args, **kwargs)

        wrapper.allowed_roles = allowed  # type: ignore[attr-defined]
        return wrapper  # type: ignore[return-value]

    return decorate


READ_ROLES = access.READ
