"""A coordinator reopens a rejected candidate or retracts a person's decision, with a written
rationale; both are audited and the candidate is re-evaluated under its protocol at once. An
automatic failure overruled this way holds the candidate for a person instead of rejecting it
again. Through the API, the command line and the decision screen."""

from __future__ import annotations

import json

from click.testing import CliRunner
from sqlalchemy import func, select

from confirm_service.cli import main
from confirm_service.cli.context import settings
from confirm_service.models import AuditCheckpoint, AuditEntry
from tests.web.test_dashboard import csrf_of, page_text, post_form, signed_in

from .test_candidate_flow import by_frequency, post_scenario

WHY = "The off-source hit is a receiver birdie logged that night at PRA; reviewed by hand."


def audit_entries(db, action: str) -> list[dict]:
    with db.read() as session:
        rows = session.execute(select(AuditEntry).where(AuditEntry.action == action)).scalars()
        return [{"seq": r.seq, "subject": r.subject, **json.loads(r.payload)} for r in rows]


def entry_count(db) -> int:
    with db.read() as session:
        return session.execute(select(func.count()).select_from(AuditEntry)).scalar_one()


def test_a_rejected_candidate_is_reopened_audited_and_held_for_a_person(client, auth, db):
    candidates = post_scenario(client, auth)
    navigation = by_frequency(candidates, 1.5753e9)
    assert (navigation["state"], navigation["reason_class"]) == ("rejected", "failed_cadence")
    url = f"/api/v1/candidates/{navigation['id']}"
    before = entry_count(db)
    for blank in ("", "   \n"):
        refused = client.post(
            f"{url}/reopen", json={"rationale": blank}, headers=auth("coordinator")
        )
        assert refused.status_code == 422
        assert refused.get_json()["errors"][0]["field"] == "rationale"
    assert client.post(f"{url}/reopen", json={}, headers=auth("coordinator")).status_code == 422
    for role in ("viewer", "pipeline", "site"):
        forbidden = client.post(f"{url}/reopen", json={"rationale": WHY}, headers=auth(role))
        assert forbidden.status_code == 403, role
    # an automatic rejection is reopened, not retracted
    wrong_way = client.post(f"{url}/retract", json={"rationale": WHY}, headers=auth("coordinator"))
    assert wrong_way.status_code == 409 and "reopened instead" in json.dumps(wrong_way.get_json())
    assert entry_count(db) == before  # nothing written by any refusal

    reopened = client.post(f"{url}/reopen", json={"rationale": WHY}, headers=auth("coordinator"))
    assert reopened.status_code == 200, reopened.get_json()
    body = reopened.get_json()
    # re-evaluated under its protocol: the cadence check still fails, but since a person
    # overruled its rejection it holds the candidate for a person instead of rejecting it again
    assert body["state"] == "open" and body["held"] is True and body["hold_reason"]
    cadence = next(c for c in body["checks"] if c["kind"] == "on_off_cadence")
    assert cadence["outcome"] == "fail"
    last = body["history"][-1]
    assert (last["from_state"], last["to_state"], last["reason"]) == ("rejected", "open", WHY)
    assert last["reason_class"] == "reopened"
    [entry] = audit_entries(db, "candidate.reopened")
    assert entry["subject"] == f"candidate:{navigation['id']}" and entry["rationale"] == WHY
    assert entry["from_state"] == "rejected" and "on_off_cadence" in entry["overruled_checks"]
    with db.read() as session:  # the reopening is covered by a signed checkpoint at once
        signed = session.execute(select(func.max(AuditCheckpoint.tree_size))).scalar_one()
    assert signed >= entry["seq"]
    again = client.post(f"{url}/reopen", json={"rationale": WHY}, headers=auth("coordinator"))
    assert again.status_code == 409  # it is open now

    # the person releases the holds: the overruled check no longer rejects it
    released = client.post(
        f"{url}/release-hold", json={"rationale": WHY}, headers=auth("coordinator")
    )
    assert released.status_code == 200
    assert released.get_json()["state"] == "open"


