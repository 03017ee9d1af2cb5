"""A protocol intent becomes signed, retried requests to distant sites; partners answer by
webhook delivery, by pull, and by reports that move the candidate's checks."""

from __future__ import annotations

import dataclasses
import json
from datetime import UTC, datetime, timedelta

import numpy as np
from skyfield.api import Loader, wgs84
from skyfield_data import get_skyfield_data_path
from sqlalchemy import select

from confirm_service.actor import SYSTEM
from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
from confirm_service.demo import SITES, TARGETS, SkyFixedSignal, first_window, scenario_scans
from confirm_service.followup import signing
from confirm_service.models import FollowUpRequest
from confirm_service.scheduler.jobs import run_due
from confirm_service.services.federation import set_partner_secret
from confirm_service.services.tokens import create_token
from tests.followup.loopback import Recorder

NORTH, SOUTH, EAST = SITES  # PRA, TFO, ORV (invented)
NOW = datetime(2026, 11, 23, tzinfo=UTC)
"""A fixed time after the scenario's scans: request windows do not depend on the test's date."""


def at_independent_site(client, auth):
    for site in SITES:
        client.post("/api/v1/sites", json=site, headers=auth("coordinator"))
    for target in TARGETS:
        client.post("/api/v1/targets", json=target, headers=auth("coordinator"))
    scans = scenario_scans()[:-1]  # everything but the partner's own look
    for _, scan in scans:
        response = client.post("/api/v1/observations", json=scan, headers=auth("pipeline"))
        assert response.status_code == 201
    (candidate,) = client.get("/api/v1/candidates?state=open", headers=auth("viewer")).json["items"]
    assert candidate["stage"] == "independent_site"
    return candidate, scans


def site_token(db, code):
    with db.write() as session:
        _, secret = create_token(session, SYSTEM, f"partner-{code.lower()}", "site", code)
    return {"Authorization": f"Bearer {secret}"}


def requests_of(db, candidate_id):
    with db.read() as session:
        rows = session.execute(
            select(FollowUpRequest)
            .where(FollowUpRequest.candidate_id == candidate_id)
            .order_by(FollowUpRequest.id)
        ).scalars()
        return [(r.id, r.kind, r.status, r.site_id, r.send_at, r.payload) for r in rows]


def skyfield_check_window(site, target, start, end, min_elevation_deg, sun_avoidance_deg):
    """Elevation and Sun angle at the window's middle, by skyfield with DE421 (independent)."""
    load = Loader(get_skyfield_data_path(), expire=False)
    ts, planets = load.timescale(builtin=True), load("de421.bsp")
    from skyfield.api import Star

    middle = ts.from_datetime(start + (end - start) / 2)
    place = planets["earth"] + wgs84.latlon(
        site["latitude_deg"], site["longitude_deg"], site["elevation_m"]
    )
    star = Star(ra_hours=target["ra_deg"] / 15.0, dec_degrees=target["dec_deg"])
    seen = place.at(middle).observe(star).apparent()
    elevation = seen.altaz()[0].degrees
    sun = place.at(middle).observe(planets["sun"]).apparent()
    return elevation > min_elevation_deg, seen.separation_from(sun).degrees > sun_avoidance_deg


def test_intent_to_requests_with_windows_tracks_and_reasons(app, client, auth, db):
    candidate, _ = at_independent_site(client, auth)
    settings = app.extensions["confirm.settings"]
    now = NOW
    run_due(db, settings, now)
    rows = requests_of(db, candidate["id"])
    intents = [r for r in rows if r[1] == "request_followup" and r[3] is None]
    drafted = [r for r in rows if r[3] is not None]  # drafted, or sent if due at once
    assert [r[2] for r in intents] == ["dispatched"]
    # default.toml: min_distance_km = 1000 from PRA, the only site that saw the signal.
    with db.read() as session:
        from confirm_service.models import Site

        codes = {s.id: s.code for s in session.execute(select(Site)).scalars()}
    assert sorted(codes[r[3]] for r in drafted) == ["ORV", "TFO"]
    for _, _, _, site_id, send_at, content in drafted:
        site = next(s for s in SITES if s["code"] == codes[site_id])
        assert content["windows"] and content["confidentiality"].endswith(
            CANDIDATE_IS_NOT_A_DETECTION
        )
        assert send_at >= now
        for window in content["windows"][:3]:
            start, end = (datetime.fromisoformat(window[k]) for k in ("start", "end"))
            high, clear_of_sun = skyfield_check_window(
                site, TARGETS[0], start, end, site["min_elevation_deg"], site["sun_avoidance_deg"]
            )
            assert high and clear_of_sun
            # default.toml: min_earth_drift_span_tolerances = 2.0, the check's own threshold
            assert window["discriminating"] == (window["drift_tolerances"] >= 2.0)
            assert "Hz/s" in window["why"]
            for point in window["track"]:
                assert point["band_low_hz"] < point["frequency_hz"] < point["band_high_hz"]
        preferred = content["preferred_windows"]
        assert preferred == list(range(len(preferred)))  # discriminating windows come first
        low, high = content["record_band_hz"]
        assert low < content["discovery"]["frequency_hz"] + 1e6 and high > low
        # The predicted frequency agrees with the direct astropy prediction of the demo's
        # transmitter (physics.predict_signal, a separate code path) within the 3-sigma band.
        signal = SkyFixedSignal(
            NORTH,
            TARGETS[0],
            datetime.fromisoformat(scenario_scans()[0][1]["start"]) + timedelta(seconds=60),
        )
        point = content["windows"][0]["track"][0]
        direct = signal.seen_at(site, datetime.fromisoformat(point["time"]), 10.0)
        assert point["band_low_hz"] <= direct["frequency_hz"] <= point["band_high_hz"]


