"""``predict`` gives the propagated uncertainty by default for a stored hit, and never prints a
sigma of 0 Hz it does not know."""

from __future__ import annotations

import json
from datetime import datetime

from confirm_service.services.predictions import compute_prediction
from tests.cli.test_basic_commands import run
from tests.factories import SITE_NORTH, SITE_SOUTH, TARGET, observation, setup_log


def _one_hit(client, auth) -> tuple[int, dict]:
    setup_log(client, auth)
    scan = observation(
        detections=[
            {"frequency_hz": 1.42e9 + 250.0, "drift_hz_s": -0.21, "snr": 6.0, "time_offset_s": 40.0}
        ]
    )
    response = client.post("/api/v1/observations", json=scan, headers=auth("pipeline"))
    assert response.status_code == 201, response.get_data(as_text=True)
    return response.get_json()["detection_ids"][0], scan


def test_a_stored_hit_gets_its_propagated_uncertainty(database_url, client, auth):
    detection_id, scan = _one_hit(client, auth)
    to_time = "2026-11-21T03:00:00+00:00"
    shown = run(
        [
            "predict",
            "--detection",
            str(detection_id),
            "--to-site",
            "TFO",
            "--to-time",
            to_time,
            "--json",
        ],
        database_url,
    )
    assert shown.exit_code == 0, shown.output
    result = json.loads(shown.stdout)
    # default.toml [matching]: 1 channel and 1 drift resolution (channel width / scan length)
    sigma_drift = scan["channel_width_hz"] / scan["duration_s"]
    assert result["frequency_uncertainty_hz"] == scan["channel_width_hz"]
    assert result["drift_uncertainty_hz_s"] == sigma_drift
    assert result["time"] == "2026-11-20T03:00:40+00:00"  # scan start + time_offset_s
    # the same numbers given by hand to the physics service give the same answer
    expected = compute_prediction(
        SITE_NORTH["latitude_deg"],
        SITE_NORTH["longitude_deg"],
        SITE_NORTH["elevation_m"],
        TARGET["ra_deg"],
        TARGET["dec_deg"],
        datetime.fromisoformat(result["time"]),
        1.42e9 + 250.0,
        -0.21,
        sigma_drift,
        (SITE_SOUTH["latitude_deg"], SITE_SOUTH["longitude_deg"], SITE_SOUTH["elevation_m"]),
        datetime.fromisoformat(to_time),
        frequency_uncertainty_hz=scan["channel_width_hz"],
    )
    assert result["predicted_frequency_hz"] == expected.predicted_frequency_hz
    assert result["predicted_frequency_uncertainty_hz"] == (
        expected.predicted_frequency_uncertainty_hz
    )
    # a day later one drift resolution alone grows to ~ sigma_drift x 86,400 s
    assert result["predicted_frequency_uncertainty_hz"] > 0.9 * sigma_drift * 86_400
    table = run(
        ["predict", "--detection", str(detection_id), "--to-site", "TFO", "--to-time", to_time],
        database_url,
    )
    assert "not known" not in table.stdout


def test_without_uncertainties_sigma_is_not_known_rather_than_zero(database_url, client, auth):
    setup_log(client, auth)
    shown = run(
        [
            "predict",
            "--site",
            "PRA",
            "--target",
            "Kestrel-7",
            "--time",
            "2026-11-20T03:00:00+00:00",
            "--observed-frequency-hz",
            "1420000000",
            "--to-site",
            "TFO",
            "--to-time",
            "2026-11-21T03:00:00+00:00",
        ],
        database_url,
    )
    assert shown.exit_code == 0, shown.output
    sigma_lines = [
        line for line in shown.stdout.splitlines() if line.strip().startswith("uncertainty")
    ]
    assert sigma_lines and all("not known" in line for line in sigma_lines)
    assert " 0.000000 Hz" not in shown.stdout
    refused = run(["predict", "--site", "PRA", "--target", "Kestrel-7"], database_url)
    assert refused.exit_code != 0 and "--detection" in refused.output
