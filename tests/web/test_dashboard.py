"""The coordinators' dashboard through Flask's test client, on each backend.

Sign-in with an API token, sign-in required on every page, roles, CSRF, the decision screen and
its forms. What the pages show is checked against the JSON API and the database, and the HTTP
behaviour against the standards named beside each check.
"""

from __future__ import annotations

import html
import json
import re
from typing import Any

import pytest
from sqlalchemy import func, select

from confirm_service.actor import SYSTEM
from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
from confirm_service.models import AuditEntry, Comment, SignOff
from confirm_service.services.tokens import authenticate, create_token, revoke_token
from tests.services.test_candidate_flow import post_scenario

RATIONALE = "Checked each linked detection against its predicted track; consistent at both sites."


@pytest.fixture
def app(app: Any) -> Any:
    """The conftest app with the dashboard registered (until the factory registers it)."""
    from confirm_service.web import bp

    if "dashboard" not in app.blueprints:
        app.register_blueprint(bp)
    return app


# --- helpers ---------------------------------------------------------------------------------


def page_text(response: Any) -> str:
    """The visible text of an HTML response, entities decoded, white space collapsed."""
    body = response.get_data(as_text=True)
    body = re.sub(r"<(script|style)\b.*?</\1>", " ", body, flags=re.S)
    body = re.sub(r"</?(?:strong|em|span|a|code)\b[^>]*>", "", body)  # inline: no gap
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", body)).split())


def csrf_of(response: Any) -> str:
    found = re.search(r'name="csrf_token" value="([^"]+)"', response.get_data(as_text=True))
    assert found, "the page has no CSRF field"
    return found.group(1)


def sign_in(client: Any, secret: str) -> Any:
    form = client.get("/dashboard/sign-in")
    assert form.status_code == 200
    return client.post("/dashboard/sign-in", data={"token": secret, "csrf_token": csrf_of(form)})


def signed_in(app: Any, secret: str) -> Any:
    """A fresh test client (its own cookie jar) signed in with ``secret``."""
    client = app.test_client()
    response = sign_in(client, secret)
    assert response.status_code == 302, page_text(response)
    return client


def counts(db: Any) -> tuple[int, int, int]:
    """Sign-offs, comments and audit entries: what a refused form must leave unchanged."""
    with db.read() as session:
        return tuple(  # type: ignore[return-value]
            session.execute(select(func.count()).select_from(model)).scalar_one()
            for model in (SignOff, Comment, AuditEntry)
        )


def review_candidate(candidates: list[dict]) -> dict:
    return next(c for c in candidates if c["stage"] == "review")


def second_coordinator(db: Any) -> str:
    with db.write() as session:
        return create_token(session, SYSTEM, "coordinator-two", "coordinator")[1]


def post_form(client: Any, page_url: str, action: str, fields: dict[str, str]) -> Any:
    """Submit a form of the page at ``page_url`` the way a browser does, CSRF field included."""
    page = client.get(page_url)
    assert page.status_code == 200
    return client.post(action, data={**fields, "csrf_token": csrf_of(page)})


# --- sign-in ---------------------------------------------------------------------------------


def test_sign_in_with_a_token_and_sign_out(app, tokens):
    client = app.test_client()
    response = sign_in(client, tokens["viewer"])
    # RFC 9110 15.4.3: 302 Found with a Location header; here back to the candidate list
    assert response.status_code == 302
    assert response.headers["Location"] == "/dashboard"
    cookie = response.headers["Set-Cookie"]
    # RFC 6265 4.1.2.6 HttpOnly (no script access); SameSite=Lax, RFC 6265bis draft 5.4.7
    assert "HttpOnly" in cookie and "SameSite=Lax" in cookie
    assert tokens["viewer"] not in cookie  # only the token's id is kept, never the secret
    listing = client.get("/dashboard")
    assert listing.status_code == 200
    assert "Signed in as test-viewer (role viewer)" in page_text(listing)

    out = client.post("/dashboard/sign-out", data={"csrf_token": csrf_of(listing)})
    assert out.status_code == 302 and out.headers["Location"] == "/dashboard/sign-in"
    assert client.get("/dashboard").status_code == 302


def test_a_bad_or_revoked_token_is_refused(app, db, tokens):
    client = app.test_client()
    refused = sign_in(client, "cs1_not-a-real-token")
    assert refused.status_code == 422
    assert "This token is unknown or revoked" in page_text(refused)
    assert 'aria-invalid="true"' in refused.get_data(as_text=True)
    assert client.get("/dashboard").status_code == 302

    viewer = signed_in(app, tokens["viewer"])
    assert viewer.get("/dashboard").status_code == 200
    with db.write() as session:
        revoke_token(session, SYSTEM, authenticate(session, tokens["viewer"]).id)
    # a revoked token ends its open sessions at once
    assert viewer.get("/dashboard").status_code == 302
    assert sign_in(app.test_client(), tokens["viewer"]).status_code == 422


