"""Cells to Python values, rows grouped into observations, and the field rules of each."""

from __future__ import annotations

import re
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

import numpy as np
from pydantic import TypeAdapter, ValidationError

from confirm_service.models import Observation
from confirm_service.schemas.log import DetectionIn, ObservationIn
from confirm_service.services.exchange.columns import (
    BOOL_COLUMNS,
    DETECTION_COLUMNS,
    FLOAT_COLUMNS,
    OBSERVATION_COLUMNS,
)
from confirm_service.services.exchange.readers import SourceRow
from confirm_service.services.observations import detection_errors
from confirm_service.timeutil import parse_iso_time

_DETECTION_FIELD = {"beam": "detection_beam"}
_DETECTION_KEY = {"detection_beam": "beam"}
_DETECTION_PATH = re.compile(r"^detections\[(\d+)\]\.(\w+)$")
_DETECTION_ADAPTER = TypeAdapter(DetectionIn)


def _plain(value: Any) -> Any:
    """numpy scalars as Python values, bytes as text."""
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, bytes):
        return value.decode("utf-8", errors="replace")
    return value


def _float_cell(value: Any) -> Any:
    if value.__class__ is not str:
        value = _plain(value)
        if isinstance(value, int) and not isinstance(value, bool):
            return float(value)
        if not isinstance(value, str):
            return value
    text = value.strip()
    if not text:
        return None
    try:
        return float(text)
    except ValueError:
        return value  # kept for pydantic to refuse with its reason


def _bool_cell(value: Any) -> Any:
    value = _plain(value)
    if not isinstance(value, str):
        return value
    text = value.strip().lower()
    if not text:
        return None
    return {"true": True, "false": False}.get(text, value)


def _text_cell(value: Any) -> Any:
    value = _plain(value)
    if isinstance(value, str) and not value.strip():
        return None
    return value


def _normaliser(column: str) -> Callable[[Any], Any]:
    if column in FLOAT_COLUMNS:
        return _float_cell
    return _bool_cell if column in BOOL_COLUMNS else _text_cell


_OBSERVATION_NORMALISERS = tuple((c, _normaliser(c)) for c in OBSERVATION_COLUMNS)
_DETECTION_NORMALISERS = tuple((c, _normaliser(c)) for c in DETECTION_COLUMNS)


def normalise_cell(column: str, value: Any) -> Any:
    """A cell as a Python value: empty -> None, number text -> float, true/false -> bool.

    Text that does not parse is kept as it is, for pydantic to refuse with its reason.
    """
    return None if value is None else _normaliser(column)(value)


def observation_cells_of(cells: dict[str, Any]) -> dict[str, Any]:
    """The normalised observation cells of one row; absent columns are None."""
    return {c: None if (v := cells.get(c)) is None else f(v) for c, f in _OBSERVATION_NORMALISERS}


def detection_cells_of(cells: dict[str, Any]) -> dict[str, Any]:
    """The normalised detection cells of one row; absent columns are None."""
    return {c: None if (v := cells.get(c)) is None else f(v) for c, f in _DETECTION_NORMALISERS}


def group_key(cells: dict[str, Any]) -> tuple[Any, ...]:
    """What makes rows one observation: the observation cells exactly as read.

    Booleans are tagged so that ``true`` and ``1`` differ; 300 and 300.0 are the same number.
    """
    return tuple(
        ("bool", v) if v is True or v is False else v for v in map(cells.get, OBSERVATION_COLUMNS)
    )


@dataclass(frozen=True)
class Reason:
    """Why a row was refused: ``line`` (or table row), the column at fault, the message."""

    line: int
    field: str
    message: str


@dataclass
class RowGroup:
    """Consecutive rows that describe one observation, with the faults found while reading."""

    first_line: int
    cells: dict[str, Any] | None
    key: tuple[Any, ...] | None
    row_count: int = 0
    detection_lines: list[int] = field(default_factory=list)
    detection_cells: list[dict[str, Any]] = field(default_factory=list)
    faults: list[Reason] = field(default_factory=list)
    overflowed: bool = False

    def add_readable(self, row: SourceRow, detection: dict[str, Any], limit: int) -> None:
        self.row_count += 1
        self.faults.extend(Reason(row.line, f, m) for f, m in row.problems)
        if all(value is None for value in detection.values()):
            return
        if len(self.detection_cells) >= limit:
            if not self.overflowed:
                self.overflowed = True
                message = (
                    f"more than {limit} detections in one observation, the configured limit "
                    "(max_batch_detections); nothing of this observation was written"
                )
                self.faults.append(Reason(row.line, "detections", message))
            return
        self.detection_lines.append(row.line)
        self.detection_cells.append(detection)

    def add_unreadable(self, row: SourceRow) -> None:
        self.row_count += 1
        self.faults.extend(Reason(row.line, f, m) for f, m in row.problems)


