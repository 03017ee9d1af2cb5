"""Shared pydantic types: finite numbers with units, pages, problem details (RFC 9457)."""

from __future__ import annotations

from datetime import datetime
from typing import Annotated, Any, Generic, TypeVar

from pydantic import (
    AfterValidator,
    AwareDatetime,
    BaseModel,
    ConfigDict,
    Field,
    PlainSerializer,
    field_validator,
)

Finite = Annotated[float, Field(allow_inf_nan=False)]
Positive = Annotated[float, Field(gt=0, allow_inf_nan=False)]
NonNegative = Annotated[float, Field(ge=0, allow_inf_nan=False)]
Latitude = Annotated[float, Field(ge=-90, le=90, allow_inf_nan=False)]
Longitude = Annotated[float, Field(ge=-180, le=360, allow_inf_nan=False)]
RightAscension = Annotated[float, Field(ge=0, lt=360, allow_inf_nan=False)]
Declination = Annotated[float, Field(ge=-90, le=90, allow_inf_nan=False)]
Code = Annotated[str, Field(min_length=1, max_length=32, pattern=r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")]
Name = Annotated[str, Field(min_length=1, max_length=200)]
UtcIso = Annotated[
    datetime, PlainSerializer(lambda value: value.isoformat(), return_type=str, when_used="json")
]
"""A timezone-aware datetime, written as ISO 8601 with its offset."""

AwareTime = AwareDatetime


def refuse_nul(value: Any) -> Any:
    """Refuse a NUL character in a string, or in any string inside lists and mappings.

    PostgreSQL cannot store NUL in text and SQLite would store it silently; no name, code or note
    needs it. The one rule for every string of every request.
    """
    if isinstance(value, str):
        if "\x00" in value:
            raise ValueError("must not contain a NUL character")
    elif isinstance(value, list | tuple):
        for item in value:
            refuse_nul(item)
    elif isinstance(value, dict):
        for key, item in value.items():
            refuse_nul(key)
            refuse_nul(item)
    return value


NoNul = AfterValidator(refuse_nul)
"""The same rule for string fields outside a :class:`StrictModel` (TypedDict rows)."""


class StrictModel(BaseModel):
    """Request bodies and queries: unknown fields are refused, and no string holds NUL."""

    model_config = ConfigDict(extra="forbid")

    @field_validator("*", mode="after")
    @classmethod
    def _no_nul_character(cls, value: Any) -> Any:
        return refuse_nul(value)


class OutModel(BaseModel):
    model_config = ConfigDict(from_attributes=True)


T = TypeVar("T")


class Page(BaseModel, Generic[T]):
    """One page of a list; ``next`` is the path of the following page, or null at the end."""

    items: list[T]
    next: str | None


class FieldError(BaseModel):
    field: str
    message: str


class Problem(BaseModel):
    """An RFC 9457 problem-details document with the fields at fault."""

    type: str = "about:blank"
    title: str
    status: int
    detail: str | None = None
    errors: list[FieldError] = []
