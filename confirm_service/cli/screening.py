"""``confirm-service screening show|replay``: what screening made of each scan's hits."""

from __future__ import annotations

import click

from confirm_service.cli import main
from confirm_service.cli.context import open_database


@main.group("screening")
def screening_group() -> None:
    """Hits screened out (with their reasons) and screening runs."""


@screening_group.command("show")
@click.argument("observation_ids", nargs=-1, type=int, required=True)
def show(observation_ids: tuple[int, ...]) -> None:
    """Hits per screening reason for each scan (``pending``: not judged yet)."""
    from confirm_service.services.observations import screening_counts

    database = open_database()
    with database.read() as session:
        for observation_id in observation_ids:
            counts = screening_counts(session, observation_id)
            state = "complete" if counts["complete"] else "open"
            click.echo(
                f"scan {observation_id} ({state}, {counts['detection_count']} hits, "
                f"runs {', '.join(map(str, counts['runs'])) or 'none'})"
            )
            for reason, number in counts["reasons"].items():
                click.echo(f"  {reason:<20} {number:>8,}")
            click.echo(f"  {'pending':<20} {counts['pending']:>8,}")


@screening_group.command("replay")
@click.option("--run", "run_ids", multiple=True, type=int, help="Only these runs (default: all).")
def replay(run_ids: tuple[int, ...]) -> None:
    """Recompute screening runs from what they saw; exit 1 if any differs (read only)."""
    from confirm_service.services.screening import replay_runs

    database = open_database()
    with database.read() as session:
        results = replay_runs(session, list(run_ids) or None)
    differing = [r for r in results if not r.reproduced]
    for result in results:
        mark = "same" if result.reproduced else "DIFFERS"
        click.echo(
            f"run {result.run_id}: {mark}  recorded {result.recorded_sha256[:12]}  "
            f"replayed {result.replayed_sha256[:12]}  stored {result.stored_sha256[:12]}"
        )
    click.echo(f"{len(results) - len(differing)} of {len(results)} run(s) reproduced", err=True)
    if differing:
        raise SystemExit(1)
