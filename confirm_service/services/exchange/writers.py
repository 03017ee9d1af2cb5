"""Export rows to CSV, JSON Lines or VOTable, each float64 bit for bit."""

from __future__ import annotations

import csv
import json
import os
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import IO, Any, Protocol

import numpy as np

from confirm_service.services.exchange.columns import (
    BOOL_COLUMNS,
    DESCRIPTIONS,
    EXPORT_COLUMNS,
    FLOAT_COLUMNS,
    INT_COLUMNS,
    UNITS,
)


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


@contextmanager
def writer_for(fmt: str, path: Path) -> Iterator[RowWriter]:
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
