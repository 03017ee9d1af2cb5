"""Only set-up creates the audit signing key; every other command refuses without it.

A command run from another folder with only CONFIRM_DATABASE_URL set used to create a fresh key
in ./instance and sign a checkpoint with it into the existing log, after which `audit verify`
failed for good.
"""

from __future__ import annotations

from click.testing import CliRunner

from confirm_service.cli import main
from confirm_service.cli.context import settings


def run(args, env, cwd=None, monkeypatch=None):
    settings.cache_clear()
    if cwd is not None:
        monkeypatch.chdir(cwd)
    result = CliRunner().invoke(main, args, env=env)
    settings.cache_clear()
    return result


def test_commands_refuse_without_the_key_and_the_log_stays_verifiable(tmp_path, monkeypatch):
    url = f"sqlite:///{tmp_path / 'log.db'}"
    instance = tmp_path / "instance"
    home = {"CONFIRM_DATABASE_URL": url, "CONFIRM_INSTANCE_PATH": str(instance)}
    set_up = run(["db", "upgrade"], home)
    assert set_up.exit_code == 0, set_up.output
    assert (instance / "audit-signing-key.pem").exists()
    assert f"created at {instance / 'audit-signing-key.pem'}" in set_up.stderr
    assert run(["audit", "checkpoint"], home).exit_code == 0

    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    only_url = {"CONFIRM_DATABASE_URL": url, "CONFIRM_INSTANCE_PATH": None}
    for args in (["audit", "checkpoint"], ["audit", "public-key"], ["serve", "--port", "1"]):
        refused = run(args, only_url, elsewhere, monkeypatch)
        assert refused.exit_code == 2, (args, refused.output)
        message = refused.stderr.strip()
        assert "\n" not in message and "Traceback" not in refused.output
        assert "no audit signing key" in message and "CONFIRM_INSTANCE_PATH" in message
    assert not (elsewhere / "instance").exists()

    # set-up from the wrong folder does not make a second key for a log that has checkpoints
    again = run(["db", "upgrade"], only_url, elsewhere, monkeypatch)
    assert again.exit_code == 2
    assert "signed by key" in again.stderr
    assert not (elsewhere / "instance").exists()

    verified = run(["audit", "verify"], home)
    assert verified.exit_code == 0, verified.output


def test_rotation_makes_a_new_key_only_when_asked(tmp_path):
    url = f"sqlite:///{tmp_path / 'log.db'}"
    home = {"CONFIRM_DATABASE_URL": url, "CONFIRM_INSTANCE_PATH": str(tmp_path / "a")}
    assert run(["db", "upgrade"], home).exit_code == 0
    assert run(["audit", "checkpoint"], home).exit_code == 0
    (tmp_path / "a" / "audit-signing-key.pem").rename(tmp_path / "old-key.pem")
    assert run(["db", "upgrade"], home).exit_code == 2
    rotated = run(["db", "upgrade", "--new-signing-key"], home)
    assert rotated.exit_code == 0 and "created at" in rotated.stderr
    assert run(["audit", "checkpoint"], home).exit_code == 0
