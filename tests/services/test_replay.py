"""Replay under another protocol changes nothing and is deterministic; a tightened tolerance
changes exactly the candidates it should; adoption by an admin re-evaluates open candidates."""

from __future__ import annotations

import shutil

from click.testing import CliRunner
from sqlalchemy import func, select

from confirm_service.cli import main
from confirm_service.cli.context import settings
from confirm_service.config import DEFAULT_PROTOCOL_FILE
from confirm_service.models import AuditEntry, CheckResult
from confirm_service.services.adoption import adopt_protocol
from confirm_service.services.protocols import load_configured
from confirm_service.services.replay import replay
from tests.services.test_candidate_flow import post_scenario

RATIONALE = "Reviewed."


def tightened_protocol(tmp_path):
    """The default protocol with the drift-agreement tolerance cut to 1e-6 Hz/s."""
    folder = tmp_path / "tight"
    folder.mkdir(parents=True)
    shutil.copy(DEFAULT_PROTOCOL_FILE.parent / "interference_bands.toml", folder)
    text = DEFAULT_PROTOCOL_FILE.read_text()
    for old, new in [
        ("tolerance_hz_s = 0.02 ", "tolerance_hz_s = 0.000001 "),
        ("resolution_multiplier = 3.0 ", "resolution_multiplier = 0.0001 "),
        ('name = "default"', 'name = "tight"'),
    ]:
        assert text.count(old) == 1, old
        text = text.replace(old, new)
    path = folder / "tight.toml"
    path.write_text(text)
    return path


def test_replay_is_read_only_deterministic_and_selective(client, auth, db, tmp_path, database_url):
    candidates = post_scenario(client, auth)
    sky = next(c for c in candidates if c["stage"] == "review")
    with db.read() as session:
        before = (
            session.execute(select(func.count()).select_from(AuditEntry)).scalar_one(),
            session.execute(select(func.count()).select_from(CheckResult)).scalar_one(),
        )
    same = load_configured(DEFAULT_PROTOCOL_FILE)
    tight = load_configured(tightened_protocol(tmp_path))
    with db.read() as session:
        first = replay(session, tight)
        second = replay(session, tight)
        unchanged = replay(session, same)
    assert first == second
    assert [o.candidate_id for o in first if o.differs] == [sky["id"]]
    outcome = next(o for o in first if o.candidate_id == sky["id"])
    assert outcome.replayed_state == "rejected"
    assert "doppler_consistency" in outcome.replayed_reason
    # under the protocol they were decided with, nothing would end differently
    assert [o for o in unchanged if o.differs] == []
    with db.read() as session:
        after = (
            session.execute(select(func.count()).select_from(AuditEntry)).scalar_one(),
            session.execute(select(func.count()).select_from(CheckResult)).scalar_one(),
        )
    assert after == before

    settings.cache_clear()
    result = CliRunner().invoke(
        main,
        ["protocol", "replay", "--protocol", str(tightened_protocol(tmp_path / "cli"))],
        env={"CONFIRM_DATABASE_URL": database_url},
    )
    settings.cache_clear()
    assert result.exit_code == 0, result.output
    assert f"{sky['id']:>9}" in result.stdout
    assert "1 of 2 candidate(s) would end differently" in result.stderr


def test_admin_adoption_re_evaluates_open_candidates(client, auth, db, tmp_path):
    candidates = post_scenario(client, auth)
    sky = next(c for c in candidates if c["stage"] == "review")
    from confirm_service.actor import SYSTEM

    with db.write() as session:
        moved = adopt_protocol(session, SYSTEM, load_configured(tightened_protocol(tmp_path)))
    assert moved == 1
    after = client.get(f"/api/v1/candidates/{sky['id']}", headers=auth("viewer")).get_json()
    assert after["state"] == "rejected"
    assert after["protocol"]["name"] == "tight"
    assert after["reason_class"] == "drift_not_sky_fixed"
    with db.read() as session:
        actions = list(session.execute(select(AuditEntry.action)).scalars())
    assert "protocol.adopted" in actions


def test_protocol_check_reports_key_paths(tmp_path):
    bad = tmp_path / "bad.toml"
    text = DEFAULT_PROTOCOL_FILE.read_text().replace(
        "tolerance_hz_s = 0.02 ", "tolerance_hz_s = -1 "
    )
    bad.write_text(text)
    shutil.copy(DEFAULT_PROTOCOL_FILE.parent / "interference_bands.toml", tmp_path)
    result = CliRunner().invoke(main, ["protocol", "check", str(bad)])
    assert result.exit_code == 1
    assert "stages[0].checks[4].tolerance_hz_s" in result.stdout
    good = CliRunner().invoke(main, ["protocol", "check", str(DEFAULT_PROTOCOL_FILE)])
    assert good.exit_code == 0 and "valid" in good.stdout


def test_candidates_cli_tables(client, auth, database_url):
    candidates = post_scenario(client, auth)
    sky = next(c for c in candidates if c["stage"] == "review")
    settings.cache_clear()
    env = {"CONFIRM_DATABASE_URL": database_url}
    listed = CliRunner().invoke(main, ["candidates", "list", "--state", "rejected"], env=env)
    shown = CliRunner().invoke(main, ["candidates", "show", str(sky["id"])], env=env)
    settings.cache_clear()
    assert listed.exit_code == 0 and shown.exit_code == 0, listed.output + shown.output
    assert listed.stdout.count("rejected") == 1
    assert "doppler_consistency" in shown.stdout and "Hz/s" in shown.stdout
    # a read: the caution belongs where a decision is made, not on every `show`
    assert "not a detection" not in shown.stdout and "CAUTION" not in shown.stdout