def test_a_session_ends_twelve_hours_after_sign_in(app, tokens):
    from confirm_service.web.auth import SESSION_MAX_AGE_S, SIGNED_IN_AT_KEY

    client = signed_in(app, tokens["coordinator"])
    assert client.get("/dashboard").status_code == 200
    with client.session_transaction("/dashboard") as session:
        session[SIGNED_IN_AT_KEY] -= SESSION_MAX_AGE_S + 1.0  # the session's age: 12 h + 1 s
    assert client.get("/dashboard").status_code == 302
    assert client.get("/dashboard").status_code == 302  # the stale token id was forgotten


def test_pages_need_sign_in(client, tokens):
    for path in (
        "/dashboard",
        "/dashboard/candidates/1",
        "/dashboard/candidates/1/dossier.json",
    ):
        response = client.get(path)
        assert response.status_code == 302, path
        assert response.headers["Location"].startswith("/dashboard/sign-in?next=")
    # after sign-in the person lands on the page asked for
    form = client.get("/dashboard/sign-in?next=/dashboard?state%3Dopen")
    assert 'name="next" value="/dashboard?state=open"' in form.get_data(as_text=True)
    done = client.post(
        "/dashboard/sign-in",
        data={
            "token": tokens["viewer"],
            "csrf_token": csrf_of(form),
            "next": "/dashboard?state=open",
        },
    )
    assert done.headers["Location"] == "/dashboard?state=open"


def test_sign_in_never_redirects_off_the_dashboard(app, tokens):
    # open redirects: OWASP "Unvalidated Redirects and Forwards" cheat sheet
    for target in ("https://elsewhere.example/", "//elsewhere.example/", "/api/v1/sites"):
        client = app.test_client()
        form = client.get("/dashboard/sign-in")
        response = client.post(
            "/dashboard/sign-in",
            data={"token": tokens["viewer"], "csrf_token": csrf_of(form), "next": target},
        )
        assert response.headers["Location"] == "/dashboard", target


# --- CSRF and roles --------------------------------------------------------------------------


def test_a_post_without_its_csrf_token_is_refused(app, db, tokens):
    # OWASP CSRF Prevention Cheat Sheet, synchronizer token pattern: a POST whose token is
    # missing or differs from the session's is refused before anything runs
    client = signed_in(app, tokens["coordinator"])
    before = counts(db)
    fields = {"verdict": "approve", "rationale": RATIONALE}
    missing = client.post("/dashboard/candidates/1/signoffs", data=fields)
    assert missing.status_code == 400
    assert "security token is missing" in page_text(missing)
    wrong = client.post("/dashboard/candidates/1/signoffs", data={**fields, "csrf_token": "forged"})
    assert wrong.status_code == 400
    assert "does not match" in page_text(wrong)
    other = signed_in(app, tokens["site"])  # another session's token is no good either
    stolen = csrf_of(other.get("/dashboard"))
    crossed = client.post("/dashboard/candidates/1/signoffs", data={**fields, "csrf_token": stolen})
    assert crossed.status_code == 400
    assert (
        app.test_client().post("/dashboard/sign-in", data={"token": tokens["viewer"]}).status_code
        == 400
    )
    assert counts(db) == before


def test_a_viewer_cannot_sign_off_decide_or_comment(app, client, auth, db, tokens):
    candidate = review_candidate(post_scenario(client, auth))
    viewer = signed_in(app, tokens["viewer"])
    url = f"/dashboard/candidates/{candidate['id']}"
    page = viewer.get(url)
    assert page.status_code == 200
    body = page.get_data(as_text=True)
    assert 'id="signoff"' not in body and 'id="decision"' not in body and 'id="comment"' not in body
    assert "may read this candidate but not sign off or decide" in page_text(page)
    before = counts(db)
    for action, fields in (
        ("signoffs", {"verdict": "approve", "rationale": RATIONALE}),
        ("decision", {"decision": "rejected", "rationale": RATIONALE}),
        ("comments", {"text": "A viewer's remark."}),
        ("release-hold", {"rationale": RATIONALE}),
    ):
        response = viewer.post(f"{url}/{action}", data={**fields, "csrf_token": csrf_of(page)})
        # RFC 9110 15.5.4: 403 Forbidden, shown as an HTML page
        assert response.status_code == 403, action
        assert response.mimetype == "text/html"
        assert "role 'viewer' may not do this" in page_text(response)
    assert counts(db) == before


