"""``confirm-service token``: API tokens."""

from __future__ import annotations

import click

from confirm_service.cli import main
from confirm_service.cli.context import cli_actor, open_database
from confirm_service.models import ROLES
from confirm_service.services import tokens as service


@main.group("token")
def token_group() -> None:
    """API tokens (stored hashed; a secret is shown once)."""


@token_group.command("create")
@click.option("--name", required=True, help="Who or what holds the token.")
@click.option("--role", required=True, type=click.Choice(ROLES))
@click.option("--site", "site_code", default=None, help="Partner site code for role 'site'.")
def create(name: str, role: str, site_code: str | None) -> None:
    """Create a token and print it, and only it, on stdout."""
    database = open_database()
    with database.write() as session:
        token, secret = service.create_token(session, cli_actor(), name, role, site_code)
        token_id = token.id
    click.echo(secret)
    click.echo(
        f"token {token_id} created for {name!r} with role {role}; it is shown once", err=True
    )


@token_group.command("list")
def list_tokens() -> None:
    """List tokens (never their secrets)."""
    database = open_database()
    with database.read() as session:
        rows = service.list_tokens(session)
    click.echo(
        f"{'id':>4}  {'name':<24} {'role':<12} {'created (UTC)':<20} {'last used':<20} state"
    )
    for t in rows:
        last = t.last_used_at.strftime("%Y-%m-%d %H:%M:%S") if t.last_used_at else "never"
        state = "revoked" if t.revoked_at else "live"
        created = t.created_at.strftime("%Y-%m-%d %H:%M:%S")
        click.echo(f"{t.id:>4}  {t.name:<24} {t.role:<12} {created:<20} {last:<20} {state}")


@token_group.command("revoke")
@click.argument("token_id", type=int)
def revoke(token_id: int) -> None:
    """Revoke a token by id."""
    database = open_database()
    with database.write() as session:
        token = service.revoke_token(session, cli_actor(), token_id)
        name = token.name
    click.echo(f"token {token_id} ({name}) revoked", err=True)
