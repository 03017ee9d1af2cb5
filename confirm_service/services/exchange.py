"""File import and export of the observation log: CSV, JSON Lines and VOTable.

The exchange format
-------------------
One row per detection; the same columns in all three formats.

Observation columns (units in the names)::

    site, target, pointing_ra_deg, pointing_dec_deg, start, duration_s,
    frequency_min_hz, frequency_max_hz, channel_width_hz, time_resolution_s,
    on_source, beam, cadence, pipeline_run

Detection columns::

    frequency_hz, drift_hz_s, snr, time_offset_s, bandwidth_hz, detection_beam, candidate

``detection_beam`` is the detection's ``beam``; ``candidate`` is the pipeline's own flag.

* Consecutive rows whose observation columns are identical form one observation (identical as
  written: in CSV ``300`` and ``300.0`` differ, in JSON Lines and VOTable equal numbers are the
  same). A row whose detection columns are all empty is an observation without detections.
* ``start`` is ISO 8601 with a UTC offset (``2026-11-20T03:00:00+00:00``); a naive timestamp is
  refused. Export writes UTC with ``+00:00``.
* Numbers are float64. CSV and JSON Lines carry the shortest text that reads back to the same
  float64 (Python ``repr``), so values survive a round trip to the last bit.
* An empty cell (CSV), a missing key or ``null`` (JSON Lines) or a null cell (VOTable) means
  "not given"; an empty text is the same as no text.
* Booleans (``on_source``, ``candidate``): ``true``/``false`` in CSV (any letter case), JSON
  booleans in JSON Lines, VOTable ``boolean``.
* Export adds ``observation_id`` (first column) and ``detection_id`` (before the detection
  columns); import ignores both.

Formats:

* CSV: RFC 4180 style through the ``csv`` module, UTF-8 (a byte-order mark is ignored), one header
  line naming the columns. Columns may come in any order; site, start, duration_s,
  frequency_min_hz, frequency_max_hz, channel_width_hz, time_resolution_s and on_source must be
  there, the others may be left out. An unknown column makes the file unusable.
* JSON Lines: one flat JSON object per line, UTF-8; an unknown key refuses its row.
* VOTable: the first TABLE; FIELD names are the column names (as for the CSV header). Float
  columns are ``double``: a 32-bit ``float`` FIELD is refused, as it cannot carry a frequency to
  the hertz. FIELD ``unit`` attributes give Hz, Hz/s, s and deg (VOUnit spelling, so Hz/s is
  written ``Hz.s**-1``); a FIELD whose unit differs from the one its name implies is refused
  rather than converted. Booleans are ``boolean`` (which has a null), texts ``unicodeChar``.
* The summary of an import counts rows read, accepted and refused, observations created and
  refused, detections created, and lists the first reasons (line or row, column, message).

Import reads CSV and JSON Lines row by row; astropy parses a VOTable whole. Each observation is
created in its own write transaction through
:func:`confirm_service.services.observations.create_observation`: a group with any bad row is
refused whole and nothing of it is written. Rows are numbered by file line (CSV, JSON Lines; the
header is line 1) or by table row (VOTable, from 1). An unreadable row (a malformed JSON line, a CSV
record with the wrong number of cells) refuses the observation it sits in and, when it sits on a
boundary, the observation after it too, since it may have belonged to either.

Export pages through observations and their detections by id (keyset pagination). CSV and JSON
Lines are written as they are read; a VOTable is assembled in memory and written at the end.
The file appears under its name only when complete.

Importing the same file twice records the observations twice: the format carries no identity.
"""

from __future__ import annotations

import csv
import io
import json
import os
import re
import time
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import IO, Any, Protocol

