"""Every route in Flask's URL map carries an access rule, or is public by a written decision."""

from __future__ import annotations

from confirm_service.models import ROLES

# Public on purpose: health for load balancers and monitors, static files, the sign-in form (a
# token is what it asks for), sign-out (it only forgets the session; CSRF-checked), and the
# partners' inbox, where each message's signature authenticates it instead of a bearer token.
PUBLIC_ENDPOINTS = {"meta.healthz", "static", "dashboard.static", "dashboard.sign_in"}
PUBLIC_ENDPOINTS |= {"dashboard.sign_out", "federation.receive"}


def unguarded_routes(app) -> list[str]:
    unguarded = []
    for rule in app.url_map.iter_rules():
        view = app.view_functions[rule.endpoint]
        allowed = getattr(view, "allowed_roles", None)
        if rule.endpoint in PUBLIC_ENDPOINTS:
            assert allowed is None, f"{rule.rule} is listed as public but has roles"
            continue
        if allowed is None:
            unguarded.append(rule.rule)
            continue
        assert set(allowed) <= set(ROLES), (rule.rule, allowed)
    return unguarded


def test_every_route_has_an_access_rule_or_is_public_by_decision(app):
    assert unguarded_routes(app) == []


def test_a_route_without_a_rule_is_found(app):
    app.add_url_rule("/api/v1/forgotten", "forgotten", lambda: "open to all")
    assert unguarded_routes(app) == ["/api/v1/forgotten"]


def test_public_endpoints_exist(app):
    endpoints = {rule.endpoint for rule in app.url_map.iter_rules()}
    assert endpoints >= PUBLIC_ENDPOINTS - {"static"}
