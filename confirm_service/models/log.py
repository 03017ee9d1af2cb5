"""The observation log: sites, targets, observations (scans) and detections."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, Boolean, ForeignKey, Index, String, Text
from sqlalchemy.orm import Mapped, mapped_column, relationship

from confirm_service.models.base import Base
from confirm_service.timeutil import utc_now


class Site(Base):
    """A telescope site; position is WGS84 geodetic."""

    __tablename__ = "sites"

    id: Mapped[int] = mapped_column(primary_key=True)
    code: Mapped[str] = mapped_column(String(32), unique=True)
    name: Mapped[str] = mapped_column(String(200))
    latitude_deg: Mapped[float]
    longitude_deg: Mapped[float]
    elevation_m: Mapped[float]
    min_elevation_deg: Mapped[float] = mapped_column(default=10.0)
    sun_avoidance_deg: Mapped[float] = mapped_column(default=5.0)
    webhook_url: Mapped[str | None] = mapped_column(Text)
    email: Mapped[str | None] = mapped_column(String(320))
    receiver_bands: Mapped[list[Any]] = mapped_column(JSON, default=list)
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    updated_at: Mapped[datetime] = mapped_column(default=utc_now, onupdate=utc_now)


class Target(Base):
    """A sky position (ICRS) with optional proper motion and parallax at ``epoch``."""

    __tablename__ = "targets"

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(200), unique=True)
    ra_deg: Mapped[float]
    dec_deg: Mapped[float]
    pm_ra_mas_yr: Mapped[float | None]
    pm_dec_mas_yr: Mapped[float | None]
    parallax_mas: Mapped[float | None]
    distance_pc: Mapped[float | None]
    epoch: Mapped[datetime | None]
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    updated_at: Mapped[datetime] = mapped_column(default=utc_now, onupdate=utc_now)


class Observation(Base):
    """One scan at one site, on-source or off-source, part of an on/off ``cadence``.

    A scan is *open* (``completed_at`` is None) while its hits may still arrive; an open scan is
    never evidence that a signal is absent. ``completed_by`` says how it was closed (see
    ``services.scans.COMPLETION_ROUTES``). ``sefd_jy`` (system-equivalent flux density, Jy) and
    ``threshold_snr`` (the search's detection threshold), when stated, say how faint a signal
    the scan could see.
    """

    __tablename__ = "observations"
    __table_args__ = (
        Index("ix_observations_target_start", "target_id", "start"),
        Index("ix_observations_start", "start"),
        Index("ix_observations_cadence", "cadence"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id"), index=True)
    target_id: Mapped[int | None] = mapped_column(ForeignKey("targets.id"))
    pointing_ra_deg: Mapped[float]
    pointing_dec_deg: Mapped[float]
    start: Mapped[datetime]
    duration_s: Mapped[float]
    frequency_min_hz: Mapped[float]
    frequency_max_hz: Mapped[float]
    channel_width_hz: Mapped[float]
    time_resolution_s: Mapped[float]
    on_source: Mapped[bool] = mapped_column(Boolean)
    beam: Mapped[str | None] = mapped_column(String(64))
    cadence: Mapped[str | None] = mapped_column(String(128))
    pipeline_run: Mapped[str | None] = mapped_column(String(128))
    detection_count: Mapped[int] = mapped_column(default=0)
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    last_ingest_at: Mapped[datetime | None]
    completed_at: Mapped[datetime | None]
    completed_by: Mapped[str | None] = mapped_column(String(16))
    screened_run_id: Mapped[int | None]
    sefd_jy: Mapped[float | None]
    threshold_snr: Mapped[float | None]

    site: Mapped[Site] = relationship(lazy="joined")
    target: Mapped[Target | None] = relationship(lazy="joined")


class Detection(Base):
    """A narrowband hit: topocentric ``frequency_hz`` at ``time_offset_s`` into the scan.

    ``screen_reason`` is None until screening judged the hit, then one of
    ``protocol.screening.Reason``; ``screening_run_id`` names the run that judged it.
    """

    __tablename__ = "detections"
    __table_args__ = (
        Index("ix_detections_observation_frequency", "observation_id", "frequency_hz"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    observation_id: Mapped[int] = mapped_column(ForeignKey("observations.id"))
    frequency_hz: Mapped[float]
    drift_hz_s: Mapped[float]
    snr: Mapped[float]
    time_offset_s: Mapped[float] = mapped_column(default=0.0)
    bandwidth_hz: Mapped[float | None]
    beam: Mapped[str | None] = mapped_column(String(64))
    flagged_candidate: Mapped[bool] = mapped_column(Boolean, default=False)
    screen_reason: Mapped[str | None] = mapped_column(String(24))
    screening_run_id: Mapped[int | None]


class ScreeningRun(Base):
    """One bulk screening of a cadence's (or a lone scan's) pending hits, as audited.

    Enough is kept to replay it: the complete scans it judged against, the other targets' scans
    it read for occupancy (up to ``occupancy_max_detection_id``), the protocol by hash, the
    counts per reason and the SHA-256 over the sorted ``id:reason`` lines of what it decided.
    """

    __tablename__ = "screening_runs"
    __table_args__ = (Index("ix_screening_runs_site_cadence", "site_id", "cadence"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id"))
    cadence: Mapped[str | None] = mapped_column(String(128))
    trigger_observation_id: Mapped[int] = mapped_column(ForeignKey("observations.id"))
    observation_ids: Mapped[list[Any]] = mapped_column(JSON, default=list)
    occupancy_observation_ids: Mapped[list[Any]] = mapped_column(JSON, default=list)
    occupancy_max_detection_id: Mapped[int | None]
    protocol_sha256: Mapped[str] = mapped_column(String(64))
    bands_sha256: Mapped[str] = mapped_column(String(64), default="")
    counts: Mapped[dict[str, Any]] = mapped_column(JSON, default=dict)
    pending: Mapped[int] = mapped_column(default=0)
    decided_sha256: Mapped[str] = mapped_column(String(64))
    candidate_ids: Mapped[list[Any]] = mapped_column(JSON, default=list)
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