import numpy as np
from pydantic import TypeAdapter, ValidationError
from sqlalchemy.exc import SQLAlchemyError
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.db import Database
from confirm_service.errors import ServiceError
from confirm_service.models import Detection, Observation
from confirm_service.schemas.log import DetectionIn, ObservationIn
from confirm_service.services.observations import (
    create_observation,
    detection_errors,
    list_detections,
    list_observations,
)
from confirm_service.services.sites import site_by_code, target_by_name
from confirm_service.timeutil import iso_utc

OBSERVATION_COLUMNS = (
    "site",
    "target",
    "pointing_ra_deg",
    "pointing_dec_deg",
    "start",
    "duration_s",
    "frequency_min_hz",
    "frequency_max_hz",
    "channel_width_hz",
    "time_resolution_s",
    "on_source",
    "beam",
    "cadence",
    "pipeline_run",
)
DETECTION_COLUMNS = (
    "frequency_hz",
    "drift_hz_s",
    "snr",
    "time_offset_s",
    "bandwidth_hz",
    "detection_beam",
    "candidate",
)
IGNORED_COLUMNS = ("observation_id", "detection_id")
IMPORT_COLUMNS = OBSERVATION_COLUMNS + DETECTION_COLUMNS
EXPORT_COLUMNS = ("observation_id",) + OBSERVATION_COLUMNS + ("detection_id",) + DETECTION_COLUMNS
REQUIRED_COLUMNS = (
    "site",
    "start",
    "duration_s",
    "frequency_min_hz",
    "frequency_max_hz",
    "channel_width_hz",
    "time_resolution_s",
    "on_source",
)
FLOAT_COLUMNS = frozenset(
    {
        "pointing_ra_deg",
        "pointing_dec_deg",
        "duration_s",
        "frequency_min_hz",
        "frequency_max_hz",
        "channel_width_hz",
        "time_resolution_s",
        "frequency_hz",
        "drift_hz_s",
        "snr",
        "time_offset_s",
        "bandwidth_hz",
    }
)
BOOL_COLUMNS = frozenset({"on_source", "candidate"})
INT_COLUMNS = frozenset(IGNORED_COLUMNS)
UNITS = {
    "pointing_ra_deg": "deg",
    "pointing_dec_deg": "deg",
    "duration_s": "s",
    "frequency_min_hz": "Hz",
    "frequency_max_hz": "Hz",
    "channel_width_hz": "Hz",
    "time_resolution_s": "s",
    "frequency_hz": "Hz",
    "drift_hz_s": "Hz/s",
    "time_offset_s": "s",
    "bandwidth_hz": "Hz",
}
DESCRIPTIONS = {
    "observation_id": "Observation id in the exporting service (ignored on import)",
    "site": "Site code",
    "target": "Target name",
    "pointing_ra_deg": "Pointing right ascension, ICRS",
    "pointing_dec_deg": "Pointing declination, ICRS",
    "start": "Scan start, ISO 8601 with UTC offset",
    "duration_s": "Scan duration",
    "frequency_min_hz": "Lower edge of the recorded band",
    "frequency_max_hz": "Upper edge of the recorded band",
    "channel_width_hz": "Channel width",
    "time_resolution_s": "Time resolution",
    "on_source": "True when pointed at the target, false for an off-source scan",
    "beam": "Beam of the scan",
    "cadence": "On/off cadence the scan belongs to",
    "pipeline_run": "Pipeline run that produced the detections",
    "detection_id": "Detection id in the exporting service (ignored on import)",
    "frequency_hz": "Topocentric frequency of the detection at time_offset_s",
    "drift_hz_s": "Drift rate",
    "snr": "Signal-to-noise ratio",
    "time_offset_s": "Time of frequency_hz after the scan start",
    "bandwidth_hz": "Bandwidth of the detection",
    "detection_beam": "Beam the detection was seen in",
    "candidate": "True when the pipeline flagged the detection as a candidate",
}
FORMATS = ("csv", "jsonl", "votable")
EXTENSIONS = {".csv": "csv", ".jsonl": "jsonl", ".vot": "votable", ".xml": "votable"}
_DETECTION_FIELD = {"beam": "detection_beam"}
_DETECTION_KEY = {"detection_beam": "beam"}
_DETECTION_PATH = re.compile(r"^detections\[(\d+)\]\.(\w+)$")
_DETECTION_ADAPTER = TypeAdapter(DetectionIn)
_PROGRESS_EVERY_ROWS = 1000
_PROGRESS_INTERVAL_S = 0.2


