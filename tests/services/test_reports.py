"""Partner-site reports move the independent-site check: a report at the predicted frequency
passes it; looks that covered the predicted frequency and saw nothing reject it."""

from __future__ import annotations

from datetime import timedelta

from confirm_service.actor import SYSTEM
from confirm_service.demo import SITES, TARGETS, SkyFixedSignal, scenario_scans
from confirm_service.services.tokens import create_token


def post_until_independent_site(client, auth):
    for site in SITES:
        client.post("/api/v1/sites", json=site, headers=auth("coordinator"))
    for target in TARGETS:
        client.post("/api/v1/targets", json=target, headers=auth("coordinator"))
    scans = scenario_scans()[:-1]  # everything but the partner's own scan
    for _, scan in scans:
        assert (
            client.post("/api/v1/observations", json=scan, headers=auth("pipeline")).status_code
            == 201
        )
    listing = client.get("/api/v1/candidates?state=open", headers=auth("viewer")).get_json()
    (candidate,) = listing["items"]
    assert candidate["stage"] == "independent_site"
    return candidate, scans


def partner_token(db, code):
    with db.write() as session:
        _, secret = create_token(session, SYSTEM, f"partner-{code.lower()}", "site", code)
    return {"Authorization": f"Bearer {secret}"}


def report_body(at, detected, frequency_hz=None, drift_hz_s=None, site="TFO"):
    body = {
        "site": site,
        "observed_at": at.isoformat(),
        "duration_s": 600.0,
        "detected": detected,
        "frequency_min_hz": 1.40e9,
        "frequency_max_hz": 1.45e9,
    }
    if detected:
        body |= {"frequency_hz": frequency_hz, "drift_hz_s": drift_hz_s}
    return body


def signal_and_time(scans):
    from datetime import datetime

    first = datetime.fromisoformat(scans[0][1]["start"])
    signal = SkyFixedSignal(SITES[0], TARGETS[0], first + timedelta(seconds=60))
    when = datetime.fromisoformat(scans[-1][1]["start"]) + timedelta(hours=8)
    return signal, when


def test_report_at_the_predicted_frequency_passes(client, auth, db):
    candidate, scans = post_until_independent_site(client, auth)
    signal, when = signal_and_time(scans)
    seen = signal.seen_at(SITES[1], when, 12.0)
    headers = partner_token(db, "TFO")
    wrong_site = client.post(
        f"/api/v1/candidates/{candidate['id']}/reports",
        json=report_body(when, True, seen["frequency_hz"], seen["drift_hz_s"], site="ORV"),
        headers=headers,
    )
    assert wrong_site.status_code == 403
    incomplete = client.post(
        f"/api/v1/candidates/{candidate['id']}/reports",
        json=report_body(when, True),
        headers=headers,
    )
    assert incomplete.status_code == 422
    ok = client.post(
        f"/api/v1/candidates/{candidate['id']}/reports",
        json=report_body(when, True, seen["frequency_hz"], seen["drift_hz_s"]),
        headers=headers,
    )
    assert ok.status_code == 201, ok.get_json()
    after = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer")).get_json()
    assert after["stage"] == "review"
    check = next(c for c in after["checks"] if c["kind"] == "independent_site")
    assert check["outcome"] == "pass" and "TFO" in check["reason"]
    assert after["reports"][0]["site"] == "TFO"
    assert {f["kind"] for f in after["followups"]} >= {"request_followup"}


def test_empty_looks_at_the_predicted_frequency_reject(client, auth, db):
    candidate, scans = post_until_independent_site(client, auth)
    _, when = signal_and_time(scans)
    headers = partner_token(db, "TFO")
    url = f"/api/v1/candidates/{candidate['id']}/reports"
    assert client.post(url, json=report_body(when, False), headers=headers).status_code == 201
    middle = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer")).get_json()
    assert middle["state"] == "open"  # the protocol allows 2 misses
    later = when + timedelta(days=1)
    assert client.post(url, json=report_body(later, False), headers=headers).status_code == 201
    final = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer")).get_json()
    assert (final["state"], final["reason_class"]) == ("rejected", "not_seen_elsewhere")
