"""People's accounts, the attention list, search, export and the other pages, through Flask's
test client on each backend. Standards are named beside the checks that rest on them."""

from __future__ import annotations

import base64
import csv
import io
import re
from typing import Any

import pytest
from sqlalchemy import select

from confirm_service.actor import SYSTEM
from confirm_service.errors import Invalid
from confirm_service.models import Person
from confirm_service.services import passwords, people
from tests.services.test_candidate_flow import post_scenario
from tests.web.test_dashboard import csrf_of, page_text, post_form

PASSWORD = "a long enough pass phrase"
RATIONALE = "Both sites see it on the predicted track; the drift matches Earth's."


def make_person(db: Any, username: str, role: str = "coordinator") -> None:
    with db.write() as session:
        people.create_person(session, SYSTEM, username, username.title(), role, PASSWORD)


def person_sign_in(client: Any, username: str, password: str = PASSWORD) -> Any:
    form = client.get("/dashboard/sign-in")
    data = {"username": username, "password": password, "csrf_token": csrf_of(form)}
    return client.post("/dashboard/sign-in", data=data)


def signed_in_person(app: Any, username: str) -> Any:
    client = app.test_client()
    assert person_sign_in(client, username).status_code == 302
    return client


# --- passwords and accounts ------------------------------------------------------------------


def test_password_hashes_are_scrypt_and_check_against_the_rfc_vector():
    # RFC 7914, section 12, third test vector: scrypt("pleaseletmein", "SodiumChloride",
    # N=16384, r=8, p=1, dkLen=64)
    key = bytes.fromhex(
        "7023bdcb3afd7348461c06cd81fd38ebfda8fbba904f8e3ea9b543f6545da1f2"
        "d5432955613f0fcf62d49705242a9af9e61e85dc0d651e40dfcf017b45575887"
    )
    salt = base64.b64encode(b"SodiumChloride").decode()
    stored = f"scrypt$16384$8$1${salt}${base64.b64encode(key).decode()}"
    assert passwords.verify_password("pleaseletmein", stored)
    assert not passwords.verify_password("pleaseletmeout", stored)
    mine = passwords.hash_password(PASSWORD)
    assert mine.startswith("scrypt$131072$8$1$")  # OWASP Password Storage Cheat Sheet minimum
    assert passwords.verify_password(PASSWORD, mine) and PASSWORD not in mine
    assert passwords.hash_password(PASSWORD) != mine  # a fresh salt each time


def test_weak_or_taken_accounts_are_refused(db):
    with db.write() as session, pytest.raises(Invalid) as refused:
        people.create_person(session, SYSTEM, "ada", "Ada", "coordinator", "short")
    assert ("password", "must be at least 12 characters") in refused.value.errors
    with db.write() as session, pytest.raises(Invalid) as refused:
        people.create_person(session, SYSTEM, "ada", "Ada", "emperor", "ada-is-in-here-too")
    fields = {name for name, _ in refused.value.errors}
    assert fields == {"role", "password"}
    with db.read() as session:
        assert session.execute(select(Person)).first() is None


def test_a_person_signs_in_and_the_cookie_is_strict(app, db):
    make_person(db, "ada.quill")
    client = app.test_client()
    response = person_sign_in(client, "ada.quill")
    assert response.status_code == 302 and response.headers["Location"] == "/dashboard"
    cookie = response.headers["Set-Cookie"]
    # RFC 6265 4.1.2.5 Secure / 4.1.2.6 HttpOnly; SameSite=Lax (RFC 6265bis 5.4.7)
    assert "HttpOnly" in cookie and "SameSite=Lax" in cookie and "Path=/dashboard" in cookie
    assert "Secure" not in cookie  # plain HTTP to loopback: development only
    assert PASSWORD not in cookie
    assert "Signed in as ada.quill (role coordinator)" in page_text(client.get("/dashboard"))

    remote = app.test_client()
    form = remote.get("/dashboard/sign-in", base_url="http://desk.example")
    answer = remote.post(
        "/dashboard/sign-in",
        base_url="http://desk.example",
        data={"username": "ada.quill", "password": PASSWORD, "csrf_token": csrf_of(form)},
    )
    assert "Secure" in answer.headers["Set-Cookie"]  # anywhere else the cookie needs HTTPS


def test_repeated_wrong_passwords_lock_the_account(app, db):
    make_person(db, "ada.quill")
    client = app.test_client()
    for attempt in range(people.MAX_FAILED_SIGN_INS - 1):
        wrong = person_sign_in(client, "ada.quill", "not the password at all")
        assert wrong.status_code == 422, attempt
        assert "The user name or the password is wrong." in page_text(wrong)
    locked = person_sign_in(client, "ada.quill", "not the password at all")
    assert "This account is locked" in page_text(locked)
    still = person_sign_in(client, "ada.quill")  # the right password is refused while locked
    assert still.status_code == 422 and "This account is locked" in page_text(still)
    unknown = person_sign_in(client, "nobody.here")
    assert "The user name or the password is wrong." in page_text(unknown)  # no name oracle
    with db.write() as session:
        people.unlock(session, SYSTEM, "ada.quill")
    assert person_sign_in(client, "ada.quill").status_code == 302