class UnusableInput(Exception):
    """The file cannot be read as the exchange format at all (one line for the operator)."""


def format_of(path: Path, requested: str | None = None) -> str:
    """The exchange format: ``requested`` if given, else from the file extension."""
    if requested is not None:
        if requested not in FORMATS:
            raise UnusableInput(f"unknown format {requested!r}; use one of {', '.join(FORMATS)}")
        return requested
    found = EXTENSIONS.get(path.suffix.lower())
    if found is None:
        known = ", ".join(EXTENSIONS)
        raise UnusableInput(
            f"cannot tell the format of {path.name!r} from its extension ({known}); give --format"
        )
    return found


# --------------------------------------------------------------------------------------------
# Reading


@dataclass(frozen=True)
class SourceRow:
    """One data row as read: ``cells`` by column name, or None when the row was unreadable."""

    line: int
    cells: dict[str, Any] | None
    problems: tuple[tuple[str, str], ...] = ()


class RowSource(Protocol):
    """Rows of one file, with the bytes consumed so far for a progress display."""

    unit: str
    total_bytes: int

    def rows(self) -> Iterator[SourceRow]: ...

    def position(self) -> int: ...


def _check_columns(names: list[str], origin: str) -> list[str | None]:
    """Column names of the file in order; ignored ones become None. Refuse unknown or missing."""
    cleaned = [name.strip() for name in names]
    unknown = [n for n in cleaned if n not in IMPORT_COLUMNS and n not in IGNORED_COLUMNS]
    if unknown:
        raise UnusableInput(f"{origin}: unknown column(s) {', '.join(map(repr, unknown))}")
    duplicated = sorted({n for n in cleaned if cleaned.count(n) > 1})
    if duplicated:
        raise UnusableInput(f"{origin}: column(s) named twice: {', '.join(duplicated)}")
    missing = [n for n in REQUIRED_COLUMNS if n not in cleaned]
    if missing:
        raise UnusableInput(f"{origin}: required column(s) missing: {', '.join(missing)}")
    return [None if n in IGNORED_COLUMNS else n for n in cleaned]


def _decode_error(exc: UnicodeDecodeError, path: Path) -> UnusableInput:
    return UnusableInput(f"{path.name}: not UTF-8 text ({exc.reason} at byte {exc.start})")


class CsvSource:
    """CSV rows, read record by record; ``line`` is the record's first physical line."""

    unit = "line"

    def __init__(self, path: Path, binary: IO[bytes]) -> None:
        self.path = path
        self.total_bytes = os.fstat(binary.fileno()).st_size
        self._binary = binary
        self._text = io.TextIOWrapper(binary, encoding="utf-8-sig", newline="")
        self._reader = csv.reader(self._text)
        try:
            header = next(self._reader)
        except StopIteration:
            raise UnusableInput(f"{path.name}: empty file, no header line") from None
        except UnicodeDecodeError as exc:
            raise _decode_error(exc, path) from None
        except csv.Error as exc:
            raise UnusableInput(f"{path.name}: header line: {exc}") from None
        self._columns = _check_columns(header, f"{path.name} header")

    def position(self) -> int:
        return self._binary.tell()

    def rows(self) -> Iterator[SourceRow]:
        reader, columns = self._reader, self._columns
        previous = reader.line_num
        while True:
            try:
                record = next(reader)
            except StopIteration:
                return
            except UnicodeDecodeError as exc:
                raise _decode_error(exc, self.path) from None
            except csv.Error as exc:
                raise UnusableInput(f"{self.path.name} line {reader.line_num}: {exc}") from None
            line, previous = previous + 1, reader.line_num
            if not record or (len(record) == 1 and not record[0].strip()):
                continue
            if len(record) != len(columns):
                problem = f"has {len(record)} cells; the header names {len(columns)}"
                yield SourceRow(line, None, (("row", problem),))
                continue
            cells = {name: value for name, value in zip(columns, record, strict=True) if name}
            yield SourceRow(line, cells)


