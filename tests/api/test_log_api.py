"""The observation log over HTTP: contract, refusals, idempotency, atomicity, roles."""

from __future__ import annotations

import json
import math

import pytest
from sqlalchemy import func, select

from confirm_service.models import AuditEntry, Detection, Observation, Site
from tests.factories import SITE_NORTH, TARGET, detections, observation, setup_log

PROBLEM = "application/problem+json"


def count(db, model) -> int:
    with db.read() as session:
        return session.execute(select(func.count()).select_from(model)).scalar_one()


def fields_of(response) -> list[str]:
    assert response.mimetype == PROBLEM, response.get_data(as_text=True)
    body = response.get_json(force=True)
    assert body["status"] == response.status_code
    assert "title" in body
    return [e["field"] for e in body["errors"]]


def create_observation(client, auth, **overrides) -> dict:
    response = client.post(
        "/api/v1/observations", json=observation(**overrides), headers=auth("pipeline")
    )
    assert response.status_code == 201, response.get_data(as_text=True)
    return response.get_json()


def test_sites_and_targets_round_trip(client, auth):
    setup_log(client, auth)
    site = client.get("/api/v1/sites/PRA", headers=auth("viewer")).get_json()
    assert site["latitude_deg"] == SITE_NORTH["latitude_deg"]
    assert site["min_elevation_deg"] == 15.0
    assert site["email"] == SITE_NORTH["email"]
    assert site["created_at"].endswith("+00:00")
    patched = client.patch(
        "/api/v1/sites/PRA", json={"sun_avoidance_deg": 20.0}, headers=auth("coordinator")
    )
    assert patched.status_code == 200
    assert patched.get_json()["sun_avoidance_deg"] == 20.0
    target = client.get("/api/v1/targets/Kestrel-7", headers=auth("viewer")).get_json()
    assert (target["ra_deg"], target["dec_deg"]) == (TARGET["ra_deg"], TARGET["dec_deg"])
    listed = client.get("/api/v1/sites?limit=1", headers=auth("viewer")).get_json()
    assert [s["code"] for s in listed["items"]] == ["PRA"]
    assert listed["next"] is not None
    second = client.get(listed["next"], headers=auth("viewer")).get_json()
    assert [s["code"] for s in second["items"]] == ["TFO"]
    assert second["next"] is None


def test_duplicate_site_code_is_409_and_writes_nothing(client, auth, db):
    setup_log(client, auth)
    entries = count(db, AuditEntry)
    response = client.post("/api/v1/sites", json=SITE_NORTH, headers=auth("coordinator"))
    assert response.status_code == 409
    assert fields_of(response) == ["code"]
    assert count(db, Site) == 2
    assert count(db, AuditEntry) == entries


def test_frequency_round_trip_to_a_millihertz_at_30_ghz(client, auth):
    """Float64 storage: 30 GHz + 0.001 Hz must come back exactly (needs ~14 digits)."""
    setup_log(client, auth)
    frequency_hz = 30_000_000_000.001
    obs = create_observation(client, auth, frequency_min_hz=29.9e9, frequency_max_hz=30.1e9)
    response = client.post(
        f"/api/v1/observations/{obs['id']}/detections",
        json={
            "detections": [{"frequency_hz": frequency_hz, "drift_hz_s": 0.0123456789, "snr": 30.0}]
        },
        headers=auth("pipeline"),
    )
    assert response.status_code == 201
    page = client.get(
        f"/api/v1/observations/{obs['id']}/detections", headers=auth("viewer")
    ).get_json()
    stored = page["items"][0]["frequency_hz"]
    assert abs(stored - frequency_hz) < 0.001
    assert stored == frequency_hz
    assert page["items"][0]["drift_hz_s"] == 0.0123456789


def test_observation_with_inline_detections_and_filters(client, auth):
    setup_log(client, auth)
    obs = create_observation(client, auth, detections=detections(3))
    assert obs["detection_count"] == 3
    assert len(obs["detection_ids"]) == 3
    assert obs["start"] == "2026-11-20T03:00:00+00:00"
    assert obs["end"] == "2026-11-20T03:05:00+00:00"
    create_observation(client, auth, site="TFO", cadence="TFO-1", on_source=False)
    by_site = client.get("/api/v1/observations?site=TFO", headers=auth("viewer")).get_json()
    assert [o["site"] for o in by_site["items"]] == ["TFO"]
    by_cadence = client.get(
        "/api/v1/observations?cadence=PRA-20261120-k7", headers=auth("viewer")
    ).get_json()
    assert [o["id"] for o in by_cadence["items"]] == [obs["id"]]
    window = client.get(
        "/api/v1/observations?start_from=2026-11-20T02:00:00%2B00:00"
        "&start_to=2026-11-20T02:59:59%2B00:00",
        headers=auth("viewer"),
    ).get_json()
    assert window["items"] == []
    by_target = client.get(
        "/api/v1/observations?target=Kestrel-7", headers=auth("viewer")
    ).get_json()
    assert len(by_target["items"]) == 2
    got = client.get(f"/api/v1/observations/{obs['id']}", headers=auth("viewer")).get_json()
    assert got["detection_count"] == 3


