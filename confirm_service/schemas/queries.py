"""Query-string models of the list endpoints."""

from __future__ import annotations

from typing import Annotated

from pydantic import AwareDatetime, Field

from confirm_service.schemas.bounds import ROW_ID_MAX
from confirm_service.schemas.common import StrictModel

Limit = Annotated[int, Field(ge=1, le=1000, description="items per page, at most 1,000")]
After = Annotated[
    int, Field(ge=0, le=ROW_ID_MAX, description="cursor: return items with id greater than this")
]


class ListQuery(StrictModel):
    limit: Limit = 100
    after: After = 0


class ObservationQuery(ListQuery):
    site: str | None = None
    target: str | None = None
    start_from: AwareDatetime | None = Field(None, description="start >= this (ISO 8601, offset)")
    start_to: AwareDatetime | None = Field(None, description="start < this (ISO 8601, offset)")
    cadence: str | None = None


class CandidateQuery(ListQuery):
    state: str | None = None
    stage: str | None = None
    target: str | None = None
    site: str | None = None
    check_kind: str | None = None
    check_outcome: str | None = None
    q: Annotated[str, Field(max_length=200)] | None = Field(
        None, description="search: a candidate id, part of a target name, or a site code"
    )
    frequency_hz: Annotated[float, Field(gt=0, allow_inf_nan=False)] | None = Field(
        None, description="barycentric or any linked hit's frequency within tolerance_hz of this"
    )
    tolerance_hz: Annotated[float, Field(ge=0, le=1e9, allow_inf_nan=False)] = 1000.0
