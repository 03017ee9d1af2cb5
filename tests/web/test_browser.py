"""The dashboard in a real headless browser: Debian's Chromium driven by Playwright.

The app is served for real on a free localhost port; a coordinator signs in with an API token
(as a script would), opens the candidate in review and signs it off; a second coordinator's
sign-off confirms it. Fixtures (server, browser) are in tests/web/conftest.py.
"""

from __future__ import annotations

from typing import Any
from urllib.parse import urlsplit

from confirm_service.actor import SYSTEM
from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
from confirm_service.services.tokens import create_token
from tests.services.test_candidate_flow import post_scenario
from tests.web.conftest import CHROMIUM, CHROMIUM_ARGS

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (W3C, 3rd ed.), 5.2 PNG signature
MIN_SCREENSHOT_BYTES = 20_000  # a full decision page; a blank page is a few kB (from memory)
RATIONALE = "Reviewed the cadence, the drift check and the partner detection; all consistent."


def _sign_in(page: Any, base: str, secret: str) -> None:
    page.goto(f"{base}/dashboard")
    assert urlsplit(page.url).path == "/dashboard/sign-in"  # sent to sign in first
    page.get_by_label("API token").fill(secret)
    page.get_by_role("button", name="Sign in").click()
    assert urlsplit(page.url).path == "/dashboard"


def _sign_off(page: Any) -> None:
    form = page.locator("form#signoff")
    form.get_by_label("Approve").check()
    form.get_by_label("Rationale").fill(RATIONALE)
    form.get_by_role("button", name="Record my sign-off").click()


def test_two_coordinators_confirm_a_candidate_in_a_real_browser(
    sync_playwright, served, client, auth, db, tokens, artefacts
):
    review = next(c for c in post_scenario(client, auth) if c["stage"] == "review")
    with db.write() as session:
        _, second_secret = create_token(session, SYSTEM, "coordinator-two", "coordinator")
    origin = urlsplit(served).netloc
    foreign: list[str] = []

    def only_this_server(route: Any) -> None:
        url = route.request.url
        if urlsplit(url).netloc == origin:
            route.continue_()
        else:  # no external assets: anything else is recorded and refused
            foreign.append(url)
            route.abort()

    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
        try:
            first = browser.new_context(viewport={"width": 1280, "height": 900})
            first.set_default_timeout(
                60_000
            )  # page renders compute predictions; CI machines are shared
            first.route("**/*", only_this_server)
            page = first.new_page()
            _sign_in(page, served, tokens["coordinator"])
            page.get_by_role("link", name=f"Candidate {review['id']}", exact=True).click()
            assert urlsplit(page.url).path == f"/dashboard/candidates/{review['id']}"
            caution = page.locator("section.caution").first
            assert caution.is_visible()
            assert CANDIDATE_IS_NOT_A_DETECTION in " ".join(caution.inner_text().split())

            _sign_off(page)
            assert urlsplit(page.url).fragment == "signoffs"
            status = page.get_by_role("status")
            assert "Your approval of stage 'review' was recorded" in status.inner_text()
            row = page.locator("#signoffs tbody tr").filter(has_text="test-coordinator")
            assert row.count() == 1 and RATIONALE in row.inner_text()

            # printed, the page keeps the caution and drops the forms
            page.emulate_media(media="print")
            assert page.locator("form#comment").is_hidden()
            assert caution.is_visible()
            page.emulate_media(media="screen")

            shot = artefacts / "decision-screen.png"
            page.screenshot(path=str(shot), full_page=True)
            data = shot.read_bytes()
            assert data[:8] == PNG_SIGNATURE
            assert len(data) > MIN_SCREENSHOT_BYTES, len(data)
            first.close()

            second = browser.new_context()  # another person: separate cookies
            second.set_default_timeout(
                60_000
            )  # page renders compute predictions; CI machines are shared
            second.route("**/*", only_this_server)
            page = second.new_page()
            _sign_in(page, served, second_secret)
            page.goto(f"{served}/dashboard/candidates/{review['id']}")
            _sign_off(page)
            heading = page.get_by_role("heading", level=1)
            assert (
                " ".join(heading.inner_text().split())
                == f"Candidate {review['id']} passed protocol"
            )
            assert page.locator("form#signoff").count() == 0
            second.close()
        finally:
            browser.close()
    assert foreign == []
    final = client.get(f"/api/v1/candidates/{review['id']}", headers=auth("viewer")).get_json()
    assert final["state"] == "passed_protocol"