def test_disabling_an_account_ends_its_sessions(app, db):
    make_person(db, "ada.quill")
    client = signed_in_person(app, "ada.quill")
    assert client.get("/dashboard").status_code == 200
    with db.write() as session:
        people.disable(session, SYSTEM, "ada.quill")
    assert client.get("/dashboard").status_code == 302
    assert person_sign_in(app.test_client(), "ada.quill").status_code == 422


def test_a_person_signs_off_through_the_protocol_rule(app, client, auth, db):
    review = next(c for c in post_scenario(client, auth) if c["stage"] == "review")
    make_person(db, "ada.quill")
    person = signed_in_person(app, "ada.quill")
    attention = person.get("/dashboard").get_data(as_text=True)
    awaiting = attention[attention.index('id="att-signoff"') : attention.index('id="att-held"')]
    assert f"Candidate {review['id']}:" in awaiting
    url = f"/dashboard/candidates/{review['id']}"
    done = post_form(person, url, f"{url}/signoffs", {"verdict": "approve", "rationale": RATIONALE})
    assert done.status_code == 302
    api = client.get(f"/api/v1/candidates/{review['id']}", headers=auth("viewer")).get_json()
    assert [(s["person"], s["role"]) for s in api["signoffs"]] == [("ada.quill", "coordinator")]
    assert "1 so far (ada.quill)" in page_text(person.get(url))
    attention = person.get("/dashboard").get_data(as_text=True)
    awaiting = attention[attention.index('id="att-signoff"') : attention.index('id="att-held"')]
    assert f"Candidate {review['id']}:" not in awaiting  # signed: no longer waiting for them


# --- the overview ---------------------------------------------------------------------------


def listed_ids(response: Any) -> list[int]:
    return [int(i) for i in re.findall(r'href="/dashboard/candidates/(\d+)"', response.text)]


def test_search_by_id_site_and_frequency(app, client, auth, tokens):
    from tests.web.test_dashboard import signed_in

    candidates = post_scenario(client, auth)
    review = next(c for c in candidates if c["stage"] == "review")
    viewer = signed_in(app, tokens["viewer"])
    assert listed_ids(viewer.get(f"/dashboard?q={review['id']}")) == [review["id"]]
    assert listed_ids(viewer.get(f"/dashboard?q=%23{review['id']}")) == [review["id"]]
    assert listed_ids(viewer.get("/dashboard?q=tfo")) == [review["id"]]
    assert sorted(listed_ids(viewer.get("/dashboard?q=kestrel"))) == sorted(
        c["id"] for c in candidates if c["target"] == "Kestrel-7"
    )
    f = review["barycentric_frequency_hz"]
    near = viewer.get(f"/dashboard?frequency_hz={f + 40}&tolerance_hz=50")
    assert listed_ids(near) == [review["id"]]
    assert listed_ids(viewer.get(f"/dashboard?frequency_hz={f + 60}&tolerance_hz=50")) == []
    for query in ("q=tfo", f"frequency_hz={f + 40}&tolerance_hz=50", "q=kestrel&state=rejected"):
        api = client.get(f"/api/v1/candidates?{query}", headers=auth("viewer")).get_json()
        page = viewer.get(f"/dashboard?{query}")
        assert sorted(c["id"] for c in api["items"]) == sorted(listed_ids(page)), query
    refused = viewer.get("/dashboard?frequency_hz=minus-three")
    assert refused.status_code == 400 and refused.mimetype == "text/html"
    assert "frequency_hz" in page_text(refused)


def test_filters_survive_paging_and_export(app, client, auth, tokens, monkeypatch):
    from confirm_service.web import pages_overview
    from tests.web.test_dashboard import signed_in

    candidates = post_scenario(client, auth)
    monkeypatch.setattr(pages_overview, "LIST_LIMIT", 1)
    viewer = signed_in(app, tokens["viewer"])
    first = viewer.get("/dashboard?target=Kestrel-7&q=kestrel")
    following = re.search(r'href="([^"]+)" rel="next"', first.text)
    assert following is not None
    link = following.group(1).replace("&amp;", "&")
    assert "target=Kestrel-7" in link and "q=kestrel" in link and "after=" in link
    second = viewer.get(link)
    assert listed_ids(first) + listed_ids(second) == sorted(c["id"] for c in candidates)
    assert re.search(r'rel="next"', second.text) is None
    rejected = sorted(c["id"] for c in candidates if c["state"] == "rejected")

    exported = viewer.get("/dashboard/candidates.csv?state=rejected")
    assert exported.mimetype == "text/csv"
    assert exported.headers["Content-Disposition"] == 'attachment; filename="candidates.csv"'
    assert exported.text.count("\r\n") == len(rejected) + 1  # RFC 4180 2.1: CRLF line breaks
    rows = list(csv.DictReader(io.StringIO(exported.text)))
    assert sorted(int(r["candidate_id"]) for r in rows) == rejected
    by_id = {c["id"]: c for c in candidates}
    for row in rows:  # floats read back bit for bit
        expected = by_id[int(row["candidate_id"])]["barycentric_frequency_hz"]
        assert float(row["barycentric_frequency_hz"]) == expected


