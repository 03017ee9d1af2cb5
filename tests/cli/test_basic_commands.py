"""The command line: db upgrade, tokens, and one-line refusals of bad configuration."""

from __future__ import annotations

from alembic.script import ScriptDirectory
from click.testing import CliRunner

from confirm_service.cli import main
from confirm_service.cli.context import settings
from confirm_service.db import alembic_config


def run(args, database_url, **env):
    settings.cache_clear()
    runner = CliRunner()
    result = runner.invoke(main, args, env={"CONFIRM_DATABASE_URL": database_url, **env})
    settings.cache_clear()
    return result


def test_token_create_prints_only_the_token(database_url, app):
    result = run(["token", "create", "--name", "pipeline-east", "--role", "pipeline"], database_url)
    assert result.exit_code == 0, result.output
    secret = result.stdout.strip()
    assert secret.startswith("cs1_") and "\n" not in secret and len(secret) > 40
    response = app.test_client().get("/api/v1/sites", headers={"Authorization": f"Bearer {secret}"})
    assert response.status_code == 200
    listed = run(["token", "list"], database_url)
    assert "pipeline-east" in listed.stdout and secret not in listed.stdout
    token_id = [line.split()[0] for line in listed.stdout.splitlines() if "pipeline-east" in line]
    revoked = run(["token", "revoke", token_id[0]], database_url)
    assert revoked.exit_code == 0
    response = app.test_client().get("/api/v1/sites", headers={"Authorization": f"Bearer {secret}"})
    assert response.status_code == 401


def test_unknown_role_is_refused(database_url):
    result = run(["token", "create", "--name", "x", "--role", "emperor"], database_url)
    assert result.exit_code == 2


def test_malformed_database_url_is_one_line(tmp_path):
    result = run(["token", "list"], "not a url at all")
    assert result.exit_code == 2
    assert result.stderr.strip().count("\n") == 0
    assert "malformed" in result.stderr
    assert "Traceback" not in result.output


def test_unreachable_database_is_one_line():
    result = run(["db", "upgrade"], "postgresql+psycopg://nobody@127.0.0.1:1/none")
    assert result.exit_code == 2
    assert result.stderr.strip().count("\n") == 0
    assert "unreachable" in result.stderr


def test_empty_database_asks_for_upgrade(tmp_path):
    result = run(["token", "list"], f"sqlite:///{tmp_path / 'fresh.db'}")
    assert result.exit_code == 2
    assert "db upgrade" in result.stderr


def test_bad_config_value_is_one_line(database_url):
    result = run(["token", "list"], database_url, CONFIRM_MAX_BATCH_DETECTIONS="many")
    assert result.exit_code == 2
    assert "CONFIRM_MAX_BATCH_DETECTIONS" in result.stderr
    assert result.stderr.strip().count("\n") == 0


def test_db_upgrade_creates_a_database(tmp_path):
    url = f"sqlite:///{tmp_path / 'new.db'}"
    result = run(["db", "upgrade"], url)
    assert result.exit_code == 0, result.output
    head = ScriptDirectory.from_config(alembic_config(url)).get_current_head()
    assert run(["db", "current"], url).stdout.strip() == head
