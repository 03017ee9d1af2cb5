"""A pipeline posts scans; candidates form, are checked and advance or are rejected with no
other call; people sign off, decide and comment. Runs the demo's invented scenario through the
HTTP API on each backend.
"""

from __future__ import annotations

import hashlib
import json
import threading

from sqlalchemy import func, select

from confirm_service.actor import SYSTEM
from confirm_service.config import DEFAULT_PROTOCOL_FILE
from confirm_service.demo import SITES, TARGETS, scenario_scans
from confirm_service.models import AuditEntry, CheckResult, FollowUpRequest, StageTransition
from confirm_service.services.tokens import create_token

RATIONALE = "Reviewed the checks and the linked detections; consistent with a sky-fixed source."


def post_scenario(client, auth) -> list[dict]:
    for site in SITES:
        assert (
            client.post("/api/v1/sites", json=site, headers=auth("coordinator")).status_code == 201
        )
    for target in TARGETS:
        assert (
            client.post("/api/v1/targets", json=target, headers=auth("coordinator")).status_code
            == 201
        )
    for _, scan in scenario_scans():
        response = client.post("/api/v1/observations", json=scan, headers=auth("pipeline"))
        assert response.status_code == 201, response.get_json()
    listing = client.get("/api/v1/candidates?limit=100", headers=auth("viewer")).get_json()
    return [
        client.get(f"/api/v1/candidates/{c['id']}", headers=auth("viewer")).get_json()
        for c in listing["items"]
    ]


def by_frequency(candidates: list[dict], approx_hz: float) -> dict:
    return min(candidates, key=lambda c: abs(c["barycentric_frequency_hz"] - approx_hz))


def count(db, model, *where) -> int:
    with db.read() as session:
        return session.execute(select(func.count()).select_from(model).where(*where)).scalar_one()


def test_pipeline_alone_forms_checks_and_advances_candidates(client, auth, db):
    candidates = post_scenario(client, auth)
    # Screening leaves two candidates: the sky-fixed signal and the hit the pipeline flagged
    # itself in a navigation band; the other interference never becomes a candidate.
    assert len(candidates) == 2
    sky = by_frequency(candidates, 1.423e9)
    assert (sky["state"], sky["stage"]) == ("open", "review")
    outcomes = {c["kind"]: c["outcome"] for c in sky["checks"]}
    for kind in (
        "on_off_cadence",
        "nonzero_drift",
        "known_interference",
        "reobservation",
        "independent_site",
    ):
        assert outcomes[kind] == "pass", (kind, sky["checks"])
    # at 1.42 GHz the two sites' Earth drifts differ by less than 2 tolerances: no power
    assert outcomes["doppler_consistency"] == "not_applicable"
    assert {d["site"] for d in sky["detections"]} == {"PRA", "TFO"}
    assert len(sky["detections"]) == 5  # 3 cadence on-scans, the re-observation, the partner
    drift = next(c for c in sky["checks"] if c["kind"] == "doppler_consistency")
    assert drift["unit"] == "Hz/s" and drift["measured"] < drift["expected"]
    # the recovered residual drift is the injected one (demo: +0.0135 Hz/s), within 1e-4 Hz/s
    assert abs(sky["residual_drift_hz_s"] - 0.0135) < 1e-4
    stages = [h["to_stage"] for h in sky["history"]]
    assert stages == ["screening", "reobservation", "independent_site", "review"]
    rejected = {c["reason_class"] for c in candidates if c["state"] == "rejected"}
    assert rejected == {"failed_cadence"}
    # the navigation-band carrier is promoted (flagged by the pipeline), its band only flagged
    # for a person (default.toml: "flag"), then rejected because it shows off-source too
    flagged = next(c for c in sky["checks"] if c["kind"] == "known_interference")
    navigation = by_frequency(candidates, 1.5753e9)
    band = next(c for c in navigation["checks"] if c["kind"] == "known_interference")
    assert band["outcome"] == "inconclusive" and flagged["outcome"] == "pass"
    # ... and the rest of the cadence's hits kept their screening reason, countable per scan
    first_on = client.get("/api/v1/observations/1/screening", headers=auth("viewer")).get_json()
    assert first_on["pending"] == 0
    assert first_on["reasons"] == {"flagged": 1, "low_snr": 40, "survived": 1, "zero_drift": 2}
    first_off = client.get("/api/v1/observations/2/screening", headers=auth("viewer")).get_json()
    assert first_off["reasons"] == {"linked": 1, "off_source_scan": 41}
    # the protocol file's content hash is recorded (outside reference: hashlib on the file)
    assert (
        sky["protocol"]["sha256"] == hashlib.sha256(DEFAULT_PROTOCOL_FILE.read_bytes()).hexdigest()
    )
    with db.read() as session:
        kinds = sorted(session.execute(select(FollowUpRequest.kind)).scalars())
    assert kinds == ["notify", "request_followup", "request_reobservation"]

    # evaluation is idempotent: re-evaluating with no new data writes nothing
    from confirm_service.models import Candidate
    from confirm_service.services.evaluation import reevaluate

    results, entries = count(db, CheckResult), count(db, AuditEntry)
    with db.write() as session:
        reevaluate(session, SYSTEM, session.get(Candidate, sky["id"]))
    assert (count(db, CheckResult), count(db, AuditEntry)) == (results, entries)

    # two distinct coordinators sign off the review stage: passed_protocol, pinned to a checkpoint
    with db.write() as session:
        _, second = create_token(session, SYSTEM, "coordinator-two", "coordinator")
    url = f"/api/v1/candidates/{sky['id']}/signoffs"
    first = client.post(url, json={"rationale": RATIONALE}, headers=auth("coordinator"))
    assert first.status_code == 201, first.get_json()
    again = client.post(url, json={"rationale": RATIONALE}, headers=auth("coordinator"))
    assert again.status_code == 409
    impostor = client.post(
        url, json={"rationale": RATIONALE, "person": "someone-else"}, headers=auth("coordinator")
    )
    assert impostor.status_code == 409
    assert [e["field"] for e in impostor.get_json()["errors"]] == ["person"]
    done = client.post(
        url, json={"rationale": RATIONALE}, headers={"Authorization": f"Bearer {second}"}
    )
    assert done.status_code == 201
    final = client.get(f"/api/v1/candidates/{sky['id']}", headers=auth("viewer")).get_json()
    assert final["state"] == "passed_protocol"
    assert final["decision_checkpoint_size"] is not None
    assert "not a detection" in final["caution"]
    entries = count(db, AuditEntry)
    assert final["decision_checkpoint_size"] <= entries


