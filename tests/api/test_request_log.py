"""One JSON line per request with its id, route, status, duration and token, never a secret."""

from __future__ import annotations

import io
import json
import logging

import pytest

from confirm_service.api.telemetry import REQUEST_LOGGER
from confirm_service.app import create_app
from tests.factories import observation, setup_log

FIELDS = {"request_id", "method", "route", "status", "duration_ms", "token_name", "token_role"}


@pytest.fixture
def request_lines():
    """The request log's lines, as written, from now on."""
    stream = io.StringIO()
    handler = logging.StreamHandler(stream)
    handler.setFormatter(logging.Formatter("%(message)s"))
    logger = logging.getLogger(REQUEST_LOGGER)
    logger.addHandler(handler)
    try:
        yield lambda: stream.getvalue().splitlines()
    finally:
        logger.removeHandler(handler)


def test_one_request_writes_exactly_one_parseable_line(client, auth, request_lines):
    answer = client.get("/api/v1/candidates/12345", headers=auth("viewer"))
    assert answer.status_code == 404
    (line,) = request_lines()
    record = json.loads(line)
    assert set(record) >= FIELDS
    assert record["method"] == "GET"
    assert record["route"] == "/api/v1/candidates/<int:candidate_id>"
    assert record["status"] == 404
    assert record["duration_ms"] >= 0
    assert (record["token_name"], record["token_role"]) == ("test-viewer", "viewer")
    assert answer.headers["X-Request-Id"] == record["request_id"]


def test_a_client_request_id_is_kept_and_a_hostile_one_replaced(client, auth, request_lines):
    kept = client.get("/api/v1/sites", headers=auth("viewer", **{"X-Request-Id": "pipe-42.7"}))
    assert kept.headers["X-Request-Id"] == "pipe-42.7"
    replaced = client.get("/api/v1/sites", headers=auth("viewer", **{"X-Request-Id": 'a b"{'}))
    assert replaced.headers["X-Request-Id"] not in ("", 'a b"{')
    ids = [json.loads(line)["request_id"] for line in request_lines()]
    assert ids == ["pipe-42.7", replaced.headers["X-Request-Id"]]


def test_refused_and_failed_requests_are_logged_without_any_secret(
    client, auth, tokens, request_lines
):
    setup_log(client, auth)
    secret = tokens["pipeline"]
    bearer = {"Authorization": f"Bearer {secret}"}
    before = len(request_lines())
    sent = [
        client.post("/api/v1/observations", json=observation(), headers=bearer),
        client.post("/api/v1/observations", json={"note": secret}, headers=bearer),
        client.get(f"/api/v1/sites?token={secret}", headers=bearer),
        client.get("/api/v1/sites", headers={"Authorization": f"Bearer {secret}x"}),
        client.get("/no-such-page", headers=bearer),
        client.post("/dashboard/sign-in", data={"token": secret}),
    ]
    lines = request_lines()[before:]
    assert len(lines) == len(sent)
    records = [json.loads(line) for line in lines]
    assert [r["status"] for r in records] == [a.status_code for a in sent]
    assert records[0]["token_role"] == "pipeline"
    assert records[3]["token_name"] is None  # refused: no token is named
    assert records[4]["route"] == "(unmatched)"
    for value in (secret, *tokens.values()):
        assert all(value not in line for line in lines)


def test_the_log_can_be_switched_off(database_url, tmp_path, request_lines):
    app = create_app(
        {"database_url": database_url, "instance_path": tmp_path / "i", "request_log": "off"}
    )
    try:
        assert app.test_client().get("/healthz").status_code == 200
        assert request_lines() == []
    finally:
        app.extensions["confirm.db"].dispose()
        logging.getLogger(REQUEST_LOGGER).setLevel(logging.INFO)
