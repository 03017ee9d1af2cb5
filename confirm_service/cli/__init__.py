"""The ``confirm-service`` command group. Each sub-module adds one group of commands."""

from __future__ import annotations

import sys

import click

from confirm_service.config import ConfigError
from confirm_service.errors import ServiceError


class CommandGroup(click.Group):
    """Turns configuration and service errors into a one-line message and exit status 2."""

    def invoke(self, ctx: click.Context) -> object:
        try:
            return super().invoke(ctx)
        except ConfigError as exc:
            click.echo(f"error: {exc}", err=True)
            sys.exit(2)
        except ServiceError as exc:
            click.echo(f"error: {exc.detail}" + (f" ({exc})" if exc.errors else ""), err=True)
            sys.exit(2)


@click.group(cls=CommandGroup)
@click.version_option(package_name="confirm-service")
def main() -> None:
    """Follow-up and confirmation of narrowband technosignature candidates."""


def _register() -> None:
    from confirm_service.cli import (  # noqa: F401  (each module registers its commands)
        audit,
        candidates,
        database,
        demo,
        dossier,
        exchange,
        physics,
        protocol,
        scheduler,
        serve,
        tokens,
    )


_register()
