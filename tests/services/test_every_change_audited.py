"""No change without its audit entry, no entry without its change: each write through the API
adds its entries in the same transaction; a refused write adds none."""

from __future__ import annotations

import json

from sqlalchemy import select

from confirm_service.models import AuditEntry
from tests.factories import SITE_NORTH, detections, observation, setup_log


def actions_since(db, seq: int) -> list[str]:
    with db.read() as session:
        return list(
            session.execute(
                select(AuditEntry.action).where(AuditEntry.seq > seq).order_by(AuditEntry.seq)
            ).scalars()
        )


def head(db) -> int:
    with db.read() as session:
        return max(session.execute(select(AuditEntry.seq)).scalars(), default=0)


def test_each_write_is_audited_and_refusals_are_not(client, auth, db):
    seq = head(db)  # tokens created by the fixture were audited as token.created
    assert actions_since(db, 0).count("token.created") == 5
    steps = [
        (lambda: setup_log(client, auth), ["site.created", "site.created", "target.created"]),
        (
            lambda: client.patch(
                "/api/v1/sites/PRA", json={"name": "Pell Ridge"}, headers=auth("coordinator")
            ),
            ["site.updated"],
        ),
        (
            lambda: client.patch(
                "/api/v1/targets/Kestrel-7",
                json={"parallax_mas": 20.0},
                headers=auth("coordinator"),
            ),
            ["target.updated"],
        ),
        (
            lambda: client.post(
                "/api/v1/observations", json=observation(), headers=auth("pipeline")
            ),
            ["observation.created"],
        ),
        (
            lambda: client.post(
                "/api/v1/observations/1/detections",
                json={"detections": detections(5)},
                headers=auth("pipeline"),
            ),
            ["detections.ingested"],
        ),
    ]
    for act, expected in steps:
        act()
        assert actions_since(db, seq) == expected
        seq = head(db)
    refused = [
        lambda: client.post("/api/v1/sites", json=SITE_NORTH, headers=auth("coordinator")),
        lambda: client.post(
            "/api/v1/observations/1/detections",
            json={"detections": [{"frequency_hz": -1, "drift_hz_s": 0, "snr": 1}]},
            headers=auth("pipeline"),
        ),
        lambda: client.post(
            "/api/v1/observations", json=observation(site="NOPE"), headers=auth("pipeline")
        ),
        lambda: client.post(
            "/api/v1/candidates", json={"detection_id": 999}, headers=auth("coordinator")
        ),
        lambda: client.post("/api/v1/sites", json=SITE_NORTH, headers=auth("viewer")),
    ]
    for act in refused:
        assert act().status_code >= 400
        assert actions_since(db, seq) == []
    promoted = client.post(
        "/api/v1/candidates", json={"detection_id": 1}, headers=auth("coordinator")
    )
    assert promoted.status_code == 201
    new = actions_since(db, seq)
    assert new[0] == "protocol.loaded" and "candidate.created" in new and "check.changed" in new
    with db.read() as session:
        created = session.execute(
            select(AuditEntry).where(AuditEntry.action == "candidate.created")
        ).scalar_one()
    payload = json.loads(created.payload)
    assert payload["detection_id"] == 1 and payload["origin"] == "explicit"
    assert created.actor == "test-coordinator" and created.role == "coordinator"
