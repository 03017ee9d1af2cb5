"""``confirm-service partner``: shared secrets for partner sites' signed messages."""

from __future__ import annotations

import click

from confirm_service.cli import main
from confirm_service.cli.context import cli_actor, open_database


@main.group("partner")
def partner_group() -> None:
    """Partner sites that exchange signed follow-up messages with this service."""


@partner_group.command("secret")
@click.argument("site")
@click.option("--secret", default=None, help="Use this secret (both sides must hold the same).")
def secret(site: str, secret: str | None) -> None:
    """Set SITE's shared secret (a new random one unless --secret) and print it, once."""
    from confirm_service.services.federation import set_partner_secret

    database = open_database()
    with database.write() as session:
        value = set_partner_secret(session, cli_actor(), site, secret)
    click.echo(value)
