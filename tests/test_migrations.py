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


def _insert_without_references(database_url: str, statements: list[str]) -> None:
    """Rows whose referenced rows do not matter here: foreign keys off for this transaction."""
    from sqlalchemy import create_engine, text

    engine = create_engine(database_url)  # no SQLite pragma: foreign keys are not enforced
    try:
        with engine.begin() as connection:
            if engine.dialect.name == "postgresql":
                connection.execute(text("SET LOCAL session_replication_role = replica"))
            for statement in statements:
                connection.execute(text(statement))
    finally:
        engine.dispose()


def test_final_state_is_renamed_passed_protocol_and_back(database_url):
    # 0007 renames the stored final state "confirmed" (read in the trade as a verified real
    # signal) to "passed_protocol" in candidates and their history; its downgrade restores it.
    from alembic import command
    from sqlalchemy import text

    config = alembic_config(database_url)
    command.downgrade(config, "0006")
    now = "'2026-12-02 12:00:00+00:00'"
    _insert_without_references(
        database_url,
        [
            "INSERT INTO candidates (id, reference_detection_id, site_id, protocol_name, "
            "protocol_sha256, bands_sha256, state, stage, stage_entered_at, held, "
            "hold_released, origin, reference_unix_s, barycentric_frequency_hz, "
            "residual_drift_hz_s, evaluation_count, created_at, updated_at) VALUES "
            f"(1, 1, 1, 'p', 'x', '', 'confirmed', 'review', {now}, false, false, 'intake', "
            f"0, 1.0, 0.0, 1, {now}, {now}), "
            f"(2, 2, 1, 'p', 'x', '', 'open', 'review', {now}, false, false, 'intake', "
            f"0, 1.0, 0.0, 1, {now}, {now})",
            "INSERT INTO stage_transitions (id, candidate_id, from_stage, to_stage, from_state, "
            f"to_state, reason, actor, at) VALUES (1, 1, 'review', 'review', 'open', "
            f"'confirmed', 'passed', 'system', {now})",
        ],
    )
    engine = make_engine(database_url)
    states = text("SELECT state FROM candidates ORDER BY id")
    history = text("SELECT from_state, to_state FROM stage_transitions")
    try:
        upgrade_database(database_url, "0007")
        with engine.connect() as connection:
            assert connection.execute(states).scalars().all() == ["passed_protocol", "open"]
            assert connection.execute(history).one() == ("open", "passed_protocol")
        command.downgrade(config, "0006")
        with engine.connect() as connection:
            assert connection.execute(states).scalars().all() == ["confirmed", "open"]
            assert connection.execute(history).one() == ("open", "confirmed")
        with engine.begin() as connection:  # later migrations may copy tables: keys must hold
            connection.execute(text("DELETE FROM stage_transitions"))
            connection.execute(text("DELETE FROM candidates"))
        upgrade_database(database_url)
    finally:
        engine.dispose()