class JsonLinesSource:
    """JSON Lines rows, read line by line; blank lines are skipped."""

    unit = "line"

    def __init__(self, path: Path, binary: IO[bytes]) -> None:
        self.path = path
        self.total_bytes = os.fstat(binary.fileno()).st_size
        self._binary = binary
        self._text = io.TextIOWrapper(binary, encoding="utf-8-sig")

    def position(self) -> int:
        return self._binary.tell()

    def rows(self) -> Iterator[SourceRow]:
        line = 0
        while True:
            try:
                text = self._text.readline()
            except UnicodeDecodeError as exc:
                raise _decode_error(exc, self.path) from None
            if not text:
                return
            line += 1
            if text.strip():
                yield self._parse(line, text)

    @staticmethod
    def _parse(line: int, text: str) -> SourceRow:
        try:
            value = json.loads(text)
        except json.JSONDecodeError as exc:
            return SourceRow(line, None, (("row", f"is not valid JSON ({exc.msg})"),))
        if not isinstance(value, dict):
            return SourceRow(line, None, (("row", "is not a JSON object"),))
        cells = {k: v for k, v in value.items() if k in IMPORT_COLUMNS}
        problems = tuple(
            (str(k), "unknown column")
            for k in value
            if k not in IMPORT_COLUMNS and k not in IGNORED_COLUMNS
        )
        return SourceRow(line, cells, problems)


def _expected_unit_problem(name: str, unit: Any) -> str | None:
    """Why a VOTable FIELD's unit cannot be taken as the unit in the column name, if it cannot."""
    expected = UNITS.get(name)
    if unit is None or expected is None:
        return None
    import astropy.units as u

    try:
        if u.Unit(unit) == u.Unit(expected):
            return None
    except (TypeError, ValueError):
        pass
    return f"FIELD {name} has unit {str(unit)!r}; {expected} is required"


class VOTableSource:
    """Rows of the first TABLE of a VOTable, parsed whole by astropy; ``line`` is the row."""

    unit = "row"

    def __init__(self, path: Path, binary: IO[bytes]) -> None:
        from astropy.io.votable import parse

        self.path = path
        self.total_bytes = os.fstat(binary.fileno()).st_size
        self._binary = binary
        try:
            table = parse(binary).get_first_table()
        except Exception as exc:  # noqa: BLE001 - any parser failure is one line for the operator
            first = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
            raise UnusableInput(f"{path.name}: not a readable VOTable ({first})") from None
        names = [f.name or f.ID for f in table.fields]
        self._columns = _check_columns(names, f"{path.name} FIELDs")
        for votable_field, name in zip(table.fields, self._columns, strict=True):
            if name in FLOAT_COLUMNS and votable_field.datatype in ("float", "floatComplex"):
                raise UnusableInput(
                    f"{path.name}: FIELD {name} is 32-bit float; double (float64) is required"
                )
            problem = _expected_unit_problem(name, votable_field.unit) if name else None
            if problem:
                raise UnusableInput(f"{path.name}: {problem}")
        array = table.array
        self._values = [array[key].tolist() for key in array.dtype.names]

    def position(self) -> int:
        return self.total_bytes

    def rows(self) -> Iterator[SourceRow]:
        columns = self._columns
        for index, values in enumerate(zip(*self._values, strict=True), start=1):
            cells = {name: value for name, value in zip(columns, values, strict=True) if name}
            yield SourceRow(index, cells)


