"""The scheduler's tables: APScheduler's job store and a log of every job run."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy import Float, Index, LargeBinary, String, Text, Unicode
from sqlalchemy.orm import Mapped, mapped_column

from confirm_service.models.base import Base


class SchedulerJob(Base):
    """APScheduler's job store (SQLAlchemyJobStore), declared here so migrations own it."""

    __tablename__ = "scheduler_jobs"

    id: Mapped[str] = mapped_column(Unicode(191), primary_key=True)
    next_run_time: Mapped[float | None] = mapped_column(Float(25), index=True)
    job_state: Mapped[bytes] = mapped_column(LargeBinary)


class SchedulerRun(Base):
    """One run of one scheduled job: which process ran it, for which time, with what result."""

    __tablename__ = "scheduler_runs"
    __table_args__ = (Index("ix_scheduler_runs_job_started_at", "job", "started_at"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    job: Mapped[str] = mapped_column(String(64))
    runner: Mapped[str] = mapped_column(String(200))
    due_at: Mapped[datetime]
    started_at: Mapped[datetime]
    finished_at: Mapped[datetime | None]
    outcome: Mapped[str] = mapped_column(String(16), default="running")
    summary: Mapped[str | None] = mapped_column(Text)
