"""``confirm-service token``: API tokens."""

from __future__ import annotations

from datetime import datetime

import click

from confirm_service.cli import main
from confirm_service.cli.context import cli_actor, open_database
from confirm_service.models import ROLES
from confirm_service.services import tokens as service

EXPIRES_HELP = "Lifetime (30d, 12h, 90m, 2w) or an ISO 8601 time with offset; default: none."


def _expiry(text: str | None) -> datetime | None:
    return None if text is None else service.expiry_from(text)


def _when(value: datetime | None, empty: str) -> str:
    return value.strftime("%Y-%m-%d %H:%M:%S") if value else empty


@main.group("token")
def token_group() -> None:
    """API tokens (stored hashed; a secret is shown once)."""


@token_group.command("create")
@click.option("--name", required=True, help="Who or what holds the token (unique).")
@click.option("--role", required=True, type=click.Choice(ROLES))
@click.option("--site", "site_code", default=None, help="Registered site code (role 'site').")
@click.option("--expires", default=None, help=EXPIRES_HELP)
def create(name: str, role: str, site_code: str | None, expires: str | None) -> None:
    """Create a token and print it, and only it, on stdout."""
    database = open_database()
    with database.write() as session:
        token, secret = service.create_token(
            session, cli_actor(), name, role, site_code, _expiry(expires)
        )
        token_id, until = token.id, token.expires_at
    click.echo(secret)
    lifetime = f", valid until {_when(until, '')} UTC" if until else ""
    click.echo(
        f"token {token_id} created for {name!r} with role {role}{lifetime}; it is shown once",
        err=True,
    )


@token_group.command("rotate")
@click.argument("name")
@click.option("--expires", default=None, help="New expiry; default: keep the current one.")
def rotate(name: str, expires: str | None) -> None:
    """Give token NAME a new secret, printed once; the old secret stops working at once."""
    database = open_database()
    with database.write() as session:
        token, secret = service.rotate_token(session, cli_actor(), name, _expiry(expires))
        token_id = token.id
    click.echo(secret)
    click.echo(f"token {token_id} ({name}) rotated; the previous secret no longer works", err=True)


@token_group.command("list")
def list_tokens() -> None:
    """List tokens (never their secrets); times in UTC."""
    database = open_database()
    with database.read() as session:
        rows = service.list_tokens(session)
    click.echo(
        f"{'id':>4}  {'name':<24} {'role':<12} {'site':<8} {'created':<20} "
        f"{'expires':<20} {'last used':<20} state"
    )
    for t in rows:
        click.echo(
            f"{t.id:>4}  {t.name:<24} {t.role:<12} {t.site_code or '-':<8} "
            f"{_when(t.created_at, '-'):<20} {_when(t.expires_at, 'never'):<20} "
            f"{_when(t.last_used_at, 'never'):<20} {service.state_of(t)}"
        )


@token_group.command("revoke")
@click.argument("token_id", type=int)
def revoke(token_id: int) -> None:
    """Revoke a token by id."""
    database = open_database()
    with database.write() as session:
        token = service.revoke_token(session, cli_actor(), token_id)
        name = token.name
    click.echo(f"token {token_id} ({name}) revoked", err=True)
