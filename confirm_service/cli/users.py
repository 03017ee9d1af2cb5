"""``confirm-service user create|list|unlock|disable|password``: people's accounts."""

from __future__ import annotations

import sys

import click

from confirm_service.cli import main
from confirm_service.cli.context import cli_actor, open_database
from confirm_service.timeutil import utc_and_mjd

ROLE_CHOICES = ("coordinator", "viewer", "admin")


def _password(from_stdin: bool) -> str:
    if from_stdin:
        return sys.stdin.readline().rstrip("\r\n")
    return click.prompt("Password", hide_input=True, confirmation_prompt=True, err=True)


@main.group("user")
def user_group() -> None:
    """People's accounts for the web pages (passwords stored as scrypt hashes)."""


@user_group.command("create")
@click.argument("username")
@click.option("--role", required=True, type=click.Choice(ROLE_CHOICES))
@click.option("--name", "display_name", default="", help="Full name shown on the pages.")
@click.option(
    "--password-stdin", is_flag=True, help="Read the password from the first line of stdin."
)
def create(username: str, role: str, display_name: str, password_stdin: bool) -> None:
    """Create an account USERNAME; the password is asked for (at least 12 characters)."""
    from confirm_service.services import people

    password = _password(password_stdin)
    with open_database().write() as session:
        people.create_person(session, cli_actor(), username, display_name, role, password)
    click.echo(f"user {username} created with role {role}")


@user_group.command("list")
def list_users() -> None:
    """Accounts with their role and state (never a password)."""
    from confirm_service.services import people
    from confirm_service.timeutil import utc_now

    now = utc_now()
    with open_database().read() as session:
        rows = people.list_people(session)
        click.echo(f"{'user':<20} {'role':<12} {'state':<8} last sign-in")
        for p in rows:
            state = "disabled" if p.disabled_at else "live"
            if not p.disabled_at and p.locked_until and p.locked_until > now:
                state = "locked"
            click.echo(f"{p.username:<20} {p.role:<12} {state:<8} {utc_and_mjd(p.last_sign_in_at)}")
    click.echo(f"{len(rows)} account(s)", err=True)


@user_group.command("unlock")
@click.argument("username")
def unlock(username: str) -> None:
    """Lift a lock-out after repeated wrong passwords."""
    from confirm_service.services import people

    with open_database().write() as session:
        people.unlock(session, cli_actor(), username)
    click.echo(f"user {username} unlocked")


@user_group.command("disable")
@click.argument("username")
def disable(username: str) -> None:
    """End an account; its open sessions end at their next request."""
    from confirm_service.services import people

    with open_database().write() as session:
        people.disable(session, cli_actor(), username)
    click.echo(f"user {username} disabled")


@user_group.command("password")
@click.argument("username")
@click.option(
    "--password-stdin", is_flag=True, help="Read the password from the first line of stdin."
)
def password(username: str, password_stdin: bool) -> None:
    """Set a new password (also lifts a lock-out)."""
    from confirm_service.services import people

    new = _password(password_stdin)
    with open_database().write() as session:
        people.set_password(session, cli_actor(), username, new)
    click.echo(f"password of {username} changed")
