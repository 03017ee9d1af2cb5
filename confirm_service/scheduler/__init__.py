"""The scheduler process: APScheduler with its job store in the service's database.

One process leads (see :mod:`.leader`); others wait as standbys and take over when it dies.
Each job calls the same services as the API through :func:`.jobs.run_job`.
"""

from __future__ import annotations

import logging
import signal
import threading
from pathlib import Path
from typing import Any

from apscheduler.jobstores.sqlalchemy import SQLAlchemyJobStore
from apscheduler.schedulers.background import BackgroundScheduler
from prometheus_client import start_http_server
from sqlalchemy.engine import make_url

from confirm_service.config import Settings
from confirm_service.db import Database
from confirm_service.scheduler.jobs import JOBS, run_job, runner_name
from confirm_service.scheduler.leader import LeaderLock
from confirm_service.timeutil import utc_now

log = logging.getLogger(__name__)
JOB_TABLE = "scheduler_jobs"
_process: dict[str, Any] = {}


def scheduled_run(name: str) -> None:
    """Entry point the job store keeps by reference: run job ``name`` for the current time."""
    lock: LeaderLock = _process["lock"]
    if not lock.still_held():
        log.error("leader lock lost; stopping so that a standby takes over")
        _process["stop"].set()
        return
    run_job(_process["database"], _process["settings"], name, utc_now())


def lock_dir(database: Database, settings: Settings) -> Path:
    """Beside the SQLite file; the instance folder for other backends (unused there)."""
    if database.is_sqlite:
        path = make_url(settings.database_url).database
        if path and path != ":memory:":
            return Path(path).resolve().parent
    return settings.instance_path


def build_scheduler(database: Database, settings: Settings) -> BackgroundScheduler:
    """Every job on its interval (``every_ticks`` x ``scheduler_tick_s``), kept in the database."""
    store = SQLAlchemyJobStore(engine=database.engine, tablename=JOB_TABLE)
    scheduler = BackgroundScheduler(timezone="UTC", jobstores={"default": store})
    for job in JOBS:
        interval_s = job.every_ticks * settings.scheduler_tick_s
        scheduler.add_job(
            "confirm_service.scheduler:scheduled_run",
            "interval",
            seconds=interval_s,
            args=[job.name],
            id=job.name,
            name=job.name,
            max_instances=1,
            coalesce=True,
            misfire_grace_time=int(max(interval_s, 60)),
            replace_existing=True,
        )
    return scheduler


def run_scheduler(
    database: Database, settings: Settings, stop: threading.Event | None = None
) -> None:
    """Wait as a standby until this process leads, then run the jobs until ``stop`` or a signal."""
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(levelname)s %(message)s")
    stop = stop or threading.Event()
    if threading.current_thread() is threading.main_thread():
        for number in (signal.SIGTERM, signal.SIGINT):
            signal.signal(number, lambda *_: stop.set())
    if settings.scheduler_metrics_port:
        # The scheduler's own counters (deliveries, evaluations of the deadline sweep), on
        # loopback for a local Prometheus agent; web workers show theirs at /api/v1/metrics.
        start_http_server(settings.scheduler_metrics_port, addr="127.0.0.1")
    lock = LeaderLock(database, lock_dir(database, settings))
    log.info("scheduler %s: waiting for the leader lock (standby)", runner_name())
    if not lock.wait(settings.scheduler_standby_poll_s, stop):
        return
    log.info("scheduler %s: leading", runner_name())
    _process.update(database=database, settings=settings, lock=lock, stop=stop)
    scheduler = build_scheduler(database, settings)
    try:
        scheduler.start()
        while not stop.wait(settings.scheduler_standby_poll_s):
            if not lock.still_held():
                log.error("leader lock lost; stopping")
                break
    finally:
        scheduler.shutdown(wait=True)
        lock.release()
        _process.clear()
