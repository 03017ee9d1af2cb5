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
@click.option(
    "--new-signing-key",
    is_flag=True,
    help="Key rotation only: create a signing key although the log has checkpoints.",
)
def upgrade(revision: str, new_signing_key: bool) -> None:
    """Create or upgrade the database named by CONFIRM_DATABASE_URL, and set up the instance's
    audit signing key (the only command besides the demo that creates one)."""
    from confirm_service.audit.checkpoints import set_up_signing_key
    from confirm_service.db import Database

    url = settings().database_url
    upgrade_database(url, revision)
    click.echo(f"database at revision {current_revision(url)}", err=True)
    database = Database(url)
    try:
        with database.read() as session:
            path, created = set_up_signing_key(session, settings(), new_signing_key)
    finally:
        database.dispose()
    click.echo(f"audit signing key {'created at' if created else 'kept at'} {path}", err=True)


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
