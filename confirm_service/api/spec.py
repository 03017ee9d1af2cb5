"""The OpenAPI 3.1 document, generated from the routes and their pydantic models.

Each view carries its description through :func:`documented`; :func:`build_openapi` walks the
Flask URL map, so a route cannot exist without appearing in the document.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, TypeVar

from flask import Flask
from pydantic import BaseModel, TypeAdapter
from pydantic.json_schema import models_json_schema

from confirm_service.schemas.common import Problem

F = TypeVar("F", bound=Callable[..., Any])
REF_TEMPLATE = "#/components/schemas/{model}"


@dataclass
class Operation:
    summary: str
    request: Any = None
    response: Any = None
    query: type[BaseModel] | None = None
    status: int = 200
    headers: dict[str, str] = field(default_factory=dict)
    tag: str = "log"
    error_statuses: tuple[int, ...] = (401, 403, 422)


def documented(summary: str, **kwargs: Any) -> Callable[[F], F]:
    def decorate(view: F) -> F:
        operations: dict[str, Operation] = getattr(view, "openapi_operations", {})
        methods = kwargs.pop("methods", None)
        for method in methods or ("*",):
            operations[method] = Operation(summary=summary, **kwargs)
        view.openapi_operations = operations  # type: ignore[attr-defined]
        return view

    return decorate


def _schema_of(kind: Any, definitions: dict[str, Any]) -> dict[str, Any]:
    if isinstance(kind, type) and issubclass(kind, BaseModel):
        refs, top = models_json_schema([(kind, "serialization")], ref_template=REF_TEMPLATE)
        definitions.update(top.get("$defs", {}))
        return dict(refs[(kind, "serialization")])
    adapter = kind if isinstance(kind, TypeAdapter) else TypeAdapter(kind)
    schema = adapter.json_schema(ref_template=REF_TEMPLATE)
    definitions.update(schema.pop("$defs", {}))
    name = getattr(getattr(adapter, "_type", None), "__name__", None)
    if name and schema.get("type") == "object":
        definitions[name] = schema
        return {"$ref": REF_TEMPLATE.format(model=name)}
    return schema


def _path_of(rule: str) -> tuple[str, list[dict[str, Any]]]:
    parameters = []
    for converter, name in re.findall(r"<(?:(\w+):)?(\w+)>", rule):
        kind = {"int": "integer", "float": "number"}.get(converter or "", "string")
        parameters.append({"name": name, "in": "path", "required": True, "schema": {"type": kind}})
    return re.sub(r"<(?:\w+:)?(\w+)>", r"{\1}", rule), parameters


def _query_parameters(model: type[BaseModel]) -> list[dict[str, Any]]:
    schema = model.model_json_schema()
    required = set(schema.get("required", []))
    return [
        {"name": name, "in": "query", "required": name in required, "schema": prop}
        for name, prop in schema.get("properties", {}).items()
    ]


def _statuses_any_request_may_get(rule: str, op: Operation, has_path_parameters: bool) -> set[int]:
    """Refusals that follow from the shape of an operation rather than from its logic: no
    token (401), an id that names nothing or is not an id (404), a body that is too large, not
    JSON or invalid (413, 415, 422), a query that is invalid (422), and a database that does not
    answer (503, with ``Retry-After``)."""
    statuses = {503}
    if rule.startswith("/api/"):
        statuses.add(401)
    if has_path_parameters:
        statuses.add(404)
    if op.request is not None:
        statuses |= {413, 415, 422}
    if op.query is not None:
        statuses.add(422)
    return statuses


def build_openapi(app: Flask, version: str) -> dict[str, Any]:
    definitions: dict[str, Any] = {}
    problem_ref = _schema_of(Problem, definitions)
    paths: dict[str, Any] = {}
    for rule in sorted(app.url_map.iter_rules(), key=lambda r: r.rule):
        view = app.view_functions[rule.endpoint]
        operations: dict[str, Operation] | None = getattr(view, "openapi_operations", None)
        if operations is None:
            continue
        path, path_parameters = _path_of(rule.rule)
        for method in sorted((rule.methods or set()) - {"HEAD", "OPTIONS"}):
            op = operations.get(method) or operations.get("*")
            if op is None:
                continue
            entry: dict[str, Any] = {"summary": op.summary, "tags": [op.tag]}
            parameters = list(path_parameters)
            if op.query is not None:
                parameters += _query_parameters(op.query)
            for name, description in op.headers.items():
                parameters.append(
                    {
                        "name": name,
                        "in": "header",
                        "required": False,
                        "description": description,
                        "schema": {"type": "string"},
                    }
                )
            if parameters:
                entry["parameters"] = parameters
            if op.request is not None:
                entry["requestBody"] = {
                    "required": True,
                    "content": {
                        "application/json": {"schema": _schema_of(op.request, definitions)}
                    },
                }
            responses: dict[str, Any] = {}
            ok: dict[str, Any] = {"description": "success"}
            if op.response is not None:
                ok["content"] = {
                    "application/json": {"schema": _schema_of(op.response, definitions)}
                }
            responses[str(op.status)] = ok
            for status in sorted(
                set(op.error_statuses)
                | _statuses_any_request_may_get(rule.rule, op, bool(path_parameters))
            ):
                responses[str(status)] = {
                    "description": "problem details (RFC 9457)",
                    "content": {"application/problem+json": {"schema": problem_ref}},
                }
            entry["responses"] = responses
            if rule.rule.startswith("/api/"):
                entry["security"] = [{"bearer": []}]
            paths.setdefault(path, {})[method.lower()] = entry
    return {
        "openapi": "3.1.0",
        "info": {"title": "confirm-service", "version": version},
        "paths": paths,
        "components": {
            "schemas": definitions,
            "securitySchemes": {"bearer": {"type": "http", "scheme": "bearer"}},
        },
    }
