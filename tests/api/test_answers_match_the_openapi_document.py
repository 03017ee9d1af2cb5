"""Answers have the shape the OpenAPI document promises (schemas checked by jsonschema-rs)."""

from __future__ import annotations

from tests.api.openapi_conformance import conformance_errors
from tests.factories import setup_log

FROM = "2026-11-20T00:00:00%2B00:00"


def test_visibility_with_and_without_a_site_match_the_documented_schema(client, auth):
    setup_log(client, auth)
    document = client.get("/api/v1/openapi.json", headers=auth("viewer")).get_json()
    for query in (f"site=PRA&target=Kestrel-7&from={FROM}&days=1", f"target=Kestrel-7&from={FROM}"):
        answer = client.get(f"/api/v1/visibility?{query}", headers=auth("viewer"))
        assert answer.status_code == 200, answer.get_json()
        body = answer.get_json()
        assert conformance_errors(document, "GET", "/api/v1/visibility", 200, body) == [], query
    assert {site["site"] for site in body["sites"]} == {"PRA", "TFO"}


def test_the_check_itself_refuses_a_wrong_shape(client, auth):
    """The schema check can fail: an answer missing a documented field is reported."""
    document = client.get("/api/v1/openapi.json", headers=auth("viewer")).get_json()
    wrong = {"target": "Kestrel-7", "start": "2026-11-20T00:00:00+00:00", "sites": [{"x": 1}]}
    assert conformance_errors(document, "GET", "/api/v1/visibility", 200, wrong) != []