# --- the list and the decision screen --------------------------------------------------------


def test_the_list_counts_filters_and_links_like_the_api(app, client, auth, tokens):
    candidates = post_scenario(client, auth)
    viewer = signed_in(app, tokens["viewer"])
    listing = viewer.get("/dashboard")
    body = listing.get_data(as_text=True)
    ids = sorted(int(i) for i in re.findall(r'href="/dashboard/candidates/(\d+)"', body))
    assert ids == sorted(c["id"] for c in candidates)  # every candidate the API lists, linked
    states = {s: sum(c["state"] == s for c in candidates) for s in ("open", "rejected")}
    assert states == {"open": 1, "rejected": 1}  # the scenario: 1 in review, 1 flagged and rejected
    text = page_text(listing)
    for state, number in states.items():
        assert f"{state} {number}" in text
    assert "passed protocol 0" in text and "all 2" in text
    # a read: the caution is stated on the decision screen, not on the list
    assert CANDIDATE_IS_NOT_A_DETECTION not in text and 'class="caution"' not in body

    rejected = viewer.get("/dashboard?state=rejected").get_data(as_text=True)
    shown = {int(i) for i in re.findall(r'href="/dashboard/candidates/(\d+)"', rejected)}
    assert shown == {c["id"] for c in candidates if c["state"] == "rejected"}
    review = viewer.get("/dashboard?stage=review").get_data(as_text=True)
    shown = {int(i) for i in re.findall(r'href="/dashboard/candidates/(\d+)"', review)}
    assert shown == {review_candidate(candidates)["id"]}
    target = review_candidate(candidates)["target"]
    by_target = viewer.get(f"/dashboard?target={target}").get_data(as_text=True)
    shown = {int(i) for i in re.findall(r'href="/dashboard/candidates/(\d+)"', by_target)}
    assert shown == {c["id"] for c in candidates if c["target"] == target}
    nothing = viewer.get("/dashboard?target=No-Such-Target")
    assert "No candidate matches these filters" in page_text(nothing)
    assert viewer.get("/dashboard?after=-3").status_code == 400


def test_the_decision_screen_shows_the_caution_checks_and_plots(app, client, auth, tokens):
    candidates = post_scenario(client, auth)
    viewer = signed_in(app, tokens["viewer"])
    for candidate in candidates:
        page = viewer.get(f"/dashboard/candidates/{candidate['id']}")
        assert page.status_code == 200
        text = page_text(page)
        assert CANDIDATE_IS_NOT_A_DETECTION in text, candidate["id"]
        assert candidate["protocol"]["name"] in text and candidate["protocol"]["sha256"] in text
        for check in candidate["checks"]:
            assert check["kind"] in text and check["reason"] in text
    review = review_candidate(candidates)
    page = viewer.get(f"/dashboard/candidates/{review['id']}")
    text, body = page_text(page), page.get_data(as_text=True)
    # the caution comes before any check result or form (prominent: read first)
    assert body.index('class="caution"') < body.index('id="checks"')
    drift = next(c for c in review["checks"] if c["kind"] == "doppler_consistency")
    for value in (drift["measured"], drift["expected"], drift["tolerance"]):
        assert value is None or f"{value:.6g}" in text
    assert "Hz/s" in text
    for detection in review["detections"]:
        assert f"{detection['frequency_hz']:,.3f}" in text
    for stage in ("screening", "reobservation", "independent_site", "review"):
        assert f"→ {stage}" in text
    ids = re.findall(r'\sid="([^"]+)"', body)
    assert len(ids) == len(set(ids))  # HTML Living Standard 3.2.6.1: id unique in the document
    for target in re.findall(r'href="#([^"]+)"', body):
        assert target in ids, target  # every in-page link lands somewhere
    # three pictures, each an SVG image with a text alternative; the hit table names both sites
    images = re.findall(r'<img src="([^"]+\.svg)"[^>]*alt="([^"]+)"', body)
    assert [url.rsplit("/", 1)[-1] for url, _ in images] == [
        "frequency.svg",
        "drift.svg",
        "elevation.svg",
    ]
    assert all(len(alt) > 40 for _, alt in images)
    table = body[body.index("Text alternative of both pictures") :]
    assert "<td>PRA</td>" in table and "<td>TFO</td>" in table
    assert "needs approvals from 2 distinct person(s) with role coordinator: 0 so far" in text
    assert viewer.get("/dashboard/candidates/999999").status_code == 404


