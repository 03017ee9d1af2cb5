"""``confirm-service protocol check|replay|adopt``."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from confirm_service.cli import main
from confirm_service.cli.context import cli_actor, open_database


@main.group("protocol")
def protocol_group() -> None:
    """Confirmation protocol files."""


@protocol_group.command("check")
@click.argument("path", type=click.Path(path_type=Path))
def check(path: Path) -> None:
    """Validate a protocol file (and its band file); list every problem with its key path."""
    from confirm_service.protocol import validate_protocol_file

    problems = validate_protocol_file(path)
    for problem in problems:
        click.echo(str(problem))
    if problems:
        click.echo(f"{path}: {len(problems)} problem(s); the service will not load it", err=True)
        sys.exit(1)
    click.echo(f"{path}: valid")


@protocol_group.command("replay")
@click.option("--protocol", "path", type=click.Path(path_type=Path, exists=True), required=True)
@click.option("--candidate", "candidate_id", type=int, default=None)
@click.option("--all", "show_all", is_flag=True, help="also list candidates that do not change")
def replay(path: Path, candidate_id: int | None, show_all: bool) -> None:
    """Evaluate stored candidates under another protocol; print which would end differently.

    Nothing is written.
    """
    from confirm_service.cli.progress import counted, working

    with working("loading the protocol engine and physics"):
        from confirm_service.services.protocols import load_configured
        from confirm_service.services.replay import replay as run_replay

        protocol = load_configured(path)
    database = open_database()
    with database.read() as session, counted("replaying candidates", 0) as advance:
        outcomes = run_replay(
            session, protocol, candidate_id, progress=lambda done, total: advance(1, total)
        )
    changed = [o for o in outcomes if o.differs]
    click.echo(f"{'candidate':>9}  {'recorded':<28} {'under ' + protocol.name:<28} reason")
    for o in outcomes if show_all else changed:
        click.echo(
            f"{o.candidate_id:>9}  {o.recorded_state + '/' + o.recorded_stage:<28} "
            f"{o.replayed_state + '/' + o.replayed_stage:<28} {o.replayed_reason or ''}"
        )
    click.echo(
        f"{len(changed)} of {len(outcomes)} candidate(s) would end differently under "
        f"{protocol.name} ({protocol.content_sha256[:12]}); nothing was changed",
        err=True,
    )


@protocol_group.command("adopt")
@click.argument("path", type=click.Path(path_type=Path, exists=True))
def adopt(path: Path) -> None:
    """(Admin) Put every open candidate, and new ones, under the protocol at PATH."""
    from confirm_service.services.adoption import adopt_protocol
    from confirm_service.services.protocols import load_configured

    protocol = load_configured(path)
    database = open_database()
    with database.write() as session:
        moved = adopt_protocol(session, cli_actor(), protocol)
    click.echo(
        f"adopted {protocol.name} {protocol.version} ({protocol.content_sha256[:12]}); "
        f"{moved} open candidate(s) re-evaluated under it"
    )
