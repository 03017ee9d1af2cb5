"""No token secret reaches a log line, whatever happens to the request carrying it."""

from __future__ import annotations

import logging

from confirm_service.actor import SYSTEM
from confirm_service.services.tokens import create_token, rotate_token
from tests.factories import observation, setup_log


def test_secrets_never_appear_in_log_records(app, client, auth, db, caplog):
    caplog.set_level(logging.DEBUG)
    with db.write() as session:
        _, secret = create_token(session, SYSTEM, "pipeline-logs", "pipeline")
    bearer = {"Authorization": f"Bearer {secret}"}
    setup_log(client, auth)
    client.post("/api/v1/observations", json=observation(), headers=bearer)
    client.post("/api/v1/observations", json=observation(duration_s=-1), headers=bearer)
    client.post("/api/v1/observations", data="{not json", headers=bearer)
    client.get("/api/v1/observations/1?colour=red", headers=bearer)
    with db.write() as session:
        _, new_secret = rotate_token(session, SYSTEM, "pipeline-logs")
    client.get("/api/v1/sites", headers=bearer)  # the old secret, now refused
    client.post("/dashboard/sign-in", data={"token": secret})
    app.extensions["confirm.db"].engine.dispose()
    lines = [record.getMessage() for record in caplog.records]
    lines += [caplog.text]
    for value in (secret, new_secret, *auth("admin").values()):
        assert all(value not in line for line in lines)
