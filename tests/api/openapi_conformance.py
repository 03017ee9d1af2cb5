"""Check an answer against the response schema the service's own OpenAPI document gives for it.

Validation is by jsonschema-rs (an independent JSON Schema 2020-12 implementation, the dialect
OpenAPI 3.1 uses), not by the pydantic models that produced the document.
"""

from __future__ import annotations

from typing import Any

import jsonschema_rs


def documented_schema(document: dict[str, Any], method: str, path: str, status: int) -> Any:
    """The response schema of ``method path`` for ``status`` in ``document``."""
    response = document["paths"][path][method.lower()]["responses"][str(status)]
    media = response["content"]
    (content,) = media.values()
    return content["schema"]


def conformance_errors(
    document: dict[str, Any], method: str, path: str, status: int, body: Any
) -> list[str]:
    """Every way ``body`` breaks the documented schema (empty when it conforms)."""
    schema = {
        **documented_schema(document, method, path, status),
        "components": document["components"],
    }
    validator = jsonschema_rs.Draft202012Validator(schema)
    return [f"{list(e.instance_path)}: {e.message}" for e in validator.iter_errors(body)]
