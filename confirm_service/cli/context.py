"""What every command needs: settings, the database and the acting person."""

from __future__ import annotations

import getpass
from functools import cache

from confirm_service.actor import Actor
from confirm_service.config import ConfigError, Settings, load_settings
from confirm_service.db import Database, current_revision
from confirm_service.services import runtime


@cache
def settings() -> Settings:
    loaded = load_settings()
    runtime.configure(loaded)
    return loaded


def cli_actor(role: str = "admin") -> Actor:
    """The operator at the terminal; the command line has the rights of whoever runs it."""
    return Actor(name=f"cli:{getpass.getuser()}", role=role)


def open_database(require_schema: bool = True) -> Database:
    url = settings().database_url
    if require_schema:
        try:
            revision = current_revision(url)
        except Exception as exc:  # noqa: BLE001 - any driver error is one line for the operator
            first = str(getattr(exc, "orig", exc)).strip().splitlines()[0]
            raise ConfigError(f"database unreachable: {first}") from None
        if revision is None:
            raise ConfigError(
                "the database has no schema yet: run `confirm-service db upgrade` first"
            )
    return Database(url)
