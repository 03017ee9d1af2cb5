"""Import: each observation of a file in its own write transaction, and the summary."""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

from sqlalchemy.exc import SQLAlchemyError

from confirm_service.actor import Actor
from confirm_service.db import Database
from confirm_service.errors import ServiceError
from confirm_service.schemas.log import ObservationIn
from confirm_service.services.exchange.columns import UnusableInput
from confirm_service.services.exchange.readers import RowSource, SourceRow, open_source
from confirm_service.services.exchange.validation import (
    Reason,
    RowGroup,
    group_rows,
    service_reasons,
    validate_group,
)
from confirm_service.services.observations import create_observation

_PROGRESS_EVERY_ROWS = 1000
_PROGRESS_INTERVAL_S = 0.2


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
