"""Helpers shared by the API blueprints: body and query parsing, auth, pages, serialisation."""

from __future__ import annotations

import functools
import hashlib
from collections.abc import Callable
from typing import Any, TypeVar

from flask import Response, current_app, g, json, request
from pydantic import BaseModel, TypeAdapter, ValidationError

from confirm_service.actor import Actor
from confirm_service.api.problems import problem_response, validation_errors
from confirm_service.db import Database
from confirm_service.errors import ServiceError
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


def raw_json_body() -> bytes:
    """The request body, refused unless it is declared and is JSON."""
    if request.mimetype != "application/json":
        raise UnsupportedBody("Content-Type must be application/json")
    return request.get_data(cache=True)


def parse_body(schema: type[M] | TypeAdapter[M]) -> M:
    """Validate the JSON body against a pydantic model or adapter; 422 names each bad field."""
    raw = raw_json_body()
    adapter = schema if isinstance(schema, TypeAdapter) else None
    try:
        if adapter is not None:
            return adapter.validate_json(raw)
        return schema.model_validate_json(raw)  # type: ignore[union-attr]
    except ValidationError as exc:
        if any(e["type"] == "json_invalid" for e in exc.errors()):
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
                "the token is unknown or revoked",
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