_SOURCES: dict[str, Callable[[Path, IO[bytes]], RowSource]] = {
    "csv": CsvSource,
    "jsonl": JsonLinesSource,
    "votable": VOTableSource,
}


@contextmanager
def open_source(path: Path, fmt: str) -> Iterator[RowSource]:
    """Open ``path`` as ``fmt``; :class:`UnusableInput` when it cannot be read at all."""
    try:
        binary = open(path, "rb")  # noqa: SIM115 - closed below; the source wraps it
    except OSError as exc:
        raise UnusableInput(f"cannot read {path}: {exc.strerror or exc}") from None
    try:
        yield _SOURCES[fmt](path, binary)
    finally:
        binary.close()


# --------------------------------------------------------------------------------------------
# Cells, grouping and validation


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
        return datetime.fromisoformat(value.strip()), None
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


# --------------------------------------------------------------------------------------------
# Import


@dataclass
class ImportSummary:
    """Figures of one import; ``reasons`` keeps the first ``max_reasons`` of ``reasons_total``."""

    unit: str = "line"
    rows_read: int = 0
    rows_accepted: int = 0
    rows_refused: int = 0
    observations_created: int = 0
    observations_refused: int = 0
    detections_created: int = 0
    reasons: list[Reason] = field(default_factory=list)
    reasons_total: int = 0
    max_reasons: int = 20
    unusable: str | None = None
    database_error: str | None = None

    def refuse(self, group: RowGroup, reasons: list[Reason]) -> None:
        self.rows_refused += group.row_count
        self.observations_refused += 1
        self.reasons_total += len(reasons)
        room = self.max_reasons - len(self.reasons)
        if room > 0:
            self.reasons.extend(reasons[:room])

    def accept(self, group: RowGroup, detection_count: int) -> None:
        self.rows_accepted += group.row_count
        self.observations_created += 1
        self.detections_created += detection_count

    @property
    def exit_status(self) -> int:
        """0 when every row was accepted, 1 when some were refused, 2 when the import stopped
        early (unusable input, or a database failure)."""
        if self.unusable is not None or self.database_error is not None:
            return 2
        return 1 if self.rows_refused else 0

    def lines(self) -> list[str]:
        """The summary as text lines for the operator."""
        text = [
            f"rows read:            {self.rows_read}",
            f"rows accepted:        {self.rows_accepted}",
            f"rows refused:         {self.rows_refused}",
            f"observations created: {self.observations_created}",
            f"observations refused: {self.observations_refused}",
            f"detections created:   {self.detections_created}",
        ]
        if self.unusable is not None:
            text.append(f"input unusable: {self.unusable}")
        if self.database_error is not None:
            text.append(f"stopped: {self.database_error}")
        if self.reasons_total:
            shown = len(self.reasons)
            text.append(f"reasons ({shown} of {self.reasons_total} shown):")
            text += [f"  {self.unit} {r.line}: {r.field}: {r.message}" for r in self.reasons]
        return text


def _create_group(
    database: Database,
    actor: Actor,
    observation: ObservationIn,
    clock_skew_s: float,
    max_batch: int,
) -> list[int]:
    with database.write() as session:
        _, ids, _ = create_observation(session, actor, observation, clock_skew_s, max_batch)
    return ids


def import_groups(
    database: Database,
    actor: Actor,
    groups: Iterable[RowGroup],
    summary: ImportSummary,
    clock_skew_s: float,
    max_batch: int,
    on_group: Callable[[], None] | None = None,
) -> None:
    """Validate and create each group in its own write transaction, updating ``summary``.

    ``summary.rows_read`` is left to the caller, who sees the rows as they are read.
    """
    for group in groups:
        observation, reasons = validate_group(group)
        if observation is not None:
            try:
                ids = _create_group(database, actor, observation, clock_skew_s, max_batch)
            except SQLAlchemyError as exc:
                first = str(getattr(exc, "orig", None) or exc).strip().splitlines()[0]
                summary.database_error = (
                    f"database error on the observation at {summary.unit} {group.first_line} "
                    f"({first}); observations before it were committed"
                )
                return
            except ServiceError as exc:
                errors = exc.errors or [("row", exc.detail)]
                reasons = service_reasons(errors, group.detection_lines, group.first_line)
            else:
                summary.accept(group, len(ids))
        if reasons:
            summary.refuse(group, reasons)
        if on_group is not None:
            on_group()


