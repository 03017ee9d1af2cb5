"""Predictions and visibility over HTTP and on the command line, through the same services.

The physics itself is tested against skyfield in tests/physics; here the checks are that the
edges pass the inputs through faithfully (API and CLI agree with a direct call of the physics
service) and refuse bad input with field names.
"""

from __future__ import annotations

import json
from datetime import datetime

from click.testing import CliRunner

from confirm_service.cli import main
from confirm_service.cli.context import settings
from confirm_service.services.predictions import compute_prediction
from tests.factories import SITE_NORTH, SITE_SOUTH, TARGET, setup_log

TIME = "2026-11-20T10:00:00+00:00"
HYDROGEN_HZ = 1_420_405_751.768  # the 21 cm line (published value)


def direct():
    return compute_prediction(
        SITE_NORTH["latitude_deg"],
        SITE_NORTH["longitude_deg"],
        SITE_NORTH["elevation_m"],
        TARGET["ra_deg"],
        TARGET["dec_deg"],
        datetime.fromisoformat(TIME),
        HYDROGEN_HZ,
        -0.02,
        0.001,
        (SITE_SOUTH["latitude_deg"], SITE_SOUTH["longitude_deg"], SITE_SOUTH["elevation_m"]),
        datetime.fromisoformat("2026-11-21T10:00:00+00:00"),
    )


def test_prediction_by_codes_equals_the_physics_service(client, auth):
    setup_log(client, auth)
    response = client.get(
        "/api/v1/predictions?site=PRA&target=Kestrel-7&time=2026-11-20T10:00:00%2B00:00"
        f"&observed_frequency_hz={HYDROGEN_HZ}&observed_drift_hz_s=-0.02"
        "&drift_uncertainty_hz_s=0.001&to_site=TFO&to_time=2026-11-21T10:00:00%2B00:00",
        headers=auth("viewer"),
    )
    assert response.status_code == 200, response.get_json()
    body = response.get_json()
    expected = direct()
    for key in (
        "radial_velocity_m_s",
        "earth_drift_hz_s",
        "barycentric_frequency_hz",
        "residual_drift_hz_s",
        "predicted_frequency_hz",
        "predicted_drift_hz_s",
        "predicted_frequency_uncertainty_hz",
        "predicted_drift_uncertainty_hz_s",
    ):
        assert body[key] == getattr(expected, key), key
    # one day of gap at 0.001 Hz/s of drift uncertainty: about 86.4 Hz (gap x sigma); the
    # barycentric gap differs from 86,400 s by light-travel time across the Earth (< 0.05 s)
    # and the Doppler factor (|v|/c ~ 6e-5, i.e. < 6 s)
    assert abs(body["predicted_frequency_uncertainty_hz"] - 86.4) < 0.01


def test_prediction_refusals_name_the_field(client, auth):
    setup_log(client, auth)
    naive = client.get(
        f"/api/v1/predictions?site=PRA&target=Kestrel-7&time=2026-11-20T10:00:00"
        f"&observed_frequency_hz={HYDROGEN_HZ}",
        headers=auth("viewer"),
    )
    assert naive.status_code == 422
    assert [e["field"] for e in naive.get_json()["errors"]] == ["time"]
    zero = client.get(
        "/api/v1/predictions?site=PRA&target=Kestrel-7&time=2026-11-20T10:00:00%2B00:00"
        "&observed_frequency_hz=0",
        headers=auth("viewer"),
    )
    assert [e["field"] for e in zero.get_json()["errors"]] == ["observed_frequency_hz"]
    far = client.get(
        "/api/v1/predictions?site_lat=10&site_lon=0&ra=10&dec=10"
        "&time=2150-01-01T00:00:00%2B00:00&observed_frequency_hz=1e9",
        headers=auth("viewer"),
    )
    assert far.status_code == 422
    assert [e["field"] for e in far.get_json()["errors"]] == ["time"]
    unknown = client.get(
        "/api/v1/predictions?site=NOPE&target=Kestrel-7&time=2026-11-20T10:00:00%2B00:00"
        "&observed_frequency_hz=1e9",
        headers=auth("viewer"),
    )
    assert unknown.status_code == 404


def test_visibility_at_one_site_and_everywhere(client, auth):
    setup_log(client, auth)
    one = client.get(
        "/api/v1/visibility?site=PRA&target=Kestrel-7&from=2026-11-20T00:00:00%2B00:00&days=2",
        headers=auth("viewer"),
    )
    assert one.status_code == 200, one.get_json()
    windows = one.get_json()["windows"]
    assert len(windows) >= 2
    # PRA's own limits apply: no window may peak below its 15 degree minimum elevation
    assert all(w["max_elevation_deg"] > SITE_NORTH["min_elevation_deg"] for w in windows)
    everywhere = client.get(
        "/api/v1/visibility?target=Kestrel-7&from=2026-11-20T00:00:00%2B00:00&count=2",
        headers=auth("viewer"),
    ).get_json()
    assert {s["site"] for s in everywhere["sites"]} == {"PRA", "TFO"}
    assert all(len(s["windows"]) == 2 for s in everywhere["sites"])


def test_cli_predict_json_matches_the_api(database_url, client, auth):
    setup_log(client, auth)
    settings.cache_clear()
    result = CliRunner().invoke(
        main,
        [
            "predict",
            "--site",
            "PRA",
            "--target",
            "Kestrel-7",
            "--time",
            TIME,
            "--observed-frequency-hz",
            str(HYDROGEN_HZ),
            "--observed-drift-hz-s",
            "-0.02",
            "--drift-uncertainty-hz-s",
            "0.001",
            "--to-site",
            "TFO",
            "--to-time",
            "2026-11-21T10:00:00+00:00",
            "--json",
        ],
        env={"CONFIRM_DATABASE_URL": database_url},
    )
    settings.cache_clear()
    assert result.exit_code == 0, result.output
    body = json.loads(result.stdout)
    expected = direct()
    assert body["predicted_frequency_hz"] == expected.predicted_frequency_hz
    assert body["residual_drift_hz_s"] == expected.residual_drift_hz_s


def test_cli_predict_table_without_database():
    result = CliRunner().invoke(
        main,
        [
            "predict",
            "--site-lat",
            "38.52",
            "--site-lon",
            "-107.31",
            "--site-height",
            "2410",
            "--ra",
            "201.365",
            "--dec",
            "12.42",
            "--time",
            TIME,
            "--observed-frequency-hz",
            str(HYDROGEN_HZ),
        ],
    )
    assert result.exit_code == 0, result.output
    assert "barycentric frequency" in result.stdout and "Hz" in result.stdout
    # a prediction is a read: no caution here (it is shown where a decision is made, once)
    assert "not a detection" not in result.stdout and "post-detection" not in result.stdout
    naive = CliRunner().invoke(
        main,
        [
            "predict",
            "--site-lat",
            "1",
            "--site-lon",
            "1",
            "--ra",
            "1",
            "--dec",
            "1",
            "--time",
            "2026-11-20T10:00:00",
            "--observed-frequency-hz",
            "1e9",
        ],
    )
    assert naive.exit_code == 2
    assert "time" in naive.stderr
