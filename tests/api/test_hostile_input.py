"""Hostile and out-of-range input: always a 4xx problem+json naming the field, nothing written."""

from __future__ import annotations

import json

import pytest

from tests.factories import observation, setup_log

PROBLEM = "application/problem+json"
# One past the largest BIGINT (PostgreSQL manual, "Numeric Types"), and one past INTEGER.
BEYOND_INT64 = str(2**63)
BEYOND_INT32 = str(2**31)


def refused(response, status: int, field: str | None = None) -> dict:
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == PROBLEM
    body = response.get_json()
    if field is not None:
        assert field in [error["field"] for error in body["errors"]], body
    return body


@pytest.fixture
def logged(client, auth):
    setup_log(client, auth)
    return client


@pytest.mark.parametrize(
    "path",
    [
        f"/api/v1/observations/{BEYOND_INT64}",
        f"/api/v1/observations/{BEYOND_INT64}/detections",
        f"/api/v1/candidates/{BEYOND_INT64}",
        f"/api/v1/audit/entries/{BEYOND_INT64}",
        f"/api/v1/observations?after={BEYOND_INT64}",
        f"/api/v1/sites?after={BEYOND_INT64}",
        f"/api/v1/audit/entries/1?tree_size={BEYOND_INT64}",
        f"/api/v1/audit/consistency?old=1&new={BEYOND_INT64}",
    ],
)
def test_integers_beyond_64_bits_are_not_found_or_refused(client, auth, path):
    response = client.get(path, headers=auth("viewer"))
    assert response.status_code in (404, 422)
    assert response.mimetype == PROBLEM


@pytest.mark.parametrize("number", [BEYOND_INT32, str(2**31 - 1), str(2**63 - 1)])
def test_an_id_beyond_the_id_columns_is_simply_absent(client, auth, number):
    refused(client.get(f"/api/v1/observations/{number}", headers=auth("viewer")), 404)
    refused(client.get(f"/api/v1/audit/entries/{number}", headers=auth("viewer")), 404)
    response = client.get(f"/api/v1/observations?after={number}", headers=auth("viewer"))
    assert response.status_code in (200, 422)


def test_nul_in_a_body_string_is_refused_and_nothing_is_written(logged, auth):
    target = {"name": "Wren\x00-2", "ra_deg": 10.0, "dec_deg": 5.0}
    refused(logged.post("/api/v1/targets", json=target, headers=auth("coordinator")), 422, "name")
    site = {"name": "Ridge\x00"}
    refused(logged.patch("/api/v1/sites/PRA", json=site, headers=auth("coordinator")), 422, "name")
    scan = observation(cadence="c\x00", detections=[])
    refused(logged.post("/api/v1/observations", json=scan, headers=auth("pipeline")), 422)
    names = [t["name"] for t in logged.get("/api/v1/targets", headers=auth("viewer")).json["items"]]
    assert names == ["Kestrel-7"]
    assert logged.get("/api/v1/observations", headers=auth("viewer")).json["items"] == []


def test_nul_in_a_detection_row_is_refused(logged, auth):
    scan = logged.post("/api/v1/observations", json=observation(), headers=auth("pipeline"))
    rows = [{"frequency_hz": 1.42e9, "drift_hz_s": 0.1, "snr": 9.0, "beam": "b\x00"}]
    url = f"/api/v1/observations/{scan.json['id']}/detections"
    body = refused(logged.post(url, json={"detections": rows}, headers=auth("pipeline")), 422)
    assert body["errors"][0]["field"] == "detections[0].beam"
    inline = observation(detections=rows)
    refused(logged.post("/api/v1/observations", json=inline, headers=auth("pipeline")), 422)


def test_nul_in_a_query_or_path_never_reaches_the_database(logged, auth):
    query = logged.get("/api/v1/observations?site=PR%00A", headers=auth("viewer"))
    refused(query, 422, "site")
    refused(logged.get("/api/v1/sites/PR%00A", headers=auth("viewer")), 404)
    refused(logged.get("/api/v1/visibility?target=K%00&from=x", headers=auth("viewer")), 422)


@pytest.mark.parametrize(
    ("path", "field"),
    [
        ("/api/v1/sites/PRA", "name"),
        ("/api/v1/sites/PRA", "latitude_deg"),
        ("/api/v1/sites/PRA", "elevation_m"),
        ("/api/v1/targets/Kestrel-7", "ra_deg"),
        ("/api/v1/targets/Kestrel-7", "dec_deg"),
    ],
)
def test_null_for_a_column_that_cannot_be_empty_is_refused(logged, auth, path, field):
    refused(logged.patch(path, json={field: None}, headers=auth("coordinator")), 422, field)


def test_null_still_clears_an_optional_column(logged, auth):
    response = logged.patch(
        "/api/v1/targets/Kestrel-7", json={"parallax_mas": None}, headers=auth("coordinator")
    )
    assert response.status_code == 200
    assert response.json["parallax_mas"] is None
    response = logged.patch("/api/v1/sites/PRA", json={"email": None}, headers=auth("coordinator"))
    assert response.status_code == 200


