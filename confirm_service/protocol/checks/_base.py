"""Shared pieces of the protocol schema: strict pydantic base and unit-carrying field types.

Drift limits may be absolute (``..._hz_s``) or normalised by the observed frequency
(``..._nhz``: drift / frequency in nHz = 1e-9 s^-1, i.e. Hz/s per GHz, the way drift-rate
searches state limits across a wide band; common practice, no source). Earth alone gives up to
about 0.11 nHz from its rotation and 0.02 nHz from its orbit (a = omega^2 R = 0.034 m/s^2 and
0.006 m/s^2 divided by c; IERS/WGS84 constants, orbital value from memory).

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


def drift_hz_s_from_nhz(drift_nhz: float, frequency_hz: float) -> float:
    """A normalised drift (nHz, i.e. Hz/s per GHz) as an absolute drift (Hz/s) at frequency_hz."""
    return drift_nhz * 1e-9 * frequency_hz


def drift_limit_hz_s(
    limit_hz_s: float | None, limit_nhz: float | None, frequency_hz: float
) -> float:
    """A drift limit given either in Hz/s or in nHz (Hz/s per GHz), in Hz/s at frequency_hz."""
    if limit_hz_s is not None:
        return limit_hz_s
    if limit_nhz is None:
        raise ValueError("a drift limit needs a value in Hz/s or in nHz")
    return drift_hz_s_from_nhz(limit_nhz, frequency_hz)


def exactly_one_drift_limit(model: BaseModel, name: str, required: bool = True) -> None:
    """Refuse both ``<name>_hz_s`` and ``<name>_nhz`` (and, if required, neither)."""
    absolute = getattr(model, f"{name}_hz_s")
    normalised = getattr(model, f"{name}_nhz")
    if absolute is not None and normalised is not None:
        raise ValueError(f"give {name}_hz_s (Hz/s) or {name}_nhz (Hz/s per GHz), not both")
    if required and absolute is None and normalised is None:
        raise ValueError(f"give {name}_hz_s (Hz/s) or {name}_nhz (Hz/s per GHz)")
