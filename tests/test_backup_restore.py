"""deploy/backup.sh and deploy/restore.sh: a restored copy passes `audit verify` (both backends)."""

from __future__ import annotations

import os
import subprocess
import sys
from collections.abc import Iterator
from pathlib import Path

import pytest
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

ROOT = Path(__file__).resolve().parents[1]
BIN = Path(sys.executable).parent


def sh(script: str, argument: Path, env: dict[str, str]) -> subprocess.CompletedProcess:
    return subprocess.run(
        ["sh", str(ROOT / "deploy" / script), str(argument)],
        env=env,
        capture_output=True,
        text=True,
        timeout=300,
    )


def cli(args: list[str], env: dict[str, str]) -> subprocess.CompletedProcess:
    command = [str(BIN / "confirm-service"), *args]
    return subprocess.run(command, env=env, capture_output=True, text=True, timeout=300)


@pytest.fixture
def empty_target(database_url: str, tmp_path: Path) -> Iterator[str]:
    """An empty database of the same backend to restore into."""
    if database_url.startswith("sqlite"):
        yield f"sqlite:///{tmp_path / 'restored' / 'confirm.db'}"
        return
    source = make_url(database_url)
    name = f"{source.database}_restored"
    admin = create_engine(source, isolation_level="AUTOCOMMIT")
    with admin.connect() as connection:
        connection.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        connection.execute(text(f'CREATE DATABASE "{name}"'))
    yield source.set(database=name).render_as_string(hide_password=False)
    with admin.connect() as connection:
        connection.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
    admin.dispose()


def test_a_restored_backup_passes_audit_verify(database_url, empty_target, tmp_path):
    env = {
        **os.environ,
        "PATH": f"{BIN}:{os.environ.get('PATH', '')}",
        "CONFIRM_DATABASE_URL": database_url,
        "CONFIRM_INSTANCE_PATH": str(tmp_path / "instance"),
    }
    for args in (
        ["db", "upgrade"],  # set-up: the instance's signing key
        ["token", "create", "--name", "ops", "--role", "coordinator"],
        ["audit", "checkpoint", "--reason", "before backup"],
        ["token", "create", "--name", "pipeline-east", "--role", "pipeline"],
    ):
        assert cli(args, env).returncode == 0
    backup = tmp_path / "backup"
    made = sh("backup.sh", backup, env)
    assert made.returncode == 0, made.stderr
    assert (backup / "audit-public-key.pem").read_text().startswith("-----BEGIN PUBLIC KEY")

    restored = sh("restore.sh", backup, {**env, "CONFIRM_DATABASE_URL": empty_target})
    assert restored.returncode == 0, restored.stdout + restored.stderr
    assert "audit log intact: 2 entries and 1 checkpoints verified" in restored.stdout
    listed = cli(["token", "list"], {**env, "CONFIRM_DATABASE_URL": empty_target})
    assert "ops" in listed.stdout and "pipeline-east" in listed.stdout
