"""Partner looks that could not see the signal are shown as not constraining, end to end:
through the report endpoint, in the candidate's check details and in the dossier.

Reference: the target's elevation at the partner from skyfield (apparent alt/az, no
refraction; skyfield-data's DE421), independent of the astropy engine under test.
"""

from __future__ import annotations

from datetime import timedelta
from types import SimpleNamespace

import numpy as np

from confirm_service.demo import SITES, TARGETS
from tests.physics.skyfield_reference import SkyfieldReference
from tests.protocol.test_protocol_misses import skyfield_elevation_deg
from tests.services.test_reports import (
    partner_token,
    post_until_independent_site,
    report_body,
    signal_and_time,
)

TFO = SimpleNamespace(**SITES[1])
TARGET = SimpleNamespace(**TARGETS[0])


def hidden_start(after):
    """A 600 s look from ``after`` on when skyfield has the target below 0 deg at TFO."""
    grid = np.array([(after + timedelta(minutes=30 * k)).timestamp() for k in range(48)])
    reference = SkyfieldReference()
    low = skyfield_elevation_deg(reference, TFO, TARGET, grid)
    low_end = skyfield_elevation_deg(reference, TFO, TARGET, grid + 600.0)
    k = int(np.flatnonzero((low < -5.0) & (low_end < -5.0))[0])
    return after + timedelta(minutes=30 * k)


def test_looks_below_the_horizon_show_as_not_constraining(client, auth, db):
    candidate, scans = post_until_independent_site(client, auth)
    _, when = signal_and_time(scans)
    headers = partner_token(db, "TFO")
    url = f"/api/v1/candidates/{candidate['id']}/reports"
    hidden = [hidden_start(when), hidden_start(when + timedelta(days=1))]
    for at in hidden:
        answer = client.post(url, json=report_body(at, False), headers=headers)
        assert answer.status_code == 201, answer.get_json()
    shown = client.get(f"/api/v1/candidates/{candidate['id']}", headers=auth("viewer")).get_json()
    # default.toml allows 2 missed sessions: two silent looks on two nights would reject it.
    assert shown["state"] == "open"
    check = next(c for c in shown["checks"] if c["kind"] == "independent_site")
    assert check["outcome"] == "pending" and check["details"]["missed_sessions"] == {}
    records = check["details"]["not_constraining"]
    assert [r["site"] for r in records] == ["TFO", "TFO"]
    assert all(r["reasons"][0].startswith("below_horizon") for r in records)
    assert all(r["max_elevation_deg"] < 0.0 and r["min_elevation_deg"] == 12.0 for r in records)
    assert "2 with the target below the site's horizon limit" in check["reason"]
    dossier = client.get(
        f"/api/v1/candidates/{candidate['id']}/dossier", headers=auth("coordinator")
    )
    assert dossier.status_code == 200, dossier.get_json()
    checks = dossier.get_json()["candidate"]["checks"]
    assert (
        next(c for c in checks if c["kind"] == "independent_site")["details"]["not_constraining"]
        == records
    )


def test_a_reported_scan_keeps_the_reports_sensitivity(client, auth, db):
    candidate, scans = post_until_independent_site(client, auth)
    _, when = signal_and_time(scans)
    _, template = scans[-1]
    scan = {
        k: v
        for k, v in template.items()
        if k not in ("detections", "cadence", "complete", "sefd_jy", "threshold_snr")
    } | {"site": "TFO", "start": when.isoformat(), "detections": [], "complete": True}
    body = {
        "site": "TFO",
        "detected": False,
        "observation": scan,
        "sefd_jy": 35.0,
        "threshold_snr": 9.0,
    }
    url = f"/api/v1/candidates/{candidate['id']}/reports"
    answer = client.post(url, json=body, headers=partner_token(db, "TFO"))
    assert answer.status_code == 201, answer.get_json()
    stored = client.get(
        f"/api/v1/observations/{answer.get_json()['observation_id']}", headers=auth("viewer")
    ).get_json()
    assert (stored["sefd_jy"], stored["threshold_snr"]) == (35.0, 9.0)
