"""One signal, one candidate: promoting by hand a hit that an existing candidate already holds,
or that lies on its predicted track, is answered with that candidate, never a duplicate."""

from __future__ import annotations

from datetime import datetime, timedelta

from confirm_service.demo import SITES, TARGETS, scenario_scans

from .test_candidate_flow import post_scenario


def test_promoting_a_hit_on_a_closed_candidates_track_names_that_candidate(client, auth):
    candidates = post_scenario(client, auth)
    zero = min(
        (c for c in candidates if c["state"] == "rejected"),
        key=lambda c: c["id"],
    )
    reference = zero["detections"][0]
    # the same carrier in a later on-source scan of the target, on the track of the rejected
    # candidate: its frequency moved on by its own drift over the 15 s between the two hits
    _, first = scenario_scans()[0]
    start = datetime.fromisoformat(first["start"]) + timedelta(seconds=60)
    moved_hz = reference["frequency_hz"] + reference["drift_hz_s"] * (
        60.0 - 45.0  # the demo posts this carrier 45 s into its scan
    )
    scan = {
        **{k: v for k, v in first.items() if k != "detections"},
        "start": start.isoformat(),
        "cadence": None,
        "detections": [
            {"frequency_hz": moved_hz, "drift_hz_s": reference["drift_hz_s"], "snr": 9.0}
        ],
    }
    created = client.post("/api/v1/observations", json=scan, headers=auth("pipeline"))
    assert created.status_code == 201, created.get_json()
    hit = created.get_json()["detection_ids"][0]
    answer = client.post(
        "/api/v1/candidates", json={"detection_id": hit}, headers=auth("coordinator")
    )
    assert answer.status_code == 409, answer.get_json()
    problem = answer.get_json()
    assert f"candidate {zero['id']}" in problem["detail"] and "rejected" in problem["detail"]
    assert problem["errors"][0]["field"] == "detection_id"
    listing = client.get("/api/v1/candidates?limit=100", headers=auth("viewer")).get_json()
    assert len(listing["items"]) == len(candidates)
    assert SITES and TARGETS
