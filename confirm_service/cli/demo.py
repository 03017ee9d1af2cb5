"""``confirm-service demo``: the whole service on an invented scenario, on embedded SQLite."""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path

import click

from confirm_service.cli import main


@main.command("demo")
@click.option(
    "--dir",
    "folder",
    type=click.Path(path_type=Path),
    default=None,
    help="Folder to create (default: ./confirm-demo-<UTC time>). Must not exist.",
)
def demo(folder: Path | None) -> None:
    """Create a fresh SQLite database and run an invented scenario through the service."""
    from confirm_service.demo import dashboard_sign_in, run_demo, summary_lines

    if folder is None:
        folder = Path.cwd() / f"confirm-demo-{datetime.now(UTC):%Y%m%dT%H%M%SZ}"
    if folder.exists():
        raise click.UsageError(f"{folder} exists; the demo needs a new folder")
    click.echo(f"confirm-service demo in {folder}")
    result = run_demo(folder, click.echo)
    for line in summary_lines(result) + dashboard_sign_in(result):
        click.echo(line)
