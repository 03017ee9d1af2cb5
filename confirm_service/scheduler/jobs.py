"""Work that falls due with time, as named jobs that take the time they run for.

Every job is a function ``(database, settings, now) -> summary``: it opens its own write
transactions and calls the same service functions as the API. ``run_due`` runs them all once,
in order, for one instant (``confirm-service scheduler run-due --now``); the scheduler process
runs each on its own interval. Every run is logged in ``scheduler_runs``.
"""

from __future__ import annotations

import logging
import os
import socket
from collections.abc import Callable
from dataclasses import dataclass
from datetime import datetime

from sqlalchemy import select

from confirm_service.actor import Actor
from confirm_service.config import Settings
from confirm_service.db import Database
from confirm_service.models import Candidate, SchedulerRun
from confirm_service.services import checkpointing, evaluation, scans
from confirm_service.states import CandidateState
from confirm_service.timeutil import utc_now

log = logging.getLogger(__name__)
SCHEDULER = Actor(name="scheduler", role="system")

JobFunction = Callable[[Database, Settings, datetime], str]


def runner_name() -> str:
    """This process, as recorded with each job run: host and process id."""
    return f"{socket.gethostname()}:{os.getpid()}"


def sweep_deadlines(database: Database, settings: Settings, now: datetime) -> str:
    """Re-evaluate every open candidate at ``now``: passed stage deadlines escalate or expire
    it, and checks whose waiting time ran out are decided. One transaction per candidate."""
    with database.read() as session:
        ids = list(
            session.execute(
                select(Candidate.id)
                .where(Candidate.state == CandidateState.OPEN)
                .order_by(Candidate.id)
            ).scalars()
        )
    changed = 0
    for candidate_id in ids:
        with database.write() as session:
            candidate = evaluation.locked_candidate(session, candidate_id)
            if candidate.state != CandidateState.OPEN:
                continue
            before = (candidate.state, candidate.stage, candidate.held)
            evaluation.reevaluate(session, SCHEDULER, candidate, now)
            changed += before != (candidate.state, candidate.stage, candidate.held)
    return f"{len(ids)} open candidate(s) re-evaluated, {changed} changed"


def close_stale_scans(database: Database, settings: Settings, now: datetime) -> str:
    """Complete scans with no hits for the quiet period; their cadences are screened."""
    with database.write() as session:
        closed = scans.close_stale_scans(session, SCHEDULER, now, settings.scan_quiet_period_s)
    return f"{len(closed)} stale scan(s) closed after {settings.scan_quiet_period_s:g} s quiet"


def scheduled_checkpoint(database: Database, settings: Settings, now: datetime) -> str:
    """Sign a checkpoint when the log grew and the latest one is the configured interval old."""
    with database.write() as session:
        checkpoint = checkpointing.checkpoint_if_due(session, settings, now, "scheduled")
        size = checkpoint.tree_size if checkpoint is not None else None
    return f"checkpoint at tree size {size}" if size else "no checkpoint due"


@dataclass(frozen=True)
class DueJob:
    """A named job and how often the scheduler process runs it, in scheduler ticks."""

    name: str
    every_ticks: int
    run: JobFunction


def dispatch_intents(database: Database, settings: Settings, now: datetime) -> str:
    """Turn the protocol's recorded intents into follow-up requests and notices."""
    from confirm_service.services import followups

    with database.read() as session:
        ids = followups.intended_ids(session)
    made = 0
    for intent_id in ids:
        with database.write() as session:
            intent = followups.get_request(session, intent_id, lock=True)
            if intent.status == "intended":
                made += followups.dispatch_intent(session, SCHEDULER, settings, intent, now)
    return f"{len(ids)} intent(s) dispatched, {made} request(s) or notice(s) made"


def announce_stage_changes(database: Database, settings: Settings, now: datetime) -> str:
    """Tell each new stage's contacts about recent stage and state changes."""
    from confirm_service.services import notifications

    with database.write() as session:
        count = notifications.notify_stage_changes(session, SCHEDULER, settings, now)
    return f"{count} notice(s) queued"


def send_due_requests(database: Database, settings: Settings, now: datetime) -> str:
    """Requests whose send time (first window's opening minus the lead time) has come."""
    from confirm_service.services import followups

    with database.read() as session:
        ids = followups.due_to_send_ids(session, now)
    outcomes: dict[str, int] = {}
    for request_id in ids:
        with database.write() as session:
            outcome = followups.send(session, SCHEDULER, settings, request_id, now)
        outcomes[outcome] = outcomes.get(outcome, 0) + 1
    return f"{len(ids)} request(s) due: " + (
        ", ".join(f"{n} {what}" for what, n in sorted(outcomes.items())) or "none"
    )


def deliver_messages(database: Database, settings: Settings, now: datetime) -> str:
    """Every message whose next try is due; failures back off exponentially, with jitter."""
    from confirm_service.services import followups, messages

    counts = messages.deliver_due(database, settings, SCHEDULER, now, followups.on_delivery_result)
    return ", ".join(f"{n} {status}" for status, n in counts.items())


def expire_requests(database: Database, settings: Settings, now: datetime) -> str:
    """Open requests past their deadline expire; reported ones of decided candidates close."""
    from confirm_service.services import followups

    with database.write() as session:
        expired, closed = followups.expire_due(session, SCHEDULER, now)
    return f"{expired} expired, {closed} closed"


JOBS: tuple[DueJob, ...] = (
    DueJob("deadlines", 5, sweep_deadlines),
    DueJob("intents", 1, dispatch_intents),
    DueJob("stage-notices", 1, announce_stage_changes),
    DueJob("send-requests", 1, send_due_requests),
    DueJob("deliveries", 1, deliver_messages),
    DueJob("expiry", 5, expire_requests),
    DueJob("stale-scans", 5, close_stale_scans),
    DueJob("checkpoint", 1, scheduled_checkpoint),
)
"""In the order ``run_due`` runs them: evaluation first, so that the intents it records are
handled in the same pass."""

JOBS_BY_NAME = {job.name: job for job in JOBS}


@dataclass(frozen=True)
class JobRun:
    job: str
    outcome: str  # "ok" or "error"
    summary: str


def run_job(database: Database, settings: Settings, name: str, now: datetime) -> JobRun:
    """Run one job for ``now`` and log the run (job, runner, times, outcome, summary)."""
    job = JOBS_BY_NAME[name]
    with database.write() as session:
        run = SchedulerRun(job=name, runner=runner_name(), due_at=now, started_at=utc_now())
        session.add(run)
        session.flush()
        run_id = run.id
    outcome, summary = "ok", ""
    try:
        summary = job.run(database, settings, now)
    except Exception as exc:
        outcome, summary = "error", f"{type(exc).__name__}: {exc}"
        log.exception("job %s failed", name)
    with database.write() as session:
        row = session.get(SchedulerRun, run_id)
        assert row is not None
        row.finished_at, row.outcome, row.summary = utc_now(), outcome, summary[:2000]
    log.info("%s: %s", name, summary)
    return JobRun(name, outcome, summary)


def run_due(database: Database, settings: Settings, now: datetime) -> list[JobRun]:
    """Run every job once for ``now``, in order."""
    return [run_job(database, settings, job.name, now) for job in JOBS]
