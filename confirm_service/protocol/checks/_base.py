"""Shared pieces of the protocol schema: strict pydantic base and unit-carrying field types.

Protocol files are typed TOML: a number where a number belongs, no strings for numbers, no
booleans for numbers, no unknown keys. Integers are accepted where a float is expected.
"""

from __future__ import annotations

from typing import Annotated

from pydantic import BaseModel, ConfigDict, Field

IDENTIFIER_PATTERN = r"^[a-z][a-z0-9_]*$"

PositiveFloat = Annotated[float, Field(gt=0, allow_inf_nan=False)]
NonNegativeFloat = Annotated[float, Field(ge=0, allow_inf_nan=False)]
Fraction = Annotated[float, Field(gt=0, le=1, allow_inf_nan=False)]
PositiveInt = Annotated[int, Field(ge=1)]
NonNegativeInt = Annotated[int, Field(ge=0)]
NonEmptyStr = Annotated[str, Field(min_length=1)]
Identifier = Annotated[str, Field(pattern=IDENTIFIER_PATTERN)]


class StrictModel(BaseModel):
    """Frozen, strict, no unknown keys."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class CheckParams(StrictModel):
    """Base of every check kind's parameters (keys carry their units: ``_hz``, ``_km``...)."""


def format_mhz(frequency_hz: float) -> str:
    """A frequency for a sentence: MHz with Hz precision."""
    return f"{frequency_hz / 1e6:.6f} MHz"


def format_hz_s(drift_hz_s: float) -> str:
    """A drift rate for a sentence."""
    return f"{drift_hz_s:+.4f} Hz/s"


def format_hours(seconds: float) -> str:
    """A duration in hours for a sentence."""
    return f"{seconds / 3600.0:.1f} h"