class _Ticker:
    """Calls ``progress(bytes_done, bytes_total)`` at most every ``interval_s`` seconds."""

    def __init__(
        self, source: RowSource, progress: Callable[[int, int], None] | None, interval_s: float
    ) -> None:
        self._source, self._progress, self._interval_s = source, progress, interval_s
        self._last = time.monotonic()
        self.rows_read = 0

    def __call__(self, force: bool = False) -> None:
        now = time.monotonic()
        if self._progress is not None and (force or now - self._last >= self._interval_s):
            self._last = now
            self._progress(self._source.position(), self._source.total_bytes)

    def rows(self, rows: Iterable[SourceRow]) -> Iterator[SourceRow]:
        for row in rows:
            self.rows_read += 1
            if self.rows_read % _PROGRESS_EVERY_ROWS == 0:
                self()
            yield row


def import_file(
    database: Database,
    actor: Actor,
    path: Path,
    fmt: str,
    clock_skew_s: float,
    max_batch: int,
    max_reasons: int = 20,
    progress: Callable[[int, int], None] | None = None,
) -> ImportSummary:
    """Import ``path`` in format ``fmt``; ``progress(bytes_done, bytes_total)`` as it goes.

    Never raises for bad input: an unusable file is reported in ``summary.unusable``.
    """
    summary = ImportSummary(max_reasons=max_reasons)
    try:
        with open_source(path, fmt) as source:
            summary.unit = source.unit
            tick = _Ticker(source, progress, _PROGRESS_INTERVAL_S)
            groups = _guarded(group_rows(tick.rows(source.rows()), max_batch, source.unit), summary)
            try:
                import_groups(database, actor, groups, summary, clock_skew_s, max_batch, tick)
            finally:
                summary.rows_read = tick.rows_read
            tick(force=True)
    except UnusableInput as exc:
        summary.unusable = str(exc)
    _refuse_unfinished(summary)
    return summary


def _refuse_unfinished(summary: ImportSummary) -> None:
    """Rows of the observation that was being read when the input became unreadable."""
    unfinished = summary.rows_read - summary.rows_accepted - summary.rows_refused
    if unfinished > 0:
        summary.rows_refused += unfinished
        summary.observations_refused += 1


def _guarded(groups: Iterator[RowGroup], summary: ImportSummary) -> Iterator[RowGroup]:
    """Pass groups on; when reading breaks mid-file, note it and stop (nothing half-written)."""
    try:
        yield from groups
    except UnusableInput as exc:
        summary.unusable = str(exc)


# --------------------------------------------------------------------------------------------
# Export


