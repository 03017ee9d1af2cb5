"""Migrations: an empty database on each backend upgrades to a schema equal to the models."""

from __future__ import annotations

from alembic.autogenerate import compare_metadata
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import inspect

from confirm_service.db import alembic_config, make_engine, upgrade_database
from confirm_service.models import Base


def test_empty_database_upgrades_to_the_models(backend):
    # `backend` was created empty and upgraded by the shipped migrations (see conftest).
    engine = make_engine(backend)
    try:
        with engine.connect() as connection:
            context = MigrationContext.configure(connection)
            head = ScriptDirectory.from_config(alembic_config(backend)).get_current_head()
            assert context.get_current_revision() == head
            differences = compare_metadata(context, Base.metadata)
            assert differences == []
            tables = set(inspect(connection).get_table_names())
        assert {"sites", "detections", "candidates", "audit_entries", "signoffs"} <= tables
    finally:
        engine.dispose()


def test_upgrade_is_repeatable(database_url):
    upgrade_database(database_url)
    upgrade_database(database_url)
    engine = make_engine(database_url)
    with engine.connect() as connection:
        assert MigrationContext.configure(connection).get_current_revision() is not None
    engine.dispose()


def test_downgrade_to_base_then_upgrade_again(database_url):
    # Every revision steps down on its own, leaving nothing but Alembic's own table; the chain
    # then upgrades again to a schema equal to the models.
    from alembic import command

    config = alembic_config(database_url)
    chain = [s.revision for s in ScriptDirectory.from_config(config).walk_revisions()]
    engine = make_engine(database_url)
    try:
        for index in range(len(chain)):
            command.downgrade(config, "-1")
            expected = chain[index + 1] if index + 1 < len(chain) else None
            with engine.connect() as connection:
                assert MigrationContext.configure(connection).get_current_revision() == expected
        with engine.connect() as connection:
            assert set(inspect(connection).get_table_names()) <= {"alembic_version"}
        upgrade_database(database_url)
        with engine.connect() as connection:
            context = MigrationContext.configure(connection)
            assert context.get_current_revision() == chain[0]
            assert compare_metadata(context, Base.metadata) == []
    finally:
        engine.dispose()
