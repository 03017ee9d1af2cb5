"""``confirm-service scheduler``: deadlines and checkpoints on a schedule."""

from __future__ import annotations

import click

from confirm_service.cli import main
from confirm_service.cli.context import open_database, settings


@main.group("scheduler")
def scheduler_group() -> None:
    """The scheduler process (one per deployment; a leader lock keeps it so)."""


@scheduler_group.command("run")
def run() -> None:
    """Run the scheduler in the foreground until interrupted."""
    from confirm_service.scheduler import run_scheduler

    run_scheduler(open_database(), settings())


@scheduler_group.command("once")
def once() -> None:
    """Run every job once now (deadline sweep, checkpoint) and exit."""
    from confirm_service.scheduler.jobs import scheduled_checkpoint, sweep_deadlines

    database = open_database()
    changed = sweep_deadlines(database)
    size = scheduled_checkpoint(database, settings())
    click.echo(f"deadline sweep: {changed} candidate(s) changed")
    click.echo(f"checkpoint: {'tree size ' + str(size) if size else 'log unchanged, none taken'}")