def test_delivery_retries_dead_letter_resend_and_pull(app, client, auth, db):
    candidate, _ = at_independent_site(client, auth)
    settings = dataclasses.replace(
        app.extensions["confirm.settings"],
        delivery_max_attempts=3,
        delivery_timeout_s=1.0,
        site_code="PRA",
    )
    with db.write() as session:
        secret = set_partner_secret(session, SYSTEM, "TFO")
    now = datetime.now(UTC)  # the re-send route acts at the real time
    with Recorder(500) as failing, Recorder(200, {"request_id": 41, "acknowledged": True}) as ok:
        patch = {"webhook_url": failing.url}
        assert (
            client.patch("/api/v1/sites/TFO", json=patch, headers=auth("coordinator")).status_code
            == 200
        )
        run_due(db, settings, now)
        drafted = [r for r in requests_of(db, candidate["id"]) if r[3] is not None]
        when = max(r[4] for r in drafted) + timedelta(seconds=1)
        for step in range(3):
            run_due(db, settings, when + timedelta(hours=2 * step))
        assert len(failing.received) == 3
        headers, body = failing.received[0]
        signing.verify(secret, signing.envelope_of(headers), body)
        assert json.loads(body)["content"]["site"] == "TFO"
        ids = {len({h[signing.MESSAGE_ID_HEADER] for h, _ in failing.received})}
        assert ids == {1}  # every retry carries the same message id
        by_site = {r[5]["site"]: r for r in requests_of(db, candidate["id"]) if r[3]}
        assert by_site["TFO"][2] == "failed" and by_site["ORV"][2] == "sent"
        dead = client.get("/api/v1/messages?status=dead", headers=auth("coordinator")).json
        assert [m["request_id"] for m in dead] == [by_site["TFO"][0]]
        assert dead[0]["attempts"] == 3 and dead[0]["last_status_code"] == 500
        patch = {"webhook_url": ok.url}
        assert (
            client.patch("/api/v1/sites/TFO", json=patch, headers=auth("coordinator")).status_code
            == 200
        )
        url = f"/api/v1/followups/{by_site['TFO'][0]}/resend"
        assert client.post(url, headers=auth("coordinator")).json["status"] == "drafted"
        run_due(db, settings, when + timedelta(hours=8))
        assert len(ok.received) == 1
    shown = client.get(f"/api/v1/followups/{by_site['TFO'][0]}", headers=auth("viewer")).json
    assert shown["status"] == "acknowledged" and shown["remote_id"] == 41
    assert shown["sent_at"] and shown["failed_at"] and shown["acknowledged_at"]
    statuses = [m["status"] for m in shown["messages"]]
    assert statuses == ["dead", "delivered"]  # the dead letter stays on record
    history = client.get(f"/api/v1/candidates/{candidate['id']}/messages", headers=auth("viewer"))
    assert {m["kind"] for m in history.json} >= {"followup.request"}
    # ORV has no webhook: it polls with its site token, and sees only its own requests.
    orv = site_token(db, "ORV")
    pulled = client.get("/api/v1/followups?site=ORV&state=sent", headers=orv).json["items"]
    assert [p["site"] for p in pulled] == ["ORV"] and pulled[0]["payload"]["windows"]
    assert client.get("/api/v1/followups?site=TFO", headers=orv).status_code == 403


