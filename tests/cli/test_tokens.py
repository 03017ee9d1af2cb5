"""Tokens: unique names, expiry, rotation, last use at most once a minute, site binding."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from sqlalchemy import select

from confirm_service.actor import SYSTEM
from confirm_service.errors import Conflict, Invalid, NotFound
from confirm_service.models import ApiToken, IdempotencyRecord
from confirm_service.services import tokens as service
from tests.cli.test_basic_commands import run
from tests.factories import observation, setup_log


def bearer(secret: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {secret}"}


def test_a_token_name_is_given_once(db):
    with db.write() as session:
        service.create_token(session, SYSTEM, "pipeline-east", "pipeline")
    with pytest.raises(Conflict) as refused, db.write() as session:
        service.create_token(session, SYSTEM, "pipeline-east", "viewer")
    assert refused.value.status == 409
    with db.read() as session:
        assert len(session.execute(select(ApiToken)).all()) == 1


def test_the_command_line_refuses_a_second_token_of_the_same_name(database_url, app):
    first = run(["token", "create", "--name", "ops", "--role", "viewer"], database_url)
    assert first.exit_code == 0
    again = run(["token", "create", "--name", "ops", "--role", "admin"], database_url)
    assert again.exit_code == 2
    assert "already used" in again.stderr and again.stdout == ""


def test_idempotency_records_belong_to_the_token_not_its_name(client, auth, db):
    setup_log(client, auth)
    with db.write() as session:
        _, first = service.create_token(session, SYSTEM, "pipeline-a", "pipeline")
        _, second = service.create_token(session, SYSTEM, "pipeline-b", "pipeline")
    key = {"Idempotency-Key": "run-7-scan-1"}
    one = client.post("/api/v1/observations", json=observation(), headers=bearer(first) | key)
    other = client.post("/api/v1/observations", json=observation(), headers=bearer(second) | key)
    assert (one.status_code, other.status_code) == (201, 201)
    assert one.json["id"] != other.json["id"]  # another token's key is not a retry
    with db.write() as session:
        _, rotated = service.rotate_token(session, SYSTEM, "pipeline-a")
        token_id = service.token_by_name(session, "pipeline-a").id
        scopes = set(session.execute(select(IdempotencyRecord.scope)).scalars())
    again = client.post("/api/v1/observations", json=observation(), headers=bearer(rotated) | key)
    assert again.headers["Idempotent-Replayed"] == "true"  # the same holder, a new secret
    assert again.json["id"] == one.json["id"]
    assert any(scope.startswith(f"token:{token_id}:") for scope in scopes)


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("30d", timedelta(days=30)),
        ("12h", timedelta(hours=12)),
        ("90m", timedelta(minutes=90)),
        ("2w", timedelta(weeks=2)),
    ],
)
def test_lifetimes(text, expected):
    now = datetime(2026, 11, 20, tzinfo=UTC)
    assert service.expiry_from(text, now) == now + expected


def test_expiry_as_a_time_needs_an_offset():
    moment = service.expiry_from("2031-04-02T17:00:00+02:00")
    assert moment == datetime(2031, 4, 2, 15, tzinfo=UTC)
    for text in ("2031-04-02T17:00:00", "soon", "0d"):
        with pytest.raises(Invalid):
            service.expiry_from(text)


def test_an_expired_token_is_refused(client, db):
    with db.write() as session:
        token, secret = service.create_token(
            session, SYSTEM, "short-lived", "viewer", expires_at=datetime.now(UTC) + timedelta(1)
        )
    assert client.get("/api/v1/sites", headers=bearer(secret)).status_code == 200
    with db.write() as session:
        session.get(ApiToken, token.id).expires_at = datetime.now(UTC) - timedelta(seconds=1)
    refused = client.get("/api/v1/sites", headers=bearer(secret))
    assert refused.status_code == 401
    assert "expired" in refused.json["detail"]
    with pytest.raises(Invalid), db.write() as session:
        past = datetime.now(UTC) - timedelta(days=1)
        service.create_token(session, SYSTEM, "born-dead", "viewer", expires_at=past)


def test_rotation_replaces_the_secret(database_url, app):
    client = app.test_client()
    create = ["token", "create", "--name", "pipeline-west", "--role", "pipeline"]
    created = run(create, database_url)
    old = created.stdout.strip()
    rotated = run(["token", "rotate", "pipeline-west"], database_url)
    assert rotated.exit_code == 0, rotated.output
    new = rotated.stdout.strip()
    assert new.startswith("cs1_") and new != old
    assert client.get("/api/v1/sites", headers=bearer(old)).status_code == 401
    assert client.get("/api/v1/sites", headers=bearer(new)).status_code == 200
    assert run(["token", "rotate", "nobody"], database_url).exit_code == 2


def test_created_with_expiry_and_listed(database_url, app):
    result = run(
        ["token", "create", "--name", "visitor", "--role", "viewer", "--expires", "30d"],
        database_url,
    )
    assert result.exit_code == 0, result.output
    assert "valid until" in result.stderr
    listed = run(["token", "list"], database_url).stdout
    (line,) = [row for row in listed.splitlines() if "visitor" in row]
    expected = (datetime.now(UTC) + timedelta(days=30)).strftime("%Y-%m-%d")
    assert expected in line and line.endswith("live") and "never" in line  # not used yet


def test_last_use_is_written_at_most_once_a_minute(client, db):
    with db.write() as session:
        token, secret = service.create_token(session, SYSTEM, "busy", "viewer")
    assert client.get("/api/v1/sites", headers=bearer(secret)).status_code == 200
    with db.read() as session:
        first = session.get(ApiToken, token.id).last_used_at
    assert first is not None
    client.get("/api/v1/sites", headers=bearer(secret))
    with db.read() as session:
        assert session.get(ApiToken, token.id).last_used_at == first  # within the minute
    with db.write() as session:
        session.get(ApiToken, token.id).last_used_at = first - timedelta(seconds=61)
    client.get("/api/v1/sites", headers=bearer(secret))
    with db.read() as session:
        assert session.get(ApiToken, token.id).last_used_at > first


def test_a_site_token_names_a_registered_site(client, auth, db):
    with pytest.raises(Invalid), db.write() as session:
        service.create_token(session, SYSTEM, "partner", "site")  # no site
    with pytest.raises(NotFound), db.write() as session:
        service.create_token(session, SYSTEM, "partner", "site", "NOWHERE")
    with pytest.raises(Invalid), db.write() as session:
        service.create_token(session, SYSTEM, "partner", "viewer", "PRA")
    setup_log(client, auth)
    with db.write() as session:
        token, _ = service.create_token(session, SYSTEM, "partner", "site", "PRA")
        assert token.site_code == "PRA"


def test_the_command_line_wants_a_site_for_a_site_token(database_url):
    result = run(["token", "create", "--name", "partner", "--role", "site"], database_url)
    assert result.exit_code == 2
    assert "site" in result.stderr
    result = run(
        ["token", "create", "--name", "partner", "--role", "site", "--site", "NOWHERE"],
        database_url,
    )
    assert result.exit_code == 2 and "unknown site" in result.stderr


def test_upgrade_renames_tokens_that_shared_a_name(tmp_path):
    from sqlalchemy import create_engine, text

    from confirm_service.db import upgrade_database

    url = f"sqlite:///{tmp_path / 'old.db'}"
    upgrade_database(url, "0005")
    engine = create_engine(url)
    with engine.begin() as connection:
        for digest in ("a" * 64, "b" * 64, "c" * 64):
            connection.execute(
                text(
                    "INSERT INTO api_tokens (name, role, secret_sha256, created_at) "
                    "VALUES ('ops', 'viewer', :digest, '2026-11-20 00:00:00')"
                ),
                {"digest": digest},
            )
    upgrade_database(url)
    with engine.connect() as connection:
        names = connection.execute(text("SELECT name FROM api_tokens ORDER BY id")).scalars()
        assert list(names) == ["ops", "ops#2", "ops#3"]
    engine.dispose()