def test_a_persons_decision_is_retracted_and_the_candidate_re_evaluated(client, auth, db):
    candidates = post_scenario(client, auth)
    sky = by_frequency(candidates, 1.423e9)
    url = f"/api/v1/candidates/{sky['id']}"
    decided = client.post(
        f"{url}/decision",
        json={"decision": "withdrawn", "rationale": "Closed while the PRA receiver is serviced."},
        headers=auth("coordinator"),
    )
    assert decided.get_json()["state"] == "withdrawn"
    assert (
        client.post(
            f"{url}/reopen", json={"rationale": WHY}, headers=auth("coordinator")
        ).status_code
        == 409
    )
    retracted = client.post(f"{url}/retract", json={"rationale": WHY}, headers=auth("coordinator"))
    assert retracted.status_code == 200, retracted.get_json()
    body = retracted.get_json()
    assert (body["state"], body["stage"], body["held"]) == ("open", "review", False)
    assert {c["kind"]: c["outcome"] for c in body["checks"]}["on_off_cadence"] == "pass"
    assert body["history"][-1]["from_state"] == "withdrawn"
    [entry] = audit_entries(db, "candidate.retracted")
    assert entry["rationale"] == WHY and entry["from_state"] == "withdrawn"


def test_promoting_a_hit_of_a_rejected_candidate_points_at_the_reopen_route(client, auth):
    candidates = post_scenario(client, auth)
    navigation = by_frequency(candidates, 1.5753e9)
    hit = navigation["detections"][0]["id"]
    answer = client.post(
        "/api/v1/candidates", json={"detection_id": hit}, headers=auth("coordinator")
    )
    assert answer.status_code == 409
    route = f"/api/v1/candidates/{navigation['id']}/reopen"
    assert route in answer.get_json()["detail"]
    # ... and that route exists and does what it says
    done = client.post(route, json={"rationale": WHY}, headers=auth("coordinator"))
    assert done.status_code == 200


def test_the_command_line_reopens_with_a_rationale(client, auth, db, database_url, app):
    candidates = post_scenario(client, auth)
    navigation = by_frequency(candidates, 1.5753e9)
    env = {
        "CONFIRM_DATABASE_URL": database_url,
        "CONFIRM_INSTANCE_PATH": str(app.extensions["confirm.settings"].instance_path),
    }
    settings.cache_clear()
    try:
        blank = CliRunner().invoke(
            main, ["candidates", "reopen", str(navigation["id"]), "--rationale", " "], env=env
        )
        assert blank.exit_code == 2 and "rationale" in blank.stderr
        done = CliRunner().invoke(
            main, ["candidates", "reopen", str(navigation["id"]), "--rationale", WHY], env=env
        )
        assert done.exit_code == 0, done.output
        assert f"candidate {navigation['id']}: open" in done.stdout
        assert "HELD: " in done.stdout
        twice = CliRunner().invoke(
            main, ["candidates", "retract", str(navigation["id"]), "--rationale", WHY], env=env
        )
        assert twice.exit_code == 2  # open now: nothing to retract
    finally:
        settings.cache_clear()
    [entry] = audit_entries(db, "candidate.reopened")
    assert entry["rationale"] == WHY


def test_the_decision_screen_offers_reopening_to_coordinators_only(app, client, auth, tokens):
    from confirm_service.web import bp

    if "dashboard" not in app.blueprints:
        app.register_blueprint(bp)
    candidates = post_scenario(client, auth)
    navigation = by_frequency(candidates, 1.5753e9)
    url = f"/dashboard/candidates/{navigation['id']}"
    viewer = signed_in(app, tokens["viewer"])
    page = viewer.get(url)
    assert 'id="reopen"' not in page.get_data(as_text=True)
    refused = viewer.post(f"{url}/reopen", data={"rationale": WHY, "csrf_token": csrf_of(page)})
    assert refused.status_code == 403
    coordinator = signed_in(app, tokens["coordinator"])
    assert 'id="reopen"' in coordinator.get(url).get_data(as_text=True)
    forged = coordinator.post(f"{url}/reopen", data={"rationale": WHY, "csrf_token": "forged"})
    assert forged.status_code == 400
    missing = post_form(coordinator, url, f"{url}/reopen", {"rationale": ""})
    assert missing.status_code == 422
    done = post_form(coordinator, url, f"{url}/reopen", {"rationale": WHY})
    assert done.status_code == 302
    assert "reopened and re-evaluated: it is open" in page_text(coordinator.get(url))
    api = client.get(f"/api/v1/candidates/{navigation['id']}", headers=auth("viewer")).get_json()
    assert api["state"] == "open" and api["history"][-1]["reason"] == WHY
