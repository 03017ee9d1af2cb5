"""``confirm-service db``: schema migrations."""

from __future__ import annotations

import click

from confirm_service.cli import main
from confirm_service.cli.context import settings
from confirm_service.db import current_revision, upgrade_database


@main.group("db")
def db_group() -> None:
    """Database schema."""


@db_group.command("upgrade")
@click.option("--revision", default="head", show_default=True, help="Alembic revision.")
def upgrade(revision: str) -> None:
    """Create or upgrade the database named by CONFIRM_DATABASE_URL."""
    url = settings().database_url
    upgrade_database(url, revision)
    click.echo(f"database at revision {current_revision(url)}", err=True)


@db_group.command("current")
def current() -> None:
    """Print the schema revision of the database."""
    click.echo(current_revision(settings().database_url) or "none")


@db_group.command("revision")
@click.option("-m", "--message", required=True, help="What the migration changes.")
def revision(message: str) -> None:
    """(Developers) generate a migration from the models against the database at head."""
    from alembic import command

    from confirm_service.db import alembic_config

    command.revision(alembic_config(settings().database_url), message=message, autogenerate=True)