def group_rows(rows: Iterable[SourceRow], limit: int, unit: str = "line") -> Iterator[RowGroup]:
    """Group consecutive rows with identical observation cells; keep at most ``limit`` hits each.

    An unreadable row joins the group in progress; when the next readable row starts a new
    group, that group is refused too, as the unreadable row may have been its first.
    """
    current: RowGroup | None = None
    pending: list[SourceRow] = []
    for row in rows:
        if row.cells is None:
            pending.append(row)
            continue
        key = group_key(row.cells)
        if current is None or key != current.key:
            following = current is not None and bool(pending)
            if current is not None:
                for bad in pending:
                    current.add_unreadable(bad)
                pending.clear()
                yield current
            current = RowGroup(row.line, observation_cells_of(row.cells), key)
            if following:
                message = f"comes right after the unreadable {unit} and may have belonged with it"
                current.faults.append(Reason(row.line, "row", message))
        for bad in pending:
            current.add_unreadable(bad)
        pending.clear()
        current.add_readable(row, detection_cells_of(row.cells), limit)
    if current is None and pending:
        current = RowGroup(pending[0].line, None, None)
    if current is not None:
        for bad in pending:
            current.add_unreadable(bad)
        yield current


def _pydantic_reasons(
    exc: ValidationError, line: int, rename: dict[str, str] | None = None
) -> list[Reason]:
    reasons = []
    for error in exc.errors():
        loc = [str(part) for part in error["loc"]] or ["row"]
        if rename:
            loc[0] = rename.get(loc[0], loc[0])
        reasons.append(Reason(line, ".".join(loc), error["msg"]))
    return reasons


def _start_value(value: Any) -> tuple[Any, str | None]:
    """``start`` must be ISO 8601 text; the offset rule is left to ObservationIn."""
    if isinstance(value, datetime):
        return value, None
    if not isinstance(value, str):
        return value, "must be ISO 8601 text with a UTC offset"
    try:
        return parse_iso_time(value), None
    except ValueError:
        return value, f"{value!r} is not an ISO 8601 date-time"


def validate_observation(
    cells: dict[str, Any], line: int
) -> tuple[ObservationIn | None, list[Reason]]:
    """Observation cells through :class:`ObservationIn` (no detections yet)."""
    data = {k: v for k, v in cells.items() if v is not None}
    if "start" in data:
        data["start"], problem = _start_value(data["start"])
        if problem:
            return None, [Reason(line, "start", problem)]
    try:
        return ObservationIn.model_validate(data), []
    except ValidationError as exc:
        return None, _pydantic_reasons(exc, line)


def validate_detection(cells: dict[str, Any], line: int) -> tuple[DetectionIn | None, list[Reason]]:
    """Detection cells through the :class:`DetectionIn` rules; column names as in the file."""
    data = {_DETECTION_KEY.get(k, k): v for k, v in cells.items() if v is not None}
    try:
        return _DETECTION_ADAPTER.validate_python(data), []
    except ValidationError as exc:
        return None, _pydantic_reasons(exc, line, _DETECTION_FIELD)


def _span_reasons(
    observation: ObservationIn, detections: list[DetectionIn], lines: list[int]
) -> list[Reason]:
    """Detections outside the band or time span, by the service's own rule."""
    scan = Observation(
        frequency_min_hz=observation.frequency_min_hz,
        frequency_max_hz=observation.frequency_max_hz,
        duration_s=observation.duration_s,
    )
    return service_reasons(detection_errors(detections, scan), lines, lines[0] if lines else 0)


def service_reasons(
    errors: list[tuple[str, str]], lines: list[int], group_line: int
) -> list[Reason]:
    """Service field errors as reasons: ``detections[i].x`` at its row, the rest at the group."""
    reasons = []
    for path, message in errors:
        match = _DETECTION_PATH.match(path)
        if match and int(match.group(1)) < len(lines):
            name = _DETECTION_FIELD.get(match.group(2), match.group(2))
            reasons.append(Reason(lines[int(match.group(1))], name, message))
        else:
            reasons.append(Reason(group_line, path, message))
    return reasons


def validate_group(group: RowGroup) -> tuple[ObservationIn | None, list[Reason]]:
    """The observation with its detections, ready to create, or the reasons to refuse it."""
    reasons = list(group.faults)
    observation: ObservationIn | None = None
    if group.cells is not None:
        observation, problems = validate_observation(group.cells, group.first_line)
        reasons += problems
    detections: list[DetectionIn] = []
    lines: list[int] = []
    for line, cells in zip(group.detection_lines, group.detection_cells, strict=True):
        detection, problems = validate_detection(cells, line)
        reasons += problems
        if detection is not None:
            detections.append(detection)
            lines.append(line)
    if observation is not None and detections:
        reasons += _span_reasons(observation, detections, lines)
    if reasons or observation is None:
        return None, sorted(reasons, key=lambda r: r.line)
    return observation.model_copy(update={"detections": detections}), []
