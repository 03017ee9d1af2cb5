"""Configuration sources and the embedded SQLite settings."""

from __future__ import annotations

import pytest
from sqlalchemy import text

from confirm_service.config import ConfigError, load_settings
from confirm_service.db import Database, upgrade_database


def test_file_then_environment_then_overrides(tmp_path):
    config = tmp_path / "confirm.toml"
    config.write_text('max_batch_detections = 1000\nservice_origin = "from-file"\n')
    environ = {
        "CONFIRM_CONFIG_FILE": str(config),
        "CONFIRM_SERVICE_ORIGIN": "from-env",
        "CONFIRM_INSTANCE_PATH": str(tmp_path),
    }
    settings = load_settings(environ=environ)
    assert settings.max_batch_detections == 1000
    assert settings.service_origin == "from-env"
    assert settings.database_url == f"sqlite:///{tmp_path / 'confirm-service.db'}"
    assert load_settings({"max_batch_detections": 7}, environ).max_batch_detections == 7


@pytest.mark.parametrize(
    ("environ", "words"),
    [
        ({"CONFIRM_DATABASE_URL": "mysql://x@y/z"}, "not supported"),
        ({"CONFIRM_DATABASE_URL": "::"}, "malformed"),
        ({"CONFIRM_CLOCK_SKEW_ALLOWANCE_S": "-3"}, "CONFIRM_CLOCK_SKEW_ALLOWANCE_S"),
    ],
)
def test_bad_values_are_one_line(environ, words):
    with pytest.raises(ConfigError) as caught:
        load_settings(environ=environ)
    assert words in str(caught.value) and "\n" not in str(caught.value)


def test_unknown_key_in_file_is_refused(tmp_path):
    config = tmp_path / "confirm.toml"
    config.write_text("colour = 'blue'\n")
    with pytest.raises(ConfigError, match="unknown setting 'colour'"):
        load_settings(environ={"CONFIRM_CONFIG_FILE": str(config)})


def test_sqlite_runs_in_wal_mode_with_foreign_keys(tmp_path):
    url = f"sqlite:///{tmp_path / 'x.db'}"
    upgrade_database(url)
    database = Database(url)
    with database.engine.connect() as connection:
        assert connection.execute(text("PRAGMA journal_mode")).scalar() == "wal"
        assert connection.execute(text("PRAGMA foreign_keys")).scalar() == 1
    database.dispose()


def test_postgres_url_gets_the_psycopg_driver():
    settings = load_settings(environ={"CONFIRM_DATABASE_URL": "postgresql://u@h/db"})
    assert settings.database_url.startswith("postgresql+psycopg://")


def test_ephemeris_file_setting_switches_the_ephemeris(tmp_path):
    # skyfield-data ships JPL DE421 (the same file the physics tests compare against)
    from skyfield_data import get_skyfield_data_path

    from confirm_service import physics
    from confirm_service.services import runtime

    de421 = f"{get_skyfield_data_path()}/de421.bsp"
    runtime.configure(load_settings({"ephemeris_file": de421}, {}))
    try:
        assert physics.current_ephemeris() == de421
        with pytest.raises(ConfigError, match="CONFIRM_EPHEMERIS_FILE"):
            runtime.configure(load_settings({"ephemeris_file": str(tmp_path / "none.bsp")}, {}))
    finally:
        runtime.configure(load_settings({}, {}))
    assert physics.current_ephemeris() == "builtin"