def test_two_coordinators_sign_off_through_the_forms_and_confirm(app, client, auth, db, tokens):
    review = review_candidate(post_scenario(client, auth))
    url = f"/dashboard/candidates/{review['id']}"
    first = signed_in(app, tokens["coordinator"])
    response = post_form(
        first, url, f"{url}/signoffs", {"verdict": "approve", "rationale": RATIONALE}
    )
    assert response.status_code == 302
    assert response.headers["Location"] == f"{url}#signoffs"
    page = first.get(url)
    text = page_text(page)
    assert "Your approval of stage 'review' was recorded as test-coordinator." in text
    assert f"test-coordinator coordinator approves {RATIONALE}" in text
    assert "1 so far (test-coordinator)" in text
    assert "a person signs a stage once" in text  # the form is not offered again

    again = first.post(
        f"{url}/signoffs",
        data={"verdict": "approve", "rationale": RATIONALE, "csrf_token": csrf_of(page)},
    )
    assert again.status_code == 409  # the service refuses a second sign-off by the same person
    assert "has already signed this stage" in page_text(again)

    second = signed_in(app, second_coordinator(db))
    response = post_form(
        second, url, f"{url}/signoffs", {"verdict": "approve", "rationale": RATIONALE}
    )
    assert response.status_code == 302
    final = page_text(second.get(url))
    assert "Candidate " + str(review["id"]) + " passed protocol" in final
    assert CANDIDATE_IS_NOT_A_DETECTION in final
    assert "no further sign-off or decision can be recorded" in final
    api = client.get(f"/api/v1/candidates/{review['id']}", headers=auth("viewer")).get_json()
    assert api["state"] == "passed_protocol"
    assert [s["person"] for s in api["signoffs"]] == ["test-coordinator", "coordinator-two"]
    assert all(s["rationale"] == RATIONALE and s["approve"] for s in api["signoffs"])


def test_a_missing_rationale_shows_the_field_error_and_writes_nothing(
    app, client, auth, db, tokens
):
    review = review_candidate(post_scenario(client, auth))
    url = f"/dashboard/candidates/{review['id']}"
    coordinator = signed_in(app, tokens["coordinator"])
    before = counts(db)
    response = post_form(
        coordinator, url, f"{url}/signoffs", {"verdict": "approve", "rationale": "  "}
    )
    assert response.status_code == 422
    text, body = page_text(response), response.get_data(as_text=True)
    assert "Sign-off not recorded" in text
    assert "rationale is required" in text
    assert "nothing was written" in text
    assert re.search(r'id="signoff-rationale"[^>]*aria-invalid="true"', body, re.S)
    assert 'href="#signoff-rationale"' in body  # the summary links to the field
    ids = re.findall(r'\sid="([^"]+)"', body)
    assert len(ids) == len(set(ids))  # HTML Living Standard 3.2.6.1: id unique in the document
    assert all(target in ids for target in re.findall(r'href="#([^"]+)"', body))
    no_verdict = post_form(coordinator, url, f"{url}/signoffs", {"rationale": RATIONALE})
    assert no_verdict.status_code == 422
    assert "verdict choose approve or object" in page_text(no_verdict)
    assert RATIONALE in no_verdict.get_data(as_text=True)  # what was typed is kept
    too_long = post_form(
        coordinator, url, f"{url}/comments", {"text": "x" * 10_001}
    )  # CommentIn allows at most 10,000 characters
    assert too_long.status_code == 422
    assert "text must be at most 10,000 characters" in page_text(too_long)
    assert counts(db) == before


def test_a_refused_service_call_is_shown_with_its_field(app, client, auth, db, tokens):
    review = review_candidate(post_scenario(client, auth))
    url = f"/dashboard/candidates/{review['id']}"
    coordinator = signed_in(app, tokens["coordinator"])
    page = coordinator.get(url)
    assert 'id="hold"' not in page.get_data(as_text=True)  # only offered when held
    before = counts(db)
    response = coordinator.post(
        f"{url}/release-hold", data={"rationale": RATIONALE, "csrf_token": csrf_of(page)}
    )
    assert response.status_code == 409
    text = page_text(response)
    assert "Release of the hold not recorded" in text
    assert "held: the candidate is not held" in text and "nothing was written" in text
    assert counts(db) == before

    # an objection by a coordinator holds the candidate (protocol rule); the form then offers
    # the release, and the release goes through the service
    objected = post_form(
        coordinator, url, f"{url}/signoffs", {"verdict": "object", "rationale": "Recheck TFO."}
    )
    assert objected.status_code == 302
    held = coordinator.get(url)
    assert 'id="hold"' in held.get_data(as_text=True)
    assert "Your objection of stage 'review' was recorded" in page_text(held)
    api = client.get(f"/api/v1/candidates/{review['id']}", headers=auth("viewer")).get_json()
    assert api["held"] is True and api["hold_reason"] in page_text(held)
    released = post_form(
        coordinator, url, f"{url}/release-hold", {"rationale": "TFO log rechecked: clean."}
    )
    assert released.status_code == 302
    assert "The hold was released" in page_text(coordinator.get(url))
    api = client.get(f"/api/v1/candidates/{review['id']}", headers=auth("viewer")).get_json()
    assert api["held"] is False and api["state"] == "open"

    missing = coordinator.post(
        "/dashboard/candidates/999999/comments", data={"text": "x", "csrf_token": csrf_of(page)}
    )
    assert missing.status_code == 404 and "no candidate 999999" in page_text(missing)


