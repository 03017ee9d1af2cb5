"""Form handling shared by the pages: validate with the API's schema, report refused fields,
run one service call in one write transaction."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from flask import flash, redirect, request
from pydantic import BaseModel, ValidationError
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.errors import ServiceError
from confirm_service.web import auth
from confirm_service.web.blueprint import database


@dataclass
class FormProblem:
    """Why a form was refused: a message per field, messages for the form, what was typed."""

    form: str
    detail: str
    fields: dict[str, str] = field(default_factory=dict)
    general: list[str] = field(default_factory=list)
    values: dict[str, str] = field(default_factory=dict)

    def add(self, name: str, message: str, field_names: tuple[str, ...]) -> None:
        if name in field_names and name not in self.fields:
            self.fields[name] = message
        else:
            self.general.append(f"{name}: {message}" if name not in ("", "body") else message)


def typed(field_names: tuple[str, ...]) -> dict[str, str]:
    """The form's fields as typed, surrounding white space removed."""
    return {name: request.form.get(name, "").strip() for name in field_names}


def _message_of(error: Any) -> str:
    kind = error["type"]
    if kind in ("missing", "string_too_short"):
        return "is required"
    if kind == "string_too_long":
        return f"must be at most {error['ctx']['max_length']:,} characters"
    return str(error["msg"])


def validate(
    form: str,
    field_names: tuple[str, ...],
    schema: type[BaseModel],
    data: dict[str, Any],
    values: dict[str, str],
    refused: dict[str, str],
) -> BaseModel | FormProblem:
    """``data`` as ``schema``, or the problem naming each refused field (``refused`` too)."""
    problem = FormProblem(form, "", values=values)
    for name, message in refused.items():
        problem.add(name, message, field_names)
    try:
        parsed = schema.model_validate({k: v for k, v in data.items() if v not in ("", None)})
    except ValidationError as exc:
        for error in exc.errors(include_url=False):
            name = str(error["loc"][0]) if error["loc"] else "body"
            problem.add(name, _message_of(error), field_names)
        parsed = None
    if parsed is None or problem.fields or problem.general:
        count = len(problem.fields) + len(problem.general)
        problem.detail = f"{count} field(s) refused; nothing was written"
        return problem
    return parsed


def submit(
    form: str,
    field_names: tuple[str, ...],
    validated: BaseModel | FormProblem,
    act: Callable[[Session, Actor, Any], str],
    show_again: Callable[[FormProblem, int], Any],
    landing: str,
) -> Any:
    """Run ``act`` in one write transaction; on success flash its message and go to
    ``landing``; on refusal show the page again with the problem (nothing written)."""
    if isinstance(validated, FormProblem):
        return show_again(validated, 422)
    try:
        with database().write() as session:
            message = act(session, auth.current_actor(), validated)
    except ServiceError as exc:
        problem = FormProblem(form, f"{exc.detail}; nothing was written", values=typed(field_names))
        for name, text in exc.errors:
            problem.add(name, text, field_names)
        return show_again(problem, exc.status)
    flash(message, "success")
    return redirect(landing)
