"""Rows out of CSV, JSON Lines and VOTable files, one :class:`SourceRow` at a time."""

from __future__ import annotations

import csv
import io
import json
import os
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import IO, Any, Protocol

from confirm_service.services.exchange.columns import (
    FLOAT_COLUMNS,
    IGNORED_COLUMNS,
    IMPORT_COLUMNS,
    UNITS,
    UnusableInput,
    check_columns,
)


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
        self._columns = check_columns(header, f"{path.name} header")

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
        self._columns = check_columns(names, f"{path.name} FIELDs")
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
