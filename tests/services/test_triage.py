"""A pipeline registers its scans, streams hits in batches and closes each scan; screening turns
exactly the sky-fixed signals into candidates, every other hit keeps its reason, and a scan is
never taken as evidence of absence while it is open. Runs on each backend through the HTTP API.

Outside reference for the signal: the invented transmitter is generated with the physics engine
(astropy), which tests/physics checks against skyfield with skyfield-data's DE421.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from click.testing import CliRunner
from sqlalchemy import func, select

from confirm_service.cli import main
from confirm_service.cli.context import settings as cli_settings
from confirm_service.demo import SITES, TARGETS, first_window
from confirm_service.models import AuditEntry, Candidate, Detection, Observation
from confirm_service.services.screening import replay_runs
from confirm_service.synthetic import batches, make_cadence

HITS_PER_SCAN = 120


@pytest.fixture(scope="module")
def cadence():
    start = first_window(SITES[0], TARGETS[0], datetime(2026, 11, 20, tzinfo=UTC), 6 * 260)
    return make_cadence(SITES[0], TARGETS[0], start, HITS_PER_SCAN, seed=7)


def register(client, auth):
    for site in SITES:
        assert (
            client.post("/api/v1/sites", json=site, headers=auth("coordinator")).status_code == 201
        )
    for target in TARGETS:
        response = client.post("/api/v1/targets", json=target, headers=auth("coordinator"))
        assert response.status_code == 201


def post_scan(client, auth, body) -> int:
    response = client.post("/api/v1/observations", json=body, headers=auth("pipeline"))
    assert response.status_code == 201, response.get_json()
    assert response.get_json()["complete"] is False  # registered without hits: open
    return response.get_json()["id"]


def post_batch(client, auth, scan_id, hits, complete=False):
    body = {"detections": hits, **({"complete": True} if complete else {})}
    return client.post(
        f"/api/v1/observations/{scan_id}/detections", json=body, headers=auth("pipeline")
    )


def candidates(client, auth) -> list[dict]:
    listing = client.get("/api/v1/candidates?limit=1000", headers=auth("viewer")).get_json()
    return [
        client.get(f"/api/v1/candidates/{c['id']}", headers=auth("viewer")).get_json()
        for c in listing["items"]
    ]


def assert_only_the_sky_signals(client, auth, cadence, scan_ids):
    found = candidates(client, auth)
    assert len(found) == len(cadence.sky_frequencies_hz), [
        (c["id"], c["barycentric_frequency_hz"]) for c in found
    ]
    for candidate, frequency in zip(
        sorted(found, key=lambda c: c["barycentric_frequency_hz"]),
        cadence.sky_frequencies_hz,
        strict=True,
    ):
        # barycentric vs the topocentric injection: |v/c| <= 1.1e-4 (Earth's orbital speed
        # 29.8 km/s plus rotation, published constants) gives at most ~180 kHz at 1.64 GHz
        assert abs(candidate["barycentric_frequency_hz"] - frequency) < 200_000.0
        assert candidate["state"] == "open", candidate["reason"]
        outcomes = {c["kind"]: c["outcome"] for c in candidate["checks"]}
        assert outcomes["on_off_cadence"] == "pass", candidate["checks"]
        assert len(candidate["detections"]) == 3  # one per on-source scan
    pending = 0
    for scan_id in scan_ids:
        counts = client.get(
            f"/api/v1/observations/{scan_id}/screening", headers=auth("viewer")
        ).get_json()
        assert counts["complete"] is True
        assert sum(counts["reasons"].values()) + counts["pending"] == counts["detection_count"]
        pending += counts["pending"]
    assert pending == 0


@pytest.mark.parametrize("route", ["flag", "endpoint"])
def test_registered_scans_streamed_hits_and_completion(client, auth, db, cadence, route):
    register(client, auth)
    scan_ids = [post_scan(client, auth, body) for body in cadence.scans]  # all registered first
    for scan_id, hits in zip(scan_ids, cadence.hits, strict=True):
        parts = batches(hits, 3)
        for n, part in enumerate(parts):
            last = n == len(parts) - 1
            response = post_batch(client, auth, scan_id, part, complete=last and route == "flag")
            assert response.status_code == 201, response.get_json()
        if route == "endpoint":
            done = client.post(f"/api/v1/observations/{scan_id}/complete", headers=auth("pipeline"))
            assert done.status_code == 200, done.get_json()
            assert done.get_json()["completed_by"] == "endpoint"
        # scans registered but still open are not evidence: nothing was rejected meanwhile
        assert all(c["state"] == "open" for c in candidates(client, auth))
    assert_only_the_sky_signals(client, auth, cadence, scan_ids)
    with db.read() as session:
        reasons = dict(
            session.execute(
                select(Detection.screen_reason, func.count()).group_by(Detection.screen_reason)
            ).all()
        )
    # persistent interferers sit in the off-source scans too; one-off hits are not repeated
    assert reasons["present_off_source"] > 0 and reasons["absent_on_source"] > 0
    assert reasons["survived"] == 3 * len(cadence.sky_frequencies_hz)
    assert None not in reasons
    # every screening run replays to the same digest and counts
    with db.read() as session:
        replays = replay_runs(session)
    assert replays and all(r.reproduced for r in replays)


def test_stale_scans_are_closed_after_the_quiet_period(
    app, client, auth, db, database_url, cadence
):
    register(client, auth)
    scan_ids = [post_scan(client, auth, body) for body in cadence.scans]
    for scan_id, hits in zip(scan_ids, cadence.hits, strict=True):
        for part in batches(hits, 2):
            assert post_batch(client, auth, scan_id, part).status_code == 201
    assert candidates(client, auth) == []  # nothing judged while the scans are open
    with db.read() as session:
        last = max(o.last_ingest_at for o in session.execute(select(Observation)).scalars())
    env = {
        "CONFIRM_DATABASE_URL": database_url,
        "CONFIRM_INSTANCE_PATH": str(app.instance_path),
        "CONFIRM_SCAN_QUIET_PERIOD_S": "600",
    }

    def run_due(at):
        cli_settings.cache_clear()
        result = CliRunner().invoke(
            main, ["scheduler", "run-due", "--now", at.isoformat()], env=env
        )
        cli_settings.cache_clear()
        assert result.exit_code == 0, result.output
        return result.output

    assert "0 stale scan(s) closed" in run_due(last + timedelta(seconds=60))
    assert f"{len(scan_ids)} stale scan(s) closed" in run_due(last + timedelta(hours=1))
    assert_only_the_sky_signals(client, auth, cadence, scan_ids)
    with db.read() as session:
        entries = session.execute(
            select(AuditEntry).where(AuditEntry.action == "observation.completed")
        ).scalars()
        reasons = [e.payload for e in entries]
    assert len(reasons) == len(scan_ids)
    assert all("quiet_period" in p and "quiet period 600 s" in p for p in reasons)


def test_a_batch_to_a_complete_scan_is_refused_and_writes_nothing(client, auth, db, cadence):
    register(client, auth)
    scan_id = post_scan(client, auth, cadence.scans[0])
    assert post_batch(client, auth, scan_id, cadence.hits[0][:10], complete=True).status_code == 201
    with db.read() as session:
        before = (
            session.execute(select(func.count()).select_from(Detection)).scalar_one(),
            session.execute(select(func.count()).select_from(AuditEntry)).scalar_one(),
        )
    late = post_batch(client, auth, scan_id, cadence.hits[0][10:20])
    assert late.status_code == 409
    problem = late.get_json()
    assert late.headers["Content-Type"].startswith("application/problem+json")
    assert problem["errors"][0]["field"] == "id" and "complete" in problem["errors"][0]["message"]
    again = client.post(f"/api/v1/observations/{scan_id}/complete", headers=auth("pipeline"))
    assert again.status_code == 409
    with db.read() as session:
        after = (
            session.execute(select(func.count()).select_from(Detection)).scalar_one(),
            session.execute(select(func.count()).select_from(AuditEntry)).scalar_one(),
        )
    assert after == before


def test_one_signal_in_many_batches_of_a_scan_is_one_candidate(client, auth, db, cadence):
    register(client, auth)
    scan_ids = [post_scan(client, auth, body) for body in cadence.scans]
    sky_hits = [
        [h for h in hits if abs(h["frequency_hz"] - cadence.sky_frequencies_hz[0]) < 20_000.0]
        for hits in cadence.hits
    ]
    assert [len(h) for h in sky_hits] == [1, 0, 1, 0, 1, 0]
    for scan_id, hits in zip(scan_ids, sky_hits, strict=True):
        for _ in range(7):  # the pipeline resends the same hit in seven one-hit batches
            assert post_batch(client, auth, scan_id, hits).status_code == 201
        client.post(f"/api/v1/observations/{scan_id}/complete", headers=auth("pipeline"))
    found = candidates(client, auth)
    assert len(found) == 1
    with db.read() as session:
        assert session.execute(select(func.count()).select_from(Candidate)).scalar_one() == 1


def test_replay_notices_a_changed_reason(client, auth, db, database_url, cadence):
    register(client, auth)
    for body, hits in zip(cadence.scans, cadence.hits, strict=True):
        response = client.post(
            "/api/v1/observations", json={**body, "detections": hits}, headers=auth("pipeline")
        )
        assert response.status_code == 201 and response.get_json()["completed_by"] == "inline"
    with db.read() as session:
        assert all(r.reproduced for r in replay_runs(session))
    with db.write() as session:  # someone rewrites one dropped hit's reason behind our back
        hit = session.execute(
            select(Detection).where(Detection.screen_reason == "absent_on_source").limit(1)
        ).scalar_one()
        hit.screen_reason = "survived"
    with db.read() as session:
        replays = replay_runs(session)
    assert [r.run_id for r in replays if not r.reproduced] == [hit.screening_run_id]
    env = {"CONFIRM_DATABASE_URL": database_url}
    cli_settings.cache_clear()
    replayed = CliRunner().invoke(main, ["screening", "replay"], env=env)
    shown = CliRunner().invoke(main, ["screening", "show", "1", "2"], env=env)
    cli_settings.cache_clear()
    assert replayed.exit_code == 1 and f"run {hit.screening_run_id}: DIFFERS" in replayed.stdout
    assert shown.exit_code == 0 and "off_source_scan" in shown.stdout and "pending" in shown.stdout