def test_fifty_concurrent_signoffs_advance_the_stage_once(app, client, auth, db):
    candidates = post_scenario(client, auth)
    sky = next(c for c in candidates if c["stage"] == "review")
    with db.write() as session:
        secrets = [
            create_token(session, SYSTEM, f"coordinator-{i:02d}", "coordinator")[1]
            for i in range(50)
        ]
    statuses: list[int] = []
    lock = threading.Lock()
    barrier = threading.Barrier(len(secrets))

    def approve(secret: str) -> None:
        own_client = app.test_client()
        barrier.wait()
        response = own_client.post(
            f"/api/v1/candidates/{sky['id']}/signoffs",
            json={"rationale": RATIONALE},
            headers={"Authorization": f"Bearer {secret}"},
        )
        with lock:
            statuses.append(response.status_code)

    threads = [threading.Thread(target=approve, args=(s,)) for s in secrets]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join()
    # the stage needs 2 approvals: exactly 2 are accepted, the rest find it decided (409)
    assert sorted(statuses) == [201, 201] + [409] * 48
    passed = count(
        db,
        StageTransition,
        StageTransition.candidate_id == sky["id"],
        StageTransition.to_state == "passed_protocol",
    )
    assert passed == 1


def test_people_promote_comment_and_withdraw(client, auth, db):
    for site in SITES:
        client.post("/api/v1/sites", json=site, headers=auth("coordinator"))
    for target in TARGETS:
        client.post("/api/v1/targets", json=target, headers=auth("coordinator"))
    label, first_scan = scenario_scans()[0]
    created = client.post(
        "/api/v1/observations", json=first_scan, headers=auth("pipeline")
    ).get_json()
    faint = created["detection_ids"][0]  # a noise hit below the intake threshold
    promoted = client.post(
        "/api/v1/candidates",
        json={"detection_id": faint, "note": "looks odd"},
        headers=auth("coordinator"),
    )
    assert promoted.status_code == 201, promoted.get_json()
    candidate = promoted.get_json()
    assert candidate["origin"] == "explicit"
    twice = client.post(
        "/api/v1/candidates", json={"detection_id": faint}, headers=auth("coordinator")
    )
    assert twice.status_code == 409
    comment = client.post(
        f"/api/v1/candidates/{candidate['id']}/comments",
        json={"text": "Checked the receiver log: nothing unusual."},
        headers=auth("site"),
    )
    assert comment.status_code == 201
    empty = client.post(
        f"/api/v1/candidates/{candidate['id']}/withdraw", json={}, headers=auth("coordinator")
    )
    assert empty.status_code == 422
    assert [e["field"] for e in empty.get_json()["errors"]] == ["rationale"]
    withdrawn = client.post(
        f"/api/v1/candidates/{candidate['id']}/withdraw",
        json={"rationale": "A receiver self-test tone, logged by the site."},
        headers=auth("coordinator"),
    )
    assert withdrawn.status_code == 200
    body = withdrawn.get_json()
    assert body["state"] == "withdrawn"
    assert body["decision_checkpoint_size"] is not None
    assert body["history"][-1]["to_state"] == "withdrawn"
    assert body["comments"][0]["author"] == "test-site"
    again = client.post(
        f"/api/v1/candidates/{candidate['id']}/withdraw",
        json={"rationale": "again"},
        headers=auth("coordinator"),
    )
    assert again.status_code == 409
    listing = client.get("/api/v1/candidates?state=withdrawn", headers=auth("viewer")).get_json()
    assert [c["id"] for c in listing["items"]] == [candidate["id"]]
    by_check = client.get(
        "/api/v1/candidates?check_kind=known_interference&check_outcome=inconclusive",
        headers=auth("viewer"),
    ).get_json()
    band_rejects = [c["id"] for c in by_check["items"]]
    assert band_rejects and candidate["id"] not in band_rejects
    assert all(c["state"] == "open" and c["held"] for c in by_check["items"])
    with db.read() as session:
        actions = [e.action for e in session.execute(select(AuditEntry)).scalars()]
    for action in ("candidate.created", "comment.added", "candidate.withdrawn"):
        assert action in actions
    payloads = [json.loads(e.payload) for e in _entries(db, "candidate.withdrawn")]
    assert payloads[0]["rationale"].startswith("A receiver self-test tone")


def _entries(db, action):
    with db.read() as session:
        return list(
            session.execute(select(AuditEntry).where(AuditEntry.action == action)).scalars()
        )
