"""Export: observations and their detections read page by page into a writer."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import Any

from sqlalchemy.orm import Session

from confirm_service.db import Database
from confirm_service.models import Detection, Observation
from confirm_service.services.exchange.writers import writer_for
from confirm_service.services.observations import (
    list_detections,
    list_observations,
)
from confirm_service.services.sites import site_by_code, target_by_name
from confirm_service.timeutil import iso_utc


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
        with writer_for(fmt, path) as writer:
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
