"""``confirm-service scheduler``: the scheduler process, and due work run once for a given time."""

from __future__ import annotations

import sys
from datetime import datetime

import click

from confirm_service.cli import main
from confirm_service.cli.context import open_database, require_signing_key, settings
from confirm_service.timeutil import require_aware_utc, utc_now


@main.group("scheduler")
def scheduler_group() -> None:
    """The scheduler process (one leads per deployment; others wait as standbys)."""


@scheduler_group.command("run")
def run() -> None:
    """Run the scheduler in the foreground until interrupted (waits while another leads)."""
    from confirm_service.scheduler import run_scheduler

    require_signing_key()
    run_scheduler(open_database(), settings())


def _aware(value: str) -> datetime:
    try:
        return require_aware_utc(datetime.fromisoformat(value), "--now")
    except ValueError as exc:
        raise click.BadParameter(str(exc), param_hint="--now") from None


@scheduler_group.command("run-due")
@click.option("--now", "now_text", required=True, help="ISO 8601 time with offset")
def run_due(now_text: str) -> None:
    """Run every job that is due at --now once, print one line per job, and exit.

    Refused while a scheduler process leads (it would do the same work). Exit status 1 when a
    job failed.
    """
    _run_once(_aware(now_text))


@scheduler_group.command("once")
def once() -> None:
    """Run every job once for the current time and exit (run-due --now <now>)."""
    _run_once(utc_now())


def _run_once(now: datetime) -> None:
    from confirm_service.scheduler import lock_dir
    from confirm_service.scheduler.jobs import run_due as run_all
    from confirm_service.scheduler.leader import LeaderLock

    database = open_database()
    config = settings()
    lock = LeaderLock(database, lock_dir(database, config))
    if not lock.acquire():
        click.echo("a scheduler process is leading; it runs the due work", err=True)
        sys.exit(2)
    try:
        runs = run_all(database, config, now)
    finally:
        lock.release()
    for job_run in runs:
        click.echo(f"{job_run.job}: {job_run.outcome}: {job_run.summary}")
    if any(job_run.outcome != "ok" for job_run in runs):
        sys.exit(1)
