"""A frequency refers to one instant everywhere: a report built from /predictions lands on the
track, and a report far from the prediction is answered with a warning (and audited).

Reference: the service's own /predictions (exact physics engine, checked against skyfield in
tests/physics) for the partner site at the report's instant, observed_at + time_offset_s.
"""

from __future__ import annotations

import json
from datetime import datetime, timedelta

from sqlalchemy import select

from confirm_service.models import AuditEntry
from tests.services.test_reports import (
    partner_token,
    post_until_independent_site,
    report_body,
    signal_and_time,
)

CHANNEL_HZ = 3.81  # the demo instrument's channel width (invented)


def predicted_for(client, auth, candidate, site, instant):
    """The service's own prediction for ``site`` at ``instant`` from the reference hit."""
    full = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer")).get_json()
    (hit,) = [d for d in full["detections"] if d["id"] == full["reference_detection"]]
    assert hit["time"] == full["reference_time"]  # the hit's instant: start + time_offset_s
    query = {
        "site": hit["site"],
        "target": full["target"],
        "time": hit["time"],
        "observed_frequency_hz": hit["frequency_hz"],
        "observed_drift_hz_s": hit["drift_hz_s"],
        "to_site": site,
        "to_time": instant.isoformat(),
    }
    answer = client.get("/api/v1/predictions", query_string=query, headers=auth("viewer"))
    assert answer.status_code == 200, answer.get_json()
    return answer.get_json()


def test_report_built_from_predictions_lands_on_the_track(client, auth, db):
    candidate, scans = post_until_independent_site(client, auth)
    _, when = signal_and_time(scans)
    offset_s = 450.0  # the sighting's instant is 450 s into the partner's 600 s look
    instant = when + timedelta(seconds=offset_s)
    prediction = predicted_for(client, auth, candidate, "TFO", instant)
    body = report_body(
        when, True, prediction["predicted_frequency_hz"], prediction["predicted_drift_hz_s"]
    ) | {"time_offset_s": offset_s}
    url = f"/api/v1/candidates/{candidate['id']}/reports"
    answer = client.post(url, json=body, headers=partner_token(db, "TFO"))
    assert answer.status_code == 201, answer.get_json()
    assert answer.get_json()["warnings"] == [] and answer.get_json()["time_offset_s"] == offset_s
    after = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer")).get_json()
    check = next(c for c in after["checks"] if c["kind"] == "independent_site")
    assert check["outcome"] == "pass"
    # Within a tenth of a channel of the frequency the service predicted there; judged at
    # observed_at alone it would be off by drift x 450 s, five times that or more.
    assert abs(check["details"]["offset_hz"]) < 0.1 * CHANNEL_HZ
    assert abs(prediction["predicted_drift_hz_s"]) * offset_s > 0.5 * CHANNEL_HZ


def test_report_far_from_the_prediction_is_answered_with_a_warning(client, auth, db):
    candidate, scans = post_until_independent_site(client, auth)
    _, when = signal_and_time(scans)
    prediction = predicted_for(client, auth, candidate, "TFO", when)
    far_hz = prediction["predicted_frequency_hz"] + 65_000.0
    body = report_body(when, True, far_hz, prediction["predicted_drift_hz_s"])
    url = f"/api/v1/candidates/{candidate['id']}/reports"
    answer = client.post(url, json=body, headers=partner_token(db, "TFO"))
    assert answer.status_code == 201  # kept: a partner's report is evidence either way
    (warning,) = answer.get_json()["warnings"]
    assert "+65000" in warning.replace(".0 Hz", " Hz").replace(",", "")
    assert "outside the predicted band" in warning
    with db.read() as session:
        entry = session.execute(
            select(AuditEntry).where(AuditEntry.action == "followup.reported")
        ).scalar_one()
    assert json.loads(entry.payload)["warnings"] == [warning]
    shown = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer")).get_json()
    assert shown["reports"][0]["warnings"] == [warning]


def test_a_decided_candidate_says_so_when_a_report_arrives(client, auth, db):
    candidate, scans = post_until_independent_site(client, auth)
    _, when = signal_and_time(scans)
    headers = partner_token(db, "TFO")
    url = f"/api/v1/candidates/{candidate['id']}/reports"
    for day in (0, 1):
        at = when + timedelta(days=day)
        assert client.post(url, json=report_body(at, False), headers=headers).status_code == 201
    rejected = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer"))
    assert rejected.get_json()["state"] == "rejected"
    late = client.post(url, json=report_body(when + timedelta(days=2), False), headers=headers)
    assert late.status_code == 201
    assert any("is rejected" in w for w in late.get_json()["warnings"])
    assert isinstance(datetime.fromisoformat(late.get_json()["observed_at"]), datetime)