def _cell_text(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    return str(value)


class RowWriter(Protocol):
    def write(self, row: dict[str, Any]) -> None: ...

    def close(self) -> None: ...


class CsvWriter:
    """CSV with a header line; floats as the shortest text that reads back bit for bit."""

    def __init__(self, stream: IO[str]) -> None:
        self._writer = csv.writer(stream, lineterminator="\n")
        self._writer.writerow(EXPORT_COLUMNS)

    def write(self, row: dict[str, Any]) -> None:
        self._writer.writerow([_cell_text(row.get(c)) for c in EXPORT_COLUMNS])

    def close(self) -> None:
        return None


class JsonLinesWriter:
    """One flat JSON object per line, every column present (null where empty)."""

    def __init__(self, stream: IO[str]) -> None:
        self._stream = stream

    def write(self, row: dict[str, Any]) -> None:
        flat = {c: row.get(c) for c in EXPORT_COLUMNS}
        self._stream.write(json.dumps(flat, allow_nan=False, ensure_ascii=False) + "\n")

    def close(self) -> None:
        return None


class VOTableWriter:
    """Collects the rows, then writes one VOTable TABLE through astropy at :meth:`close`."""

    def __init__(self, stream: IO[bytes]) -> None:
        self._stream = stream
        self._columns: dict[str, list[Any]] = {c: [] for c in EXPORT_COLUMNS}

    def write(self, row: dict[str, Any]) -> None:
        for column, values in self._columns.items():
            values.append(row.get(column))

    def close(self) -> None:
        from astropy.io.votable import from_table, writeto

        votable = from_table(self._table())
        table = votable.get_first_table()
        table.description = "confirm-service observation log: one row per detection"
        _declare_fields(votable)
        writeto(votable, self._stream)

    def _table(self) -> Any:
        from astropy.table import Column, MaskedColumn, Table

        table = Table()
        for name, values in self._columns.items():
            array = _column_array(name, values)
            description = DESCRIPTIONS.get(name)
            if array.dtype.kind in "OU":  # empty text is null; astropy cannot mask object cells
                table[name] = Column(array, description=description)
                continue
            mask = np.array([v is None for v in values], dtype=bool)
            table[name] = MaskedColumn(
                array, mask=mask, unit=UNITS.get(name), description=description
            )
        return table


def _column_array(name: str, values: list[Any]) -> np.ndarray:
    if name in FLOAT_COLUMNS:
        return np.array([0.0 if v is None else v for v in values], dtype=np.float64)
    if name in INT_COLUMNS:
        return np.array([0 if v is None else v for v in values], dtype=np.int64)
    if name in BOOL_COLUMNS:
        return np.array([bool(v) for v in values], dtype=np.bool_)
    if not values:
        return np.array([], dtype=str)
    array = np.empty(len(values), dtype=object)
    array[:] = ["" if v is None else str(v) for v in values]
    return array


def _declare_fields(votable: Any) -> None:
    """Text FIELDs of any length (``arraysize="*"``, also for an empty table); booleans as
    ``boolean``: astropy writes numpy bool as ``bit``, which has no null value."""
    from astropy.io.votable.tree import Field

    table = votable.get_first_table()
    for index, old in enumerate(table.fields):
        if old.name in BOOL_COLUMNS:
            new = Field(votable, name=old.name, ID=old.ID, datatype="boolean")
            new.description = old.description
            table.fields[index] = new
        elif old.datatype == "unicodeChar":
            old.arraysize = "*"


def observation_cells(observation: Observation) -> dict[str, Any]:
    """The observation columns of an export row."""
    return {
        "observation_id": observation.id,
        "site": observation.site.code,
        "target": observation.target.name if observation.target is not None else None,
        "pointing_ra_deg": observation.pointing_ra_deg,
        "pointing_dec_deg": observation.pointing_dec_deg,
        "start": iso_utc(observation.start),
        "duration_s": observation.duration_s,
        "frequency_min_hz": observation.frequency_min_hz,
        "frequency_max_hz": observation.frequency_max_hz,
        "channel_width_hz": observation.channel_width_hz,
        "time_resolution_s": observation.time_resolution_s,
        "on_source": observation.on_source,
        "beam": observation.beam,
        "cadence": observation.cadence,
        "pipeline_run": observation.pipeline_run,
    }


def detection_cells(detection: Detection) -> dict[str, Any]:
    """The detection columns of an export row."""
    return {
        "detection_id": detection.id,
        "frequency_hz": detection.frequency_hz,
        "drift_hz_s": detection.drift_hz_s,
        "snr": detection.snr,
        "time_offset_s": detection.time_offset_s,
        "bandwidth_hz": detection.bandwidth_hz,
        "detection_beam": detection.beam,
        "candidate": detection.flagged_candidate,
    }


@dataclass(frozen=True)
class ExportFilter:
    """Which observations to export; ``start_from`` inclusive, ``start_to`` exclusive."""

    site: str | None = None
    target: str | None = None
    start_from: datetime | None = None
    start_to: datetime | None = None


def _observation_pages(
    session: Session, wanted: ExportFilter, page_size: int
) -> Iterator[Observation]:
    after_id = 0
    while True:
        page = list_observations(
            session,
            after_id,
            page_size,
            wanted.site,
            wanted.target,
            wanted.start_from,
            wanted.start_to,
        )
        yield from page
        if len(page) < page_size:
            return
        after_id = page[-1].id
        del page
        session.expunge_all()  # the identity map holds only the page being written


def _detection_pages(session: Session, observation_id: int, page_size: int) -> Iterator:
    after_id = 0
    while True:
        page = list_detections(session, observation_id, after_id, page_size)
        yield from page
        if len(page) < page_size:
            return
        after_id = page[-1].id


def export_rows(
    session: Session, wanted: ExportFilter, page_size: int = 500, detection_page_size: int = 5000
) -> Iterator[dict[str, Any]]:
    """Export rows, observation by observation in id order, detections in id order."""
    for observation in _observation_pages(session, wanted, page_size):
        cells = observation_cells(observation)
        empty = True
        for detection in _detection_pages(session, observation.id, detection_page_size):
            empty = False
            yield {**cells, **detection_cells(detection)}
        if empty:
            yield cells


@dataclass
class ExportSummary:
    observations: int = 0
    rows: int = 0


@contextmanager
def _writer_for(fmt: str, path: Path) -> Iterator[RowWriter]:
    """A writer on a sibling temporary file, renamed to ``path`` only once complete."""
    partial = path.with_name(f".{path.name}.partial-{os.getpid()}")
    try:
        if fmt == "votable":
            with open(partial, "wb") as binary:
                writer: RowWriter = VOTableWriter(binary)
                yield writer
                writer.close()
        else:
            with open(partial, "w", encoding="utf-8", newline="") as text:
                writer = CsvWriter(text) if fmt == "csv" else JsonLinesWriter(text)
                yield writer
                writer.close()
        os.replace(partial, path)
    finally:
        if partial.exists():
            partial.unlink()


def _begin_consistent_read(session: Session) -> None:
    """One snapshot for the whole export (SQLite WAL readers see one snapshot already)."""
    if session.get_bind().dialect.name == "postgresql":
        session.connection(execution_options={"isolation_level": "REPEATABLE READ"})


def export_file(
    database: Database,
    path: Path,
    fmt: str,
    wanted: ExportFilter | None = None,
    page_size: int = 500,
    progress: Callable[[int], None] | None = None,
    detection_page_size: int = 5000,
) -> ExportSummary:
    """Write the observations ``wanted`` selects to ``path``; ``progress(observations_done)``.

    An unknown site or target in the filter raises :class:`NotFound`.
    """
    wanted = wanted or ExportFilter()
    summary = ExportSummary()
    with database.read() as session:
        _begin_consistent_read(session)
        if wanted.site is not None:
            site_by_code(session, wanted.site)
        if wanted.target is not None:
            target_by_name(session, wanted.target)
        with _writer_for(fmt, path) as writer:
            last_id: int | None = None
            for row in export_rows(session, wanted, page_size, detection_page_size):
                writer.write(row)
                summary.rows += 1
                if row["observation_id"] != last_id:
                    last_id = row["observation_id"]
                    summary.observations += 1
                    if progress is not None:
                        progress(summary.observations)
    return summary


def parse_aware_time(text: str) -> datetime:
    """An ISO 8601 date-time with a UTC offset; ValueError for naive or malformed text."""
    value = datetime.fromisoformat(text.strip())
    if value.tzinfo is None or value.utcoffset() is None:
        raise ValueError(f"{text!r} has no UTC offset")
    return value
