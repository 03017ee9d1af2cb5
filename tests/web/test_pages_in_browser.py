"""A coordinator's whole job in a real browser (Debian's Chromium via Playwright), on the demo
scenario served for real: people sign in with a name and password, the attention list is on the
first screen at desk and phone sizes, the sky-fixed candidate's pictures render, two sign-offs
move it on, a viewer gets no sign-off form, and a mistyped address answers with a page.
"""

from __future__ import annotations

import html
from typing import Any
from urllib.parse import urlsplit

from confirm_service.actor import SYSTEM
from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
from confirm_service.services.people import create_person
from tests.services.test_candidate_flow import post_scenario
from tests.web.conftest import CHROMIUM, CHROMIUM_ARGS

DESK = {"width": 1280, "height": 800}
PHONE = {"width": 390, "height": 844}
PASSWORD = "a long enough pass phrase"
RATIONALE = "Cadence, drift against Earth's, re-observation and the partner site all agree."
PLOT_LABELS = {
    # axis labels every picture must carry, with units (common practice, no source)
    "frequency": ("Time (UTC)", "Modified Julian Date (UTC)", "Frequency − ", "(Hz)"),
    "drift": ("Earth's drift at the site and time (Hz/s)", "Observed drift (Hz/s)"),
    "elevation": ("Elevation (deg)", "Time (UTC)", "Modified Julian Date (UTC)"),
}
SVG_NAMESPACE = 'xmlns="http://www.w3.org/2000/svg"'  # SVG 1.1, 1.3: the SVG namespace


def _people(db: Any) -> None:
    with db.write() as session:
        for name, role in (("ada.quill", "coordinator"), ("ben.orr", "coordinator")):
            create_person(session, SYSTEM, name, name.title(), role, PASSWORD)
        create_person(session, SYSTEM, "cy.reader", "Cy Reader", "viewer", PASSWORD)


def _sign_in(page: Any, base: str, username: str) -> None:
    page.goto(f"{base}/dashboard")
    assert urlsplit(page.url).path == "/dashboard/sign-in"
    page.get_by_label("User name").fill(username)
    page.get_by_label("Password").fill(PASSWORD)
    page.get_by_role("button", name="Sign in").click()
    assert urlsplit(page.url).path == "/dashboard"


def _above_the_fold(page: Any, locator: Any, viewport: dict[str, int]) -> bool:
    box = locator.bounding_box()
    return box is not None and box["y"] >= 0 and box["y"] + box["height"] <= viewport["height"]


def _context(browser: Any, viewport: dict[str, int], origin: str, foreign: list[str]) -> Any:
    context = browser.new_context(viewport=viewport)
    context.set_default_timeout(60_000)  # the first picture loads the physics and plotting code

    def only_this_server(route: Any) -> None:
        if urlsplit(route.request.url).netloc == origin:
            route.continue_()
        else:  # no external assets: anything else is recorded and refused
            foreign.append(route.request.url)
            route.abort()

    context.route("**/*", only_this_server)
    return context


