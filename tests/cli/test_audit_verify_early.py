"""``audit verify`` on a log that has entries but no signed checkpoint yet."""

from __future__ import annotations

from sqlalchemy import create_engine, text

from tests.cli.test_basic_commands import run


def test_entries_are_verified_before_the_first_checkpoint(database_url, tmp_path):
    instance = {"CONFIRM_INSTANCE_PATH": str(tmp_path / "fresh-instance")}  # no key made yet
    created = run(
        ["token", "create", "--name", "ops", "--role", "viewer"], database_url, **instance
    )
    assert created.exit_code == 0, created.output
    verified = run(["audit", "verify"], database_url, **instance)
    assert verified.exit_code == 0, verified.output
    assert "1 entries verified" in verified.stdout
    assert "no checkpoint exists yet" in verified.stdout

    engine = create_engine(database_url)
    with engine.begin() as connection:
        connection.execute(text("UPDATE audit_entries SET actor = 'someone-else' WHERE seq = 1"))
    engine.dispose()
    tampered = run(["audit", "verify"], database_url, **instance)
    assert tampered.exit_code == 1
    assert "first bad entry 1" in tampered.stdout