def test_pointing_without_target(client, auth):
    setup_log(client, auth)
    obs = create_observation(
        client, auth, target=None, pointing_ra_deg=10.0, pointing_dec_deg=-5.0, on_source=False
    )
    assert obs["target"] is None
    assert (obs["pointing_ra_deg"], obs["pointing_dec_deg"]) == (10.0, -5.0)


REFUSALS = [
    ("naive start", {"start": "2026-11-20T03:00:00"}, ["start"]),
    ("future start", {"start": "2099-01-01T00:00:00+00:00"}, ["start"]),
    ("zero duration", {"duration_s": 0}, ["duration_s"]),
    ("negative duration", {"duration_s": -5}, ["duration_s"]),
    ("zero channel width", {"channel_width_hz": 0}, ["channel_width_hz"]),
    ("inverted band", {"frequency_max_hz": 1.3e9}, ["frequency_max_hz"]),
    (
        "RA beyond 360",
        {"target": None, "pointing_ra_deg": 361.0, "pointing_dec_deg": 0.0},
        ["pointing_ra_deg"],
    ),
    ("unknown site", {"site": "NOPE"}, ["site"]),
    ("unknown target", {"target": "Nowhere-1"}, ["target"]),
    ("string for boolean", {"on_source": "yes"}, ["on_source"]),
    ("unknown field", {"colour": "red"}, ["colour"]),
    (
        "detection out of band",
        {"detections": [{"frequency_hz": 2e9, "drift_hz_s": 0, "snr": 9}]},
        ["detections[0].frequency_hz"],
    ),
    (
        "detection after end",
        {"detections": [{"frequency_hz": 1.42e9, "drift_hz_s": 0, "snr": 9, "time_offset_s": 301}]},
        ["detections[0].time_offset_s"],
    ),
]


@pytest.mark.parametrize(("label", "overrides", "fields"), REFUSALS, ids=[r[0] for r in REFUSALS])
def test_observation_refusals_write_nothing(client, auth, db, label, overrides, fields):
    setup_log(client, auth)
    entries = count(db, AuditEntry)
    response = client.post(
        "/api/v1/observations", json=observation(**overrides), headers=auth("pipeline")
    )
    assert 400 <= response.status_code < 500
    assert fields_of(response) == fields
    assert count(db, Observation) == 0
    assert count(db, Detection) == 0
    assert count(db, AuditEntry) == entries


@pytest.mark.parametrize("bad", ["NaN", "Infinity", "-Infinity"])
def test_non_finite_numbers_are_refused(client, auth, db, bad):
    setup_log(client, auth)
    obs = create_observation(client, auth)
    body = f'{{"detections": [{{"frequency_hz": 1.42e9, "drift_hz_s": {bad}, "snr": 10}}]}}'
    response = client.post(
        f"/api/v1/observations/{obs['id']}/detections",
        data=body,
        content_type="application/json",
        headers=auth("pipeline"),
    )
    assert response.status_code == 422
    assert fields_of(response) == ["detections[0].drift_hz_s"]
    assert count(db, Detection) == 0


def test_latitude_outside_90_is_refused(client, auth, db):
    response = client.post(
        "/api/v1/sites", json={**SITE_NORTH, "latitude_deg": 91.0}, headers=auth("coordinator")
    )
    assert response.status_code == 422
    assert fields_of(response) == ["latitude_deg"]
    assert count(db, Site) == 0


def test_batch_names_every_bad_row_and_is_all_or_nothing(client, auth, db):
    setup_log(client, auth)
    obs = create_observation(client, auth)
    rows = detections(100)
    rows[57]["frequency_hz"] = -1.0
    rows[58]["snr"] = "loud"
    rows[90]["frequency_hz"] = 1.6e9
    response = client.post(
        f"/api/v1/observations/{obs['id']}/detections",
        json={"detections": rows},
        headers=auth("pipeline"),
    )
    assert response.status_code == 422
    assert fields_of(response) == ["detections[57].frequency_hz", "detections[58].snr"]
    rows[57]["frequency_hz"], rows[58]["snr"] = 1.42e9, 9.0
    response = client.post(
        f"/api/v1/observations/{obs['id']}/detections",
        json={"detections": rows},
        headers=auth("pipeline"),
    )
    assert response.status_code == 422
    assert fields_of(response) == ["detections[90].frequency_hz"]
    assert count(db, Detection) == 0
    with db.read() as session:
        assert session.get(Observation, obs["id"]).detection_count == 0


