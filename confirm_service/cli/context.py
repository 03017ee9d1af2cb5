"""What every command needs: settings, the database and the acting person."""

from __future__ import annotations

import getpass
import sys
from functools import cache
from typing import Any

import click

from confirm_service.actor import Actor
from confirm_service.config import ConfigError, Settings, load_settings
from confirm_service.db import Database, make_engine
from confirm_service.services import runtime


@cache
def settings() -> Settings:
    loaded = load_settings()
    runtime.configure(loaded)
    return loaded


def cli_actor(role: str = "admin") -> Actor:
    """The operator at the terminal; the command line has the rights of whoever runs it."""
    return Actor(name=f"cli:{getpass.getuser()}", role=role)


def schema_revision(url: str) -> str | None:
    """The Alembic revision stamped in the database, read without loading Alembic (fast)."""
    from sqlalchemy import inspect, text

    engine = make_engine(url)
    try:
        with engine.connect() as connection:
            if not inspect(connection).has_table("alembic_version"):
                return None
            return connection.execute(text("SELECT version_num FROM alembic_version")).scalar()
    finally:
        engine.dispose()


def open_database(require_schema: bool = True) -> Database:
    url = settings().database_url
    if require_schema:
        try:
            revision = schema_revision(url)
        except Exception as exc:  # noqa: BLE001 - any driver error is one line for the operator
            first = str(getattr(exc, "orig", exc)).strip().splitlines()[0]
            raise ConfigError(f"database unreachable: {first}") from None
        if revision is None:
            raise ConfigError(
                "the database has no schema yet: run `confirm-service db upgrade` first"
            )
    return Database(url)


def require_signing_key() -> None:
    """Refuse (one line, exit 2) to start a long-running command without the instance's key."""
    from confirm_service.audit.checkpoints import signing_key

    signing_key(settings())


def validated(model: Any, data: dict[str, Any], writes: bool = True) -> Any:
    """``data`` as the pydantic ``model`` (the API's request schema); a refusal names each
    field and exits with status 2, nothing written."""
    from pydantic import ValidationError

    try:
        return model.model_validate({k: v for k, v in data.items() if v is not None})
    except ValidationError as exc:
        for error in exc.errors(include_url=False):
            where = ".".join(str(part) for part in error["loc"]) or "input"
            click.echo(f"error: {where}: {error['msg']}", err=True)
        if writes:
            click.echo("nothing was written", err=True)
        sys.exit(2)