# Physical limits (schemas/bounds.py): each value is far outside what an instrument produces.
@pytest.mark.parametrize(
    ("override", "field"),
    [
        ({"duration_s": 1e308}, "duration_s"),
        ({"duration_s": 3e9}, "duration_s"),  # about 95 years
        ({"duration_s": 1e-300}, "duration_s"),
        ({"start": "0001-01-01T00:00:00+00:00"}, "start"),
        ({"start": "9999-12-31T23:59:59+00:00"}, "start"),
        ({"channel_width_hz": 1e308}, "channel_width_hz"),
        ({"time_resolution_s": 1e300}, "time_resolution_s"),
        ({"frequency_min_hz": 1.0}, "frequency_min_hz"),  # 1 Hz: below any radio receiver
        ({"frequency_max_hz": 1e300}, "frequency_max_hz"),
        (
            {"detections": [{"frequency_hz": 1.42e9, "drift_hz_s": 0.0, "snr": 1e308}]},
            "detections[0].snr",
        ),
        (
            {"detections": [{"frequency_hz": 1.42e9, "drift_hz_s": 1e9, "snr": 10.0}]},
            "detections[0].drift_hz_s",
        ),
    ],
)
def test_physically_impossible_values_are_refused(logged, auth, override, field):
    body = observation(**override)
    refused(logged.post("/api/v1/observations", json=body, headers=auth("pipeline")), 422, field)
    assert logged.get("/api/v1/observations", headers=auth("viewer")).json["items"] == []


def test_the_limits_are_published_in_the_openapi_document(client, auth):
    document = client.get("/api/v1/openapi.json", headers=auth("viewer")).json
    schemas = document["components"]["schemas"]
    scan = schemas["ObservationIn"]["properties"]
    assert (scan["duration_s"]["minimum"], scan["duration_s"]["maximum"]) == (1e-3, 172_800.0)
    assert scan["channel_width_hz"]["maximum"] == 1e9
    assert "1950" in scan["start"]["description"]
    hit = schemas["DetectionIn"]["properties"]
    assert hit["snr"]["maximum"] == 1e6
    assert (hit["drift_hz_s"]["minimum"], hit["drift_hz_s"]["maximum"]) == (-1e4, 1e4)
    report = schemas["ReportIn"]["properties"]["frequency_min_hz"]["anyOf"]  # number or null
    assert report[0]["maximum"] == scan["frequency_min_hz"]["maximum"]


def test_json_in_another_charset_is_refused(logged, auth):
    body = json.dumps({"name": "Wren-2", "ra_deg": 10.0, "dec_deg": 5.0})
    for charset in ("latin-1", "utf-16"):
        headers = auth("coordinator", **{"Content-Type": f"application/json; charset={charset}"})
        refused(logged.post("/api/v1/targets", data=body, headers=headers), 415, "body")
    headers = auth("coordinator", **{"Content-Type": "application/json; charset=UTF-8"})
    assert logged.post("/api/v1/targets", data=body, headers=headers).status_code == 201


@pytest.mark.parametrize(
    "text",
    [
        '{"name": "Wren-2", "name": "Wren-3", "ra_deg": 10.0, "dec_deg": 5.0}',
        '{"name":"Wren-2","ra_deg":10.0,"ra_deg":11.0,"dec_deg":5.0}',
        '{"name": "Wren-2", "ra_deg": 10.0, "dec_deg": 5.0, "dec\\u005fdeg": 6.0}',
    ],
)
def test_a_key_given_twice_is_refused(logged, auth, text):
    headers = auth("coordinator", **{"Content-Type": "application/json"})
    refused(logged.post("/api/v1/targets", data=text, headers=headers), 422, "body")


def test_a_key_given_twice_in_one_detection_row_is_refused(logged, auth):
    scan = logged.post("/api/v1/observations", json=observation(), headers=auth("pipeline"))
    url = f"/api/v1/observations/{scan.json['id']}/detections"
    headers = auth("pipeline", **{"Content-Type": "application/json"})
    good = '{"frequency_hz": 1.42e9, "drift_hz_s": 0.1, "snr": 9.0}'
    twice = '{"frequency_hz": 1.42e9, "drift_hz_s": 0.1, "snr": 9.0, "snr": 90.0}'
    text = '{"detections": [' + ", ".join([good] * 3 + [twice]) + "]}"
    refused(logged.post(url, data=text, headers=headers), 422, "body")
    text = '{"detections": [' + ", ".join([good] * 4) + "]}"
    assert logged.post(url, data=text, headers=headers).status_code == 201


@pytest.mark.parametrize("depth", [250, 100_000])
def test_deeply_nested_json_is_refused(client, auth, depth):
    text = '{"name": ' + "[" * depth + "]" * depth + ', "ra_deg": 1.0, "dec_deg": 2.0}'
    headers = auth("coordinator", **{"Content-Type": "application/json"})
    refused(client.post("/api/v1/targets", data=text, headers=headers), 422, "body")