def test_oversize_batch_is_413(client, auth, db, app):
    setup_log(client, auth)
    obs = create_observation(client, auth)
    limit = app.extensions["confirm.settings"].max_batch_detections
    response = client.post(
        f"/api/v1/observations/{obs['id']}/detections",
        json={"detections": detections(limit + 1)},
        headers=auth("pipeline"),
    )
    assert response.status_code == 413
    assert fields_of(response) == ["detections"]
    assert count(db, Detection) == 0


@pytest.mark.parametrize(
    ("data", "content_type"),
    [
        ('{"detections": [', "application/json"),
        ("frequency_hz=1", "text/plain"),
        ('{"detections": []}', "application/x-www-form-urlencoded"),
    ],
    ids=["not json", "text", "form"],
)
def test_wrong_body_is_415(client, auth, db, data, content_type):
    setup_log(client, auth)
    obs = create_observation(client, auth)
    response = client.post(
        f"/api/v1/observations/{obs['id']}/detections",
        data=data,
        content_type=content_type,
        headers=auth("pipeline"),
    )
    assert response.status_code == 415
    assert fields_of(response) == ["body"]
    assert count(db, Detection) == 0


def test_idempotent_retry_does_not_duplicate(client, auth, db):
    setup_log(client, auth)
    obs = create_observation(client, auth)
    url = f"/api/v1/observations/{obs['id']}/detections"
    body = {"detections": detections(250)}
    first = client.post(url, json=body, headers=auth("pipeline", **{"Idempotency-Key": "k-1"}))
    again = client.post(url, json=body, headers=auth("pipeline", **{"Idempotency-Key": "k-1"}))
    assert first.status_code == again.status_code == 201
    assert again.headers.get("Idempotent-Replayed") == "true"
    assert first.get_json()["ids"] == again.get_json()["ids"]
    assert count(db, Detection) == 250
    other = client.post(
        url,
        json={"detections": detections(2)},
        headers=auth("pipeline", **{"Idempotency-Key": "k-1"}),
    )
    assert other.status_code == 422
    assert fields_of(other) == ["Idempotency-Key"]
    assert count(db, Detection) == 250
    fresh = client.post(url, json=body, headers=auth("pipeline", **{"Idempotency-Key": "k-2"}))
    assert fresh.status_code == 201
    assert count(db, Detection) == 500


def test_ingest_is_audited_with_a_digest(client, auth, db):
    setup_log(client, auth)
    obs = create_observation(client, auth)
    client.post(
        f"/api/v1/observations/{obs['id']}/detections",
        json={"detections": detections(10)},
        headers=auth("pipeline"),
    )
    with db.read() as session:
        entry = session.execute(
            select(AuditEntry).where(AuditEntry.action == "detections.ingested")
        ).scalar_one()
    payload = json.loads(entry.payload)
    assert payload["count"] == 10
    assert len(payload["content_sha256"]) == 64
    assert entry.actor == "test-pipeline" and entry.role == "pipeline"


def test_detection_pages(client, auth):
    setup_log(client, auth)
    obs = create_observation(client, auth, detections=detections(25))
    url = f"/api/v1/observations/{obs['id']}/detections?limit=10"
    seen = []
    while url:
        page = client.get(url, headers=auth("viewer")).get_json()
        seen += [d["id"] for d in page["items"]]
        url = page["next"]
    assert seen == obs["detection_ids"]
    too_many = client.get(
        f"/api/v1/observations/{obs['id']}/detections?limit=1001", headers=auth("viewer")
    )
    assert too_many.status_code == 422
    assert fields_of(too_many) == ["limit"]


def test_health_needs_no_token(client):
    response = client.get("/healthz")
    assert response.status_code == 200
    assert response.get_json() == {"status": "ok", "database": "reachable"}


def test_health_reports_an_unreachable_database(tmp_path):
    from confirm_service.app import create_app

    app = create_app(
        {"database_url": "postgresql+psycopg://nobody@127.0.0.1:1/none", "instance_path": tmp_path}
    )
    response = app.test_client().get("/healthz")
    assert response.status_code == 503
    assert response.get_json()["database"] == "unreachable"


def test_problem_documents_are_rfc9457(client, auth):
    response = client.get("/api/v1/sites/NOPE", headers=auth("viewer"))
    assert response.status_code == 404
    body = response.get_json(force=True)
    assert response.mimetype == PROBLEM
    assert set(body) >= {"type", "title", "status", "errors"}
    assert not math.isnan(body["status"])
