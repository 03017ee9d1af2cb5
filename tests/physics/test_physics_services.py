"""Prediction and visibility services: values, JSON shape, refusals by parameter name."""

from __future__ import annotations

import json
from datetime import UTC, datetime, timedelta, timezone

import pytest

from confirm_service.physics import HYDROGEN_LINE_HZ, PhysicsInputError
from confirm_service.schemas.predictions import PredictionResult, VisibilityResult
from confirm_service.services.predictions import compute_prediction, compute_visibility

# Invented sites and an invented target direction.
SITE_A = (35.0, -106.0, 2100.0)
SITE_B = (-31.0, 21.0, 1800.0)
RA, DEC = 283.0, -12.0
LOCAL = timezone(timedelta(hours=-7))
WHEN = datetime(2025, 6, 9, 21, 0, tzinfo=LOCAL)  # 2025-06-10T04:00:00+00:00


def test_prediction_values_match_skyfield_and_echo_inputs(skyfield_ref):
    # Source: skyfield + DE421: Earth drift within 1e-5 Hz/s and radial velocity within
    # 0.02 m/s (see test_physics_vs_skyfield.py).
    result = compute_prediction(*SITE_A, RA, DEC, WHEN, HYDROGEN_LINE_HZ, 0.25, 0.002)
    assert isinstance(result, PredictionResult)
    t = skyfield_ref.times([WHEN])
    v_ref = skyfield_ref.radial_velocity_m_s(SITE_A, RA, DEC, t)[0]
    f_bary = HYDROGEN_LINE_HZ / (1.0 + v_ref / 299_792_458.0)
    drift_ref = skyfield_ref.earth_drift_hz_s(SITE_A, RA, DEC, t, f_bary)[0]
    assert abs(result.radial_velocity_m_s - v_ref) <= 0.02
    assert abs(result.earth_drift_hz_s - drift_ref) <= 1e-5
    assert abs(result.residual_drift_hz_s - (0.25 - result.earth_drift_hz_s)) <= 1e-12
    assert abs(result.barycentric_frequency_hz - f_bary) <= 0.1
    assert result.predicted_frequency_hz is None and result.to_time is None

    body = json.loads(result.model_dump_json())
    assert body["time"] == "2025-06-10T04:00:00+00:00"
    assert body["site_lat_deg"] == SITE_A[0] and body["observed_drift_hz_s"] == 0.25


def test_prediction_without_drift_has_null_residual():
    result = compute_prediction(*SITE_A, RA, DEC, WHEN, HYDROGEN_LINE_HZ)
    assert result.residual_drift_hz_s is None
    assert json.loads(result.model_dump_json())["residual_drift_hz_s"] is None


def test_prediction_for_a_second_site_and_time():
    later = WHEN + timedelta(days=2)
    result = compute_prediction(
        *SITE_A, RA, DEC, WHEN, HYDROGEN_LINE_HZ, 0.25, 0.002, to_site=SITE_B, to_time=later
    )
    body = json.loads(result.model_dump_json())
    assert body["to_time"] == "2025-06-12T04:00:00+00:00"
    for field in (
        "predicted_frequency_hz",
        "predicted_drift_hz_s",
        "predicted_frequency_uncertainty_hz",
        "predicted_drift_uncertainty_hz_s",
        "to_radial_velocity_m_s",
        "to_earth_drift_hz_s",
    ):
        assert isinstance(body[field], float), field
    assert result.time_gap_s == 2 * 86_400.0
    # sigma_f = gap * sigma_drift with sigma_f0 = 0 (model definition); tolerance 1e-3 relative.
    expected_sigma = abs(result.barycentric_gap_s) * 0.002
    assert abs(result.predicted_frequency_uncertainty_hz - expected_sigma) <= 1e-3 * expected_sigma
    # The chord between the invented sites: 0 < d < Earth's diameter (12,756 km, WGS84 2a).
    assert 0.0 < result.site_distance_km < 12_756.3


def test_prediction_same_site_same_time_returns_observation():
    result = compute_prediction(*SITE_A, RA, DEC, WHEN, 8.4e9, -0.1, 0.01, to_time=WHEN)
    assert abs(result.predicted_frequency_hz - 8.4e9) <= 1e-5
    assert abs(result.predicted_drift_hz_s + 0.1) <= 1e-9


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"site_lat_deg": 95.0}, "site_lat_deg"),
        ({"to_site": (-91.0, 0.0, 0.0)}, "to_site_lat_deg"),
        ({"observed_frequency_hz": 0.0}, "observed_frequency_hz"),
        ({"time": datetime(2025, 6, 10, 4, 0)}, "time"),
        ({"to_time": datetime(2101, 6, 10, tzinfo=UTC)}, "to_time"),
        ({"ra_deg": None}, "ra_deg"),
        ({"dec_deg": float("nan")}, "dec_deg"),
        ({"drift_uncertainty_hz_s": -1.0}, "drift_uncertainty_hz_s"),
    ],
)
def test_prediction_refusals_name_the_parameter(kwargs, field):
    arguments = dict(
        site_lat_deg=SITE_A[0],
        site_lon_deg=SITE_A[1],
        site_elevation_m=SITE_A[2],
        ra_deg=RA,
        dec_deg=DEC,
        time=WHEN,
        observed_frequency_hz=HYDROGEN_LINE_HZ,
        observed_drift_hz_s=0.1,
    )
    arguments.update(kwargs)
    with pytest.raises(PhysicsInputError) as refused:
        compute_prediction(**arguments)
    assert refused.value.field == field


def test_visibility_result_json():
    start = datetime(2025, 9, 1, tzinfo=UTC)
    result = compute_visibility(*SITE_A, RA, DEC, start, 2.0, 20.0, 30.0)
    assert isinstance(result, VisibilityResult)
    body = json.loads(result.model_dump_json())
    assert body["start"] == "2025-09-01T00:00:00+00:00"
    assert body["end"] == "2025-09-03T00:00:00+00:00"
    assert body["windows"]
    for window, model in zip(body["windows"], result.windows, strict=True):
        assert window["start"].endswith("+00:00") and window["end"].endswith("+00:00")
        assert abs(window["duration_s"] - (model.end - model.start).total_seconds()) <= 1e-6
        assert 20.0 <= window["max_elevation_deg"] <= 90.0


@pytest.mark.parametrize(
    ("days", "min_el", "avoid", "field"),
    [
        (0.0, 10.0, 20.0, "days"),
        (2.0, 91.0, 20.0, "min_elevation_deg"),
        (2.0, 10.0, -1.0, "sun_avoidance_deg"),
    ],
)
def test_visibility_refusals_name_the_parameter(days, min_el, avoid, field):
    with pytest.raises(PhysicsInputError) as refused:
        compute_visibility(*SITE_A, RA, DEC, datetime(2025, 9, 1, tzinfo=UTC), days, min_el, avoid)
    assert refused.value.field == field
