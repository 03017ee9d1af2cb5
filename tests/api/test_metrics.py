"""The Prometheus endpoint: request, ingest, screening, evaluation and delivery counters.

The text is read back with prometheus-client's own parser of the exposition format. Counters
live for the whole test process, so each test compares values before and after its requests.
"""

from __future__ import annotations

from datetime import timedelta

from prometheus_client.parser import text_string_to_metric_families

from confirm_service.actor import SYSTEM
from confirm_service.services import messages
from confirm_service.timeutil import utc_now
from tests.factories import detections, observation, setup_log
from tests.test_database_unavailable import closed_port


def samples(client, auth) -> dict[tuple[str, frozenset], float]:
    """Every sample of ``/api/v1/metrics`` by (name, labels)."""
    answer = client.get("/api/v1/metrics", headers=auth("viewer"))
    assert answer.status_code == 200
    # Prometheus text exposition format (prometheus.io, "Exposition formats"): text/plain
    assert answer.mimetype == "text/plain"
    text = answer.get_data(as_text=True)
    return {
        (s.name, frozenset(s.labels.items())): s.value
        for family in text_string_to_metric_families(text)
        for s in family.samples
    }


def value(found, name: str, **labels: str) -> float:
    return found.get((name, frozenset(labels.items())), 0.0)


def test_requests_are_counted_and_timed_per_route(client, auth):
    route = "/api/v1/observations/<int:observation_id>"
    before = samples(client, auth)
    for _ in range(3):
        assert client.get("/api/v1/observations/77", headers=auth("viewer")).status_code == 404
    after = samples(client, auth)
    key = {"method": "GET", "route": route}
    assert (
        value(after, "confirm_http_requests_total", **key, status="404")
        - value(before, "confirm_http_requests_total", **key, status="404")
        == 3
    )
    count = "confirm_http_request_duration_seconds_count"
    assert value(after, count, **key) - value(before, count, **key) == 3
    infinite = "confirm_http_request_duration_seconds_bucket"
    assert value(after, infinite, **key, le="+Inf") - value(before, infinite, **key, le="+Inf") == 3


def test_metrics_need_a_monitoring_token(client, auth):
    assert client.get("/api/v1/metrics").status_code == 401
    assert client.get("/api/v1/metrics", headers=auth("pipeline")).status_code == 403


def test_ingest_and_screening_count_only_what_was_written(client, auth):
    setup_log(client, auth)
    before = samples(client, auth)
    scan = client.post("/api/v1/observations", json=observation(), headers=auth("pipeline"))
    scan_id = scan.get_json()["id"]
    path = f"/api/v1/observations/{scan_id}/detections"
    good = client.post(path, json={"detections": detections(40)}, headers=auth("pipeline"))
    assert good.status_code == 201, good.get_json()
    refused = detections(30)
    refused[7]["snr"] = -1.0
    bad = client.post(path, json={"detections": refused}, headers=auth("pipeline"))
    assert bad.status_code == 422
    done = client.post(f"/api/v1/observations/{scan_id}/complete", headers=auth("pipeline"))
    assert done.status_code == 200, done.get_json()
    after = samples(client, auth)

    def grew(name: str, **labels: str) -> float:
        return value(after, name, **labels) - value(before, name, **labels)

    assert grew("confirm_ingest_hits_written_total") == 40
    assert grew("confirm_ingest_batches_total") == 1
    assert grew("confirm_screening_runs_total") == 1
    reasons = client.get(f"/api/v1/observations/{scan_id}/screening", headers=auth("viewer"))
    counts = reasons.get_json()["reasons"]
    assert counts and sum(counts.values()) == 40
    for reason, hits in counts.items():
        assert grew("confirm_screening_hits_total", reason=reason) == hits


def test_evaluations_are_counted(client, auth):
    setup_log(client, auth)
    scan = client.post(
        "/api/v1/observations",
        json=observation(detections=detections(3), complete=False),
        headers=auth("pipeline"),
    ).get_json()
    hit = client.get(
        f"/api/v1/observations/{scan['id']}/detections", headers=auth("viewer")
    ).get_json()["items"][0]["id"]
    before = samples(client, auth)
    made = client.post(
        "/api/v1/candidates", json={"detection_id": hit}, headers=auth("coordinator")
    )
    assert made.status_code == 201, made.get_json()
    after = samples(client, auth)
    total = sum(
        value(after, "confirm_evaluations_total", outcome=o)
        - value(before, "confirm_evaluations_total", outcome=o)
        for o in ("transitioned", "unchanged")
    )
    assert total >= 1


def test_a_failed_delivery_is_counted_as_retrying(app, client, auth, db):
    now = utc_now()
    with db.write() as session:
        messages.queue_message(
            session,
            SYSTEM,
            kind="notice",
            channel="webhook",
            destination=f"http://127.0.0.1:{closed_port()}/inbox",
            subject="metrics test",
            body={"hello": "partner"},
            due=now - timedelta(seconds=1),
        )
    before = samples(client, auth)
    settings = app.extensions["confirm.settings"]
    counts = messages.deliver_due(db, settings, SYSTEM, now, lambda *args: None)
    assert counts["retrying"] == 1
    after = samples(client, auth)
    name = "confirm_deliveries_total"
    assert value(after, name, outcome="retrying") - value(before, name, outcome="retrying") == 1
