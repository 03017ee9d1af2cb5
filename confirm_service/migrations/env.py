"""Alembic environment: runs the shipped migrations against the configured database."""

from __future__ import annotations

from alembic import context

from confirm_service.db import make_engine
from confirm_service.models import Base

target_metadata = Base.metadata


def run_migrations_online() -> None:
    url = context.config.get_main_option("sqlalchemy.url")
    if url is None:
        raise RuntimeError("the Alembic configuration names no sqlalchemy.url")
    engine = make_engine(url)
    with engine.connect() as connection:
        context.configure(
            connection=connection,
            target_metadata=target_metadata,
            render_as_batch=connection.dialect.name == "sqlite",
        )
        with context.begin_transaction():
            context.run_migrations()
        connection.commit()
    engine.dispose()


run_migrations_online()
