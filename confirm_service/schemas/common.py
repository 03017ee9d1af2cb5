"""Shared pydantic types: finite numbers with units, pages, problem details (RFC 9457)."""

from __future__ import annotations

from datetime import datetime
from typing import Annotated, Generic, TypeVar

from pydantic import AwareDatetime, BaseModel, ConfigDict, Field, PlainSerializer

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


class StrictModel(BaseModel):
    """Request bodies: unknown fields are refused."""

    model_config = ConfigDict(extra="forbid")


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