def test_comment_and_decision_forms(app, client, auth, db, tokens):
    candidates = post_scenario(client, auth)
    review = review_candidate(candidates)
    url = f"/dashboard/candidates/{review['id']}"
    site = signed_in(app, tokens["site"])
    response = post_form(site, url, f"{url}/comments", {"text": "Receiver log clean that night."})
    assert response.status_code == 302
    text = page_text(site.get(url))
    assert "test-site (site)" in text and "Receiver log clean that night." in text
    site_page = site.get(url).get_data(as_text=True)
    assert 'id="decision"' not in site_page and 'id="signoff"' in site_page

    coordinator = signed_in(app, tokens["coordinator"])
    empty = post_form(coordinator, url, f"{url}/decision", {"decision": "", "rationale": ""})
    assert empty.status_code == 422
    assert "decision is required" in page_text(empty) and "rationale is required" in page_text(
        empty
    )
    done = post_form(
        coordinator,
        url,
        f"{url}/decision",
        {"decision": "withdrawn", "rationale": "Withdrawn: the partner site asked for a re-run."},
    )
    assert done.status_code == 302
    text = page_text(coordinator.get(url))
    assert "The candidate is now withdrawn." in text
    assert "open → withdrawn Withdrawn: the partner site asked for a re-run." in text
    api = client.get(f"/api/v1/candidates/{review['id']}", headers=auth("viewer")).get_json()
    assert api["state"] == "withdrawn" and api["comments"][0]["author"] == "test-site"


def test_the_dossier_downloads_for_the_signed_in_person(app, client, auth, tokens):
    review = review_candidate(post_scenario(client, auth))
    viewer = signed_in(app, tokens["viewer"])
    response = viewer.get(f"/dashboard/candidates/{review['id']}/dossier.json")
    assert response.status_code == 200
    assert response.mimetype == "application/json"
    # RFC 6266 4.1: attachment with a file name
    expected = f'attachment; filename="candidate-{review["id"]}-dossier.json"'
    assert response.headers["Content-Disposition"] == expected
    document = json.loads(response.get_data(as_text=True))
    api = client.get(
        f"/api/v1/candidates/{review['id']}/dossier", headers=auth("viewer")
    ).get_json()
    assert document["format"] == api["format"] and document["caution"] == api["caution"]
    assert document["candidate"]["id"] == review["id"]
    assert document["candidate"]["checks"] == api["candidate"]["checks"]


def test_pages_carry_security_headers_and_no_external_assets(app, tokens):
    viewer = signed_in(app, tokens["viewer"])
    response = viewer.get("/dashboard")
    # CSP Level 3 (W3C): nothing but this origin's stylesheet; no scripts at all
    policy = response.headers["Content-Security-Policy"]
    assert "default-src 'none'" in policy and "script-src" not in policy
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    assert response.headers["Cache-Control"] == "no-store"
    body = response.get_data(as_text=True)
    assert "<script" not in body
    assert not re.search(r'(?:src|href)="(?:https?:)?//', body)
    css = viewer.get("/dashboard/static/dashboard.css")
    assert css.status_code == 200 and css.mimetype == "text/css"
    assert "@media print" in css.get_data(as_text=True)
    assert "url(" not in css.get_data(as_text=True)  # no fonts or images fetched from anywhere
    css.close()


def test_the_session_key_is_kept_in_the_instance_folder(app):
    from confirm_service.web.auth import SECRET_KEY_FILE

    settings = app.extensions["confirm.settings"]
    if getattr(settings, "secret_key", ""):
        pytest.skip("a secret key is configured; none is generated")
    stored = (settings.instance_path / SECRET_KEY_FILE).read_text(encoding="ascii").strip()
    assert app.secret_key == stored and len(stored) >= 32
    assert (settings.instance_path / SECRET_KEY_FILE).stat().st_mode & 0o077 == 0  # owner only
