"""Interference band lists: frequency ranges where human-made emitters are known to transmit.

File layout (TOML)::

    description = "..."
    [[bands]]
    name = "..."                 # short label
    frequency_min_hz = 1.0e9     # lower edge, Hz
    frequency_max_hz = 1.1e9     # upper edge, Hz (> lower edge)
    source = "..."               # where the edges come from, or "common practice, no source"
    note = "..."                 # optional

A listed band is a reason for suspicion, not proof: bands are regional and change over time.
"""

from __future__ import annotations

from bisect import bisect_right
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from itertools import accumulate
from pathlib import Path
from typing import Any, TypeGuard

from pydantic import Field, ValidationError

from confirm_service.protocol.checks._base import NonEmptyStr, PositiveFloat, StrictModel
from confirm_service.protocol.problems import (
    ProtocolError,
    ProtocolProblem,
    document_order,
    parse_toml,
    problems_from_validation_error,
)


@dataclass(frozen=True, slots=True)
class InterferenceBand:
    """One listed band, edges in Hz, with where the edges come from."""

    name: str
    frequency_min_hz: float
    frequency_max_hz: float
    source: str
    note: str = ""


class BandModel(StrictModel):
    """One ``[[bands]]`` entry."""

    name: NonEmptyStr
    frequency_min_hz: PositiveFloat
    frequency_max_hz: PositiveFloat
    source: NonEmptyStr
    note: str = ""


class BandFileModel(StrictModel):
    """A whole band file."""

    description: NonEmptyStr
    bands: list[BandModel] = Field(min_length=1)


class BandSet:
    """Bands sorted by lower edge, for fast overlap queries (bisection, no arrays)."""

    def __init__(self, bands: Iterable[InterferenceBand]) -> None:
        self.bands: tuple[InterferenceBand, ...] = tuple(
            sorted(bands, key=lambda b: (b.frequency_min_hz, b.frequency_max_hz, b.name))
        )
        self._min_hz = [b.frequency_min_hz for b in self.bands]
        self._max_so_far_hz = list(accumulate((b.frequency_max_hz for b in self.bands), max))

    def __len__(self) -> int:
        return len(self.bands)

    def overlapping(
        self, low_hz: float, high_hz: float, margin_hz: float = 0.0
    ) -> tuple[InterferenceBand, ...]:
        """Bands (widened by ``margin_hz`` on each side) that overlap [low_hz, high_hz]."""
        end = bisect_right(self._min_hz, high_hz + margin_hz)
        if end == 0 or self._max_so_far_hz[end - 1] + margin_hz < low_hz:
            return ()
        return tuple(b for b in self.bands[:end] if b.frequency_max_hz + margin_hz >= low_hz)


def as_band_set(bands: BandSet | Sequence[InterferenceBand] | None) -> BandSet:
    """A BandSet from a BandSet, a sequence of bands, or None (no bands)."""
    if isinstance(bands, BandSet):
        return bands
    return BandSet(bands or ())


def band_problems(raw: dict[str, Any], file: str = "") -> list[ProtocolProblem]:
    """Every problem of parsed band-file data."""
    problems: list[ProtocolProblem] = []
    try:
        BandFileModel.model_validate(raw)
    except ValidationError as error:
        problems.extend(problems_from_validation_error(error, raw, file))
    entries = raw.get("bands")
    for index, entry in enumerate(entries if isinstance(entries, list) else []):
        problems.extend(_edge_problems(index, entry, file))
    return document_order(problems, raw, file)


def _is_number(value: object) -> TypeGuard[int | float]:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _edge_problems(index: int, entry: Any, file: str) -> list[ProtocolProblem]:
    if not isinstance(entry, dict):
        return []
    low, high = entry.get("frequency_min_hz"), entry.get("frequency_max_hz")
    if _is_number(low) and _is_number(high) and high <= low:
        return [
            ProtocolProblem(f"bands[{index}].frequency_max_hz", "must be > frequency_min_hz", file)
        ]
    return []


def validate_interference_band_file(path: str | Path) -> list[ProtocolProblem]:
    """Every problem of the band file at ``path`` (empty list: valid)."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as error:
        return [ProtocolProblem("(file)", f"cannot read band file: {error.strerror}", str(path))]
    raw, problems = parse_toml(text)
    if raw is None:
        return [ProtocolProblem(p.key_path, p.message, str(path)) for p in problems]
    return band_problems(raw, str(path))


def load_interference_bands(path: str | Path) -> list[InterferenceBand]:
    """The bands listed in the file at ``path``; ProtocolError if the file is invalid."""
    path = Path(path)
    problems = validate_interference_band_file(path)
    if problems:
        raise ProtocolError(problems, str(path))
    raw, _ = parse_toml(path.read_text(encoding="utf-8"))
    assert raw is not None
    model = BandFileModel.model_validate(raw)
    return [
        InterferenceBand(
            b.name, float(b.frequency_min_hz), float(b.frequency_max_hz), b.source, b.note
        )
        for b in model.bands
    ]