# --- errors are pages; the other pages ------------------------------------------------------


def test_dashboard_errors_are_pages_and_the_api_keeps_json(app, tokens):
    from tests.web.test_dashboard import signed_in

    anonymous = app.test_client()
    mistyped = anonymous.get("/dashboard/login")
    assert mistyped.status_code == 404 and mistyped.mimetype == "text/html"
    assert "there is no page at /dashboard/login" in page_text(mistyped)
    assert 'href="/dashboard/sign-in"' in mistyped.text
    viewer = signed_in(app, tokens["viewer"])
    wrong_method = viewer.get("/dashboard/candidates/1/signoffs")  # RFC 9110 15.5.6
    assert wrong_method.status_code == 405 and wrong_method.mimetype == "text/html"
    assert viewer.get("/dashboard/no/such/page").mimetype == "text/html"
    api = anonymous.get("/api/v1/no-such-route")
    assert api.status_code == 401 and api.mimetype == "application/problem+json"  # RFC 9457


def test_sites_followups_screening_and_audit_pages(app, client, auth, tokens):
    from tests.web.test_dashboard import signed_in

    post_scenario(client, auth)
    viewer = signed_in(app, tokens["viewer"])
    sites = viewer.get("/dashboard/sites")
    assert sites.status_code == 200
    text = page_text(sites)
    for code in ("PRA", "TFO", "ORV"):
        assert code in text
    one = page_text(viewer.get("/dashboard/sites/TFO"))
    assert "Tamsin Flats Observatory" in one and "Candidates with hits at TFO" in one
    assert viewer.get("/dashboard/sites/NOPE").status_code == 404
    followups = page_text(viewer.get("/dashboard/follow-ups"))
    assert "request_followup" in followups or "No follow-up request" in followups
    screening = viewer.get("/dashboard/screening")
    assert screening.status_code == 200
    text = page_text(screening)  # the first off-source scan: its 41 hits, all kept as evidence
    assert "off_source_scan: 41" in text and "present_off_source" not in text
    assert "zero_drift: 2" in text and "survived: 1" in text
    audit = viewer.get("/dashboard/audit?verify=1")
    assert audit.status_code == 200 and "✓ intact" in page_text(audit)


def test_undelivered_followups_need_a_person(app, client, auth, db, tokens):
    from confirm_service.models import FollowUpRequest, OutboundMessage
    from confirm_service.services.followup_views import resend_operations
    from confirm_service.timeutil import utc_now
    from tests.web.test_dashboard import signed_in

    review = next(c for c in post_scenario(client, auth) if c["stage"] == "review")
    with db.write() as session:
        failed = FollowUpRequest(
            intent_key="test/failed",
            candidate_id=review["id"],
            stage="review",
            status="failed",
            attempts=5,
            last_error="HTTP 503 from the partner",
        )
        session.add(failed)
        session.flush()
        session.add(
            OutboundMessage(
                message_id="m-test-1",
                kind="followup.request",
                channel="webhook",
                destination="https://partner.example/hook",
                request_id=failed.id,
                candidate_id=review["id"],
                subject="request",
                status="dead",
                attempts=5,
                last_error="connection refused",
                dead_at=utc_now(),
            )
        )
        failed_id = failed.id
    coordinator = signed_in(app, tokens["coordinator"])
    overview = coordinator.get("/dashboard").text
    group = overview[overview.index('id="att-followups"') : overview.index('id="att-inconclusive"')]
    assert f"Request {failed_id} to contacts" in group and "HTTP 503 from the partner" in group
    assert "connection refused" in group  # the dead letter too
    page = coordinator.get("/dashboard/follow-ups")
    text = page_text(page)
    assert "✗ dead letter" in text and "https://partner.example/hook" in text
    available = resend_operations()
    assert (f"Re-send request {failed_id}" in text) == ("request" in available)
    answer = coordinator.post(
        f"/dashboard/follow-ups/requests/{failed_id}/resend", data={"csrf_token": csrf_of(page)}
    )
    if "request" in available:  # drafted again, due now; the dead letter stays on record
        assert answer.status_code == 302
        with db.read() as session:
            assert session.get(FollowUpRequest, failed_id).status == "drafted"
        assert "will be sent again" in page_text(coordinator.get("/dashboard/follow-ups"))
    else:  # the delivery service is not installed: a page, not JSON
        assert answer.status_code == 404 and answer.mimetype == "text/html"
    viewer = signed_in(app, tokens["viewer"])
    assert "Re-send" not in page_text(viewer.get("/dashboard/follow-ups"))