def test_a_coordinators_day_in_a_real_browser(sync_playwright, served, client, auth, db, artefacts):
    review = next(c for c in post_scenario(client, auth) if c["stage"] == "review")
    _people(db)
    origin = urlsplit(served).netloc
    foreign: list[str] = []
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
        try:
            # the attention list, with this candidate awaiting the coordinator, on the first screen
            for name, viewport in (("desk", DESK), ("phone", PHONE)):
                context = _context(browser, viewport, origin, foreign)
                page = context.new_page()
                _sign_in(page, served, "ada.quill")
                waiting = page.locator("section[aria-labelledby=att-signoff]").get_by_role(
                    "link", name=f"Candidate {review['id']}:"
                )
                assert waiting.count() == 1
                assert _above_the_fold(page, page.locator("#attention-title"), viewport), name
                assert _above_the_fold(page, waiting, viewport), name
                page.keyboard.press("Tab")  # the keyboard reaches the skip link first
                focused = page.evaluate("document.activeElement.textContent")
                assert focused == "Skip to the content"
                page.screenshot(path=str(artefacts / f"attention-{name}.png"))
                context.close()

            context = _context(browser, DESK, origin, foreign)
            page = context.new_page()
            _sign_in(page, served, "ada.quill")
            page.locator("section[aria-labelledby=att-signoff]").get_by_role(
                "link", name=f"Candidate {review['id']}:"
            ).click()
            assert urlsplit(page.url).path == f"/dashboard/candidates/{review['id']}"
            caution = page.locator("section.caution")
            assert caution.count() == 1  # stated once on the decision screen
            assert CANDIDATE_IS_NOT_A_DETECTION in " ".join(caution.inner_text().split())

            for plot, labels in PLOT_LABELS.items():
                image = page.locator(f"#plot-{plot} img")
                image.scroll_into_view_if_needed()
                page.wait_for_function(
                    "img => img.complete && img.naturalWidth > 0", arg=image.element_handle()
                )
                assert len(image.get_attribute("alt") or "") > 40  # a text alternative
                answer = page.request.get(served + image.get_attribute("src"))
                assert answer.status == 200
                assert answer.headers["content-type"].startswith("image/svg+xml")
                svg = answer.text()
                assert SVG_NAMESPACE in svg and "<path" in svg, plot
                for label in labels:
                    assert label in svg, (plot, label)
            page.screenshot(path=str(artefacts / "candidate-desk.png"), full_page=True)

            form = page.locator("form#signoff")
            form.get_by_label("Approve").check()
            form.get_by_label("Rationale").fill(RATIONALE)
            form.get_by_role("button", name="Record my sign-off").click()
            assert (
                "Your approval of stage 'review' was recorded"
                in page.get_by_role("status").inner_text()
            )
            assert "1 so far (ada.quill)" in page.locator("#signoffs").inner_text()
            context.close()

            context = _context(browser, PHONE, origin, foreign)
            page = context.new_page()
            _sign_in(page, served, "ben.orr")
            page.goto(f"{served}/dashboard/candidates/{review['id']}")
            form = page.locator("form#signoff")
            form.get_by_label("Approve").check()
            form.get_by_label("Rationale").fill(RATIONALE)
            form.get_by_role("button", name="Record my sign-off").click()
            heading = " ".join(page.get_by_role("heading", level=1).inner_text().split())
            assert heading == f"Candidate {review['id']} passed protocol"
            history = page.locator("#history tbody tr").last.inner_text()
            assert "open → passed protocol" in history  # the stage's end is in the history
            page.screenshot(path=str(artefacts / "passed-protocol-phone.png"), full_page=True)
            context.close()

            # a viewer reads the candidate but is refused the sign-off form and the action
            context = _context(browser, DESK, origin, foreign)
            page = context.new_page()
            _sign_in(page, served, "cy.reader")
            other = next(c for c in post_scenario_ids(client, auth) if c != review["id"])
            page.goto(f"{served}/dashboard/candidates/{other}")
            assert page.locator("form#signoff").count() == 0
            token = page.locator('input[name="csrf_token"]').first.get_attribute("value")
            refused = page.request.post(
                f"{served}/dashboard/candidates/{other}/signoffs",
                form={"verdict": "approve", "rationale": RATIONALE, "csrf_token": token},
            )
            assert refused.status == 403  # RFC 9110 15.5.4
            assert refused.headers["content-type"].startswith("text/html")
            assert "role 'viewer' may not do this" in html.unescape(refused.text())

            # a mistyped address is a page with a way on, never the API's JSON
            answer = page.goto(f"{served}/dashboard/login")
            assert answer is not None and answer.status == 404
            assert answer.headers["content-type"].startswith("text/html")
            assert "404" in page.get_by_role("heading", level=1).inner_text()
            page.get_by_role("link", name="Sites").first.click()
            assert urlsplit(page.url).path == "/dashboard/sites"
            context.close()
        finally:
            browser.close()
    assert foreign == []


def post_scenario_ids(client: Any, auth: Any) -> list[int]:
    listing = client.get("/api/v1/candidates?limit=100", headers=auth("viewer")).get_json()
    return [c["id"] for c in listing["items"]]