def test_reports_on_a_request_move_both_checks(app, client, auth, db):
    candidate, scans = at_independent_site(client, auth)
    run_due(db, app.extensions["confirm.settings"], NOW)
    requests = {r[5]["site"]: r[0] for r in requests_of(db, candidate["id"]) if r[3]}
    tfo, orv = site_token(db, "TFO"), site_token(db, "ORV")
    cloudy = {"observed": False, "not_observed_reason": "weather", "notes": "rain"}
    answer = client.post(f"/api/v1/followups/{requests['TFO']}/reports", json=cloudy, headers=tfo)
    assert answer.status_code == 201, answer.json
    middle = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer")).json
    check = next(c for c in middle["checks"] if c["kind"] == "independent_site")
    assert check["outcome"] == "pending" and "0 of 2" in check["reason"]  # weather: no miss
    # ORV observed a window in the past and posts its scan and hits with the report.
    first = datetime.fromisoformat(scans[0][1]["start"])
    signal = SkyFixedSignal(NORTH, TARGETS[0], first + timedelta(seconds=60))
    look = first_window(EAST, TARGETS[0], first + timedelta(hours=30), 300.0)
    hit = signal.seen_at(EAST, look + timedelta(seconds=100), 14.0)
    scan = {
        "site": "ORV",
        "start": look.isoformat(),
        "duration_s": 300.0,
        "frequency_min_hz": 1.40e9,
        "frequency_max_hz": 1.45e9,
        "channel_width_hz": 3.81,
        "time_resolution_s": 12.5,
        "on_source": True,
        "detections": [{**hit, "time_offset_s": 100.0}],
    }
    body = {"observation": scan, "detected": True, "threshold_snr": 10.0, "sefd_jy": 35.0}
    wrong = client.post(f"/api/v1/followups/{requests['ORV']}/reports", json=body, headers=tfo)
    assert wrong.status_code == 403
    ok = client.post(f"/api/v1/followups/{requests['ORV']}/reports", json=body, headers=orv)
    assert ok.status_code == 201, ok.json
    assert ok.json["observation_id"] and ok.json["threshold_snr"] == 10.0
    after = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer")).json
    check = next(c for c in after["checks"] if c["kind"] == "independent_site")
    assert check["outcome"] == "pass" and "ORV" in check["reason"]
    assert after["stage"] == "review"
    assert {d["site"] for d in after["detections"]} == {"PRA", "ORV"}
    shown = client.get(f"/api/v1/followups/{requests['ORV']}", headers=auth("viewer")).json
    assert shown["status"] == "reported" and shown["reported_at"]
    assert np.isfinite(after["reports"][-1]["sefd_jy"])


def test_coordinator_requests_and_the_partners_answers(app, client, auth, db):
    candidate, _ = at_independent_site(client, auth)
    url = f"/api/v1/candidates/{candidate['id']}/followups"
    coordinator = auth("coordinator")
    for body in ({}, {"site": "TFO", "min_distance_km": 1000.0}, {"site": "TFO", "extra": 1}):
        refused = client.post(url, json=body, headers=coordinator)
        assert refused.status_code == 422 and refused.json["errors"]
    assert client.post(url, json={"site": "NOPE"}, headers=coordinator).status_code == 404
    named = client.post(url, json={"site": "ORV", "horizon_hours": 96}, headers=coordinator)
    assert named.status_code == 201, named.json
    (to_orv,) = named.json
    assert to_orv["status"] == "drafted" and to_orv["origin"] == "coordinator"
    far = client.post(url, json={"min_distance_km": 8000.0, "max_sites": 1}, headers=coordinator)
    assert far.status_code == 201 and len(far.json) == 1  # PRA-TFO and PRA-ORV both > 8000 km
    nowhere = client.post(url, json={"min_distance_km": 19000.0}, headers=coordinator)
    assert nowhere.status_code == 422  # no registered site is that far from PRA
    tfo, orv = site_token(db, "TFO"), site_token(db, "ORV")
    base = f"/api/v1/followups/{to_orv['id']}"
    assert client.post(base + "/acknowledge", headers=tfo).status_code == 403
    assert client.post(base + "/acknowledge", headers=orv).status_code == 409  # not sent yet
    now = datetime.now(UTC)  # the coordinator's request starts at the real time
    run_due(db, app.extensions["confirm.settings"], now + timedelta(days=2))
    assert client.get(base, headers=orv).json["status"] == "sent"  # ORV pulls; no webhook
    declined = client.post(base + "/decline", json={"reason": "receiver down"}, headers=orv)
    assert declined.status_code == 200 and declined.json["status"] == "declined"
    assert declined.json["state_reason"] == "receiver down" and declined.json["declined_at"]
    # Past their deadlines, the other open requests expire (TFO's has no shared secret here,
    # so its delivery failed at once).
    run_due(db, app.extensions["confirm.settings"], now + timedelta(days=20))
    states = {r[0]: r[2] for r in requests_of(db, candidate["id"]) if r[3] is not None}
    assert states.pop(to_orv["id"]) == "declined"
    assert set(states.values()) <= {"expired", "failed"} and "expired" in states.values()
