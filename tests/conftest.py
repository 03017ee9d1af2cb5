"""Shared fixtures: a migrated database on each backend, the app, tokens for every role.

SQLite always; PostgreSQL too when ``CONFIRM_TEST_POSTGRES_URL`` is set. Each xdist worker gets
its own PostgreSQL database; each test starts from empty tables.
"""

from __future__ import annotations

import os
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

from confirm_service.db import upgrade_database

POSTGRES_URL = os.environ.get("CONFIRM_TEST_POSTGRES_URL")
BACKENDS = ["sqlite"] + (["postgresql"] if POSTGRES_URL else [])
ROLES = ("pipeline", "site", "coordinator", "viewer", "admin")


def pytest_sessionstart(session: pytest.Session) -> None:
    if os.environ.get("CONFIRM_REQUIRE_POSTGRES") == "1" and not POSTGRES_URL:
        pytest.exit("CONFIRM_REQUIRE_POSTGRES=1 but CONFIRM_TEST_POSTGRES_URL is not set", 3)


def _worker() -> str:
    return os.environ.get("PYTEST_XDIST_WORKER", f"main{os.getpid()}")


def _postgres_worker_url() -> str:
    assert POSTGRES_URL
    base = make_url(POSTGRES_URL)
    if base.drivername == "postgresql":
        base = base.set(drivername="postgresql+psycopg")
    name = f"{base.database}_confirm_{_worker()}"
    admin = create_engine(base, isolation_level="AUTOCOMMIT")
    with admin.connect() as connection:
        connection.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        connection.execute(text(f'CREATE DATABASE "{name}"'))
    admin.dispose()
    return base.set(database=name).render_as_string(hide_password=False)


def _drop_postgres(url: str) -> None:
    target = make_url(url)
    admin = create_engine(
        target.set(database=make_url(POSTGRES_URL).database), isolation_level="AUTOCOMMIT"
    )
    with admin.connect() as connection:
        connection.execute(text(f'DROP DATABASE IF EXISTS "{target.database}" WITH (FORCE)'))
    admin.dispose()


@pytest.fixture(scope="session", params=BACKENDS)
def backend(
    request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory
) -> Iterator[str]:
    """A migrated template database URL for the backend under test."""
    if request.param == "sqlite":
        template = tmp_path_factory.mktemp("sqlite-template") / "template.db"
        upgrade_database(f"sqlite:///{template}")
        yield f"sqlite:///{template}"
        return
    url = _postgres_worker_url()
    upgrade_database(url)
    yield url
    _drop_postgres(url)


def _truncate_postgres(url: str) -> None:
    engine = create_engine(url)
    with engine.begin() as connection:
        tables = connection.execute(
            text(
                "SELECT tablename FROM pg_tables WHERE schemaname = 'public' "
                "AND tablename <> 'alembic_version'"
            )
        ).scalars()
        names = ", ".join(f'"{t}"' for t in tables)
        connection.execute(text(f"TRUNCATE {names} RESTART IDENTITY CASCADE"))
        connection.execute(text("INSERT INTO audit_head (id, size) VALUES (1, 0)"))
    engine.dispose()


@pytest.fixture
def database_url(backend: str, tmp_path: Path) -> str:
    """An empty, migrated database for one test."""
    if backend.startswith("sqlite"):
        copy = tmp_path / "confirm.db"
        shutil.copyfile(make_url(backend).database, copy)  # type: ignore[arg-type]
        return f"sqlite:///{copy}"
    _truncate_postgres(backend)
    return backend


@pytest.fixture
def app(database_url: str, tmp_path: Path) -> Iterator[Any]:
    from confirm_service.app import create_app
    from confirm_service.audit.checkpoints import set_up_signing_key

    application = create_app({"database_url": database_url, "instance_path": tmp_path / "instance"})
    application.config["TESTING"] = True
    with application.extensions["confirm.db"].read() as session:  # set-up, as `db upgrade` does
        set_up_signing_key(session, application.extensions["confirm.settings"])
    yield application
    application.extensions["confirm.db"].dispose()


@pytest.fixture
def db(app: Any) -> Any:
    return app.extensions["confirm.db"]


@pytest.fixture
def client(app: Any) -> Any:
    return app.test_client()


@pytest.fixture
def tokens(db: Any) -> dict[str, str]:
    """A live token secret for every role; the site token belongs to site ``PRA``.

    ``create_token`` wants a site token's site registered first, but most tests register the
    invented sites themselves afterwards (``factories.setup_log``), so that one row is written
    directly, with its audit entry as ``create_token`` writes it.
    """
    from confirm_service.actor import SYSTEM
    from confirm_service.audit.log import record
    from confirm_service.models import ApiToken
    from confirm_service.services.tokens import TOKEN_PREFIX, create_token, hash_secret

    secrets = {}
    with db.write() as session:
        for role in ROLES:
            if role == "site":
                secrets[role] = f"{TOKEN_PREFIX}test-site-secret-{os.urandom(16).hex()}"
                row = ApiToken(
                    name="test-site",
                    role="site",
                    site_code="PRA",
                    secret_sha256=hash_secret(secrets[role]),
                )
                session.add(row)
                session.flush()
                payload = {"name": row.name, "role": "site", "site": "PRA"}
                record(session, SYSTEM, "token.created", f"token:{row.id}", payload)
                continue
            _, secrets[role] = create_token(session, SYSTEM, f"test-{role}", role)
    return secrets


@pytest.fixture
def auth(tokens: dict[str, str]) -> Any:
    def headers(role: str, **extra: str) -> dict[str, str]:
        return {"Authorization": f"Bearer {tokens[role]}", **extra}

    return headers
