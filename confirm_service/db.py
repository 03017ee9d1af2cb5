"""Engine, sessions and migrations.

SQLite gets WAL mode, foreign keys, a busy timeout, and ``BEGIN IMMEDIATE`` for write sessions so
that concurrent writers queue instead of failing on lock upgrade.
"""

from __future__ import annotations

import logging
from collections.abc import Iterator
from contextlib import contextmanager, suppress
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, create_engine, event, text
from sqlalchemy.engine import make_url
from sqlalchemy.exc import OperationalError
from sqlalchemy.orm import Session, sessionmaker

from confirm_service import metrics
from confirm_service.config import PACKAGE_DIR, ConfigError
from confirm_service.errors import Unavailable

logger = logging.getLogger(__name__)
MIGRATIONS_DIR = PACKAGE_DIR / "migrations"
_WRITE_OPTION = "confirm_write"
POSTGRES_CONNECT_TIMEOUT_S = 10
"""A PostgreSQL server that does not answer within this time counts as unreachable."""


def _install_sqlite_pragmas(engine: Engine) -> None:
    @event.listens_for(engine, "connect")
    def _on_connect(dbapi_connection: Any, _record: Any) -> None:
        dbapi_connection.isolation_level = None  # we issue BEGIN ourselves
        cursor = dbapi_connection.cursor()
        cursor.execute("PRAGMA journal_mode=WAL")
        cursor.execute("PRAGMA foreign_keys=ON")
        cursor.execute("PRAGMA busy_timeout=30000")
        cursor.execute("PRAGMA synchronous=NORMAL")
        cursor.execute("PRAGMA cache_size=-65536")  # 64 MiB of page cache per connection
        # Checkpoint the WAL every ~64 MiB instead of every 4 MiB: bulk ingest spends less time
        # copying pages back into the database file during commits.
        cursor.execute("PRAGMA wal_autocheckpoint=16384")
        cursor.close()

    @event.listens_for(engine, "begin")
    def _on_begin(connection: Any) -> None:
        immediate = connection.get_execution_options().get(_WRITE_OPTION, False)
        connection.exec_driver_sql("BEGIN IMMEDIATE" if immediate else "BEGIN")


def parameter_marker(dialect: Any) -> str:
    """The DB-API placeholder of ``dialect``'s driver for raw statements: ``%s`` or ``?``."""
    return "%s" if dialect.paramstyle in ("format", "pyformat") else "?"


def make_engine(database_url: str) -> Engine:
    """Create the engine for ``database_url``; for SQLite, create the file's folder."""
    url = make_url(database_url)
    if url.get_backend_name() == "sqlite":
        if url.database and url.database != ":memory:":
            # An unusable path is not fatal here: every session then answers "unavailable".
            with suppress(OSError):
                Path(url.database).parent.mkdir(parents=True, exist_ok=True)
        engine = create_engine(url, connect_args={"timeout": 30})
        _install_sqlite_pragmas(engine)
        return engine
    return create_engine(
        url,
        pool_pre_ping=True,
        pool_size=10,
        max_overflow=20,
        connect_args={"connect_timeout": POSTGRES_CONNECT_TIMEOUT_S},
    )


def _unavailable(exc: OperationalError) -> Unavailable:
    """The operator's reason stays in the log; the client learns only that it may retry."""
    reason = str(exc.orig).strip().splitlines()[0] if exc.orig else type(exc).__name__
    logger.warning("database unavailable: %s", reason)
    return Unavailable("the database is unavailable; try again later")


class Database:
    """The engine and two session factories: read (deferred) and write (serialised on SQLite)."""

    def __init__(self, database_url: str) -> None:
        self.url = database_url
        self.engine = make_engine(database_url)
        self.is_sqlite = self.engine.dialect.name == "sqlite"
        write_bind = self.engine.execution_options(**{_WRITE_OPTION: True})
        self._read = sessionmaker(self.engine, expire_on_commit=False)
        self._write = sessionmaker(write_bind, expire_on_commit=False)

    @contextmanager
    def read(self) -> Iterator[Session]:
        """A session for reading; closed (its transaction released) at the end.

        Objects loaded in it stay readable afterwards: closing detaches without expiring.
        """
        session = self._read()
        try:
            yield session
        except OperationalError as exc:
            raise _unavailable(exc) from exc
        finally:
            session.close()

    @contextmanager
    def write(self) -> Iterator[Session]:
        """One transaction: committed if the block succeeds, rolled back otherwise."""
        session = self._write()
        try:
            yield session
            session.commit()
        except OperationalError as exc:
            metrics.drop_counts(session)
            with suppress(Exception):
                session.rollback()
            raise _unavailable(exc) from exc
        except BaseException:
            metrics.drop_counts(session)
            session.rollback()
            raise
        else:
            metrics.apply_counts(session)
        finally:
            session.close()

    def ping(self) -> bool:
        """True when the database answers a trivial query."""
        try:
            with self.engine.connect() as connection:
                connection.execute(text("SELECT 1"))
                connection.rollback()
            return True
        except Exception:
            return False

    def dispose(self) -> None:
        self.engine.dispose()


def alembic_config(database_url: str) -> Any:
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS_DIR))
    config.set_main_option("sqlalchemy.url", database_url.replace("%", "%%"))
    return config


def upgrade_database(database_url: str, revision: str = "head") -> None:
    """Create or upgrade the schema of ``database_url`` with the shipped Alembic migrations."""
    from alembic import command
    from sqlalchemy.exc import OperationalError

    try:
        command.upgrade(alembic_config(database_url), revision)
    except OperationalError as exc:
        first_line = str(exc.orig).strip().splitlines()[0] if exc.orig else str(exc)
        raise ConfigError(f"database unreachable: {first_line}") from None


def current_revision(database_url: str) -> str | None:
    from alembic.runtime.migration import MigrationContext

    engine = make_engine(database_url)
    try:
        with engine.connect() as connection:
            return MigrationContext.configure(connection).get_current_revision()
    finally:
        engine.dispose()
