"""Predictions for another site and time: properties and a check against skyfield."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from confirm_service.physics import (
    HYDROGEN_LINE_HZ,
    SignalMeasurement,
    TrackCache,
    barycentric_gap_s,
    predict_signal,
    site_location,
    target_coord,
)

from .skyfield_reference import C_M_S, unit_vector

FIRST = datetime(2020, 1, 1, tzinfo=UTC).timestamp()
LAST = datetime(2027, 6, 1, tzinfo=UTC).timestamp()  # inside the bundled IERS tables

latitudes = st.floats(-89.0, 89.0)
longitudes = st.floats(-180.0, 180.0)
elevations = st.floats(0.0, 4000.0)
sites = st.tuples(latitudes, longitudes, elevations)
targets = st.tuples(st.floats(0.0, 360.0), st.floats(-89.0, 89.0))
moments = st.floats(FIRST, LAST)
frequencies = st.floats(1e8, 3e10)
drifts = st.floats(-5.0, 5.0)
sigmas = st.floats(0.0, 10.0)
few = settings(max_examples=10, deadline=None, database=None)


@few
@given(sites, targets, moments, frequencies, drifts, sigmas, st.floats(0.0, 0.1))
def test_prediction_at_the_detection_itself_returns_the_detection(
    site, radec, unix_s, frequency_hz, drift_hz_s, sigma_f, sigma_drift
):
    # Property of any Doppler model: same site, same time gives back the input.
    location = site_location(*site)
    measurement = SignalMeasurement(
        location, unix_s, frequency_hz, drift_hz_s, sigma_f, sigma_drift
    )
    got = predict_signal(measurement, target_coord(*radec), location, unix_s)
    assert abs(got.frequency_hz[0] - frequency_hz) <= 1e-6 + 1e-15 * frequency_hz
    assert abs(got.drift_hz_s[0] - drift_hz_s) <= 1e-9
    assert abs(got.frequency_uncertainty_hz[0] - sigma_f) <= 1e-9 * (1.0 + sigma_f)
    assert abs(got.drift_uncertainty_hz_s[0] - sigma_drift) <= 1e-12
    assert got.barycentric_gap_s[0] == 0.0


_shared_cache = TrackCache()


@few
@given(sites, sites, targets, moments, st.floats(-30 * 86_400.0, 30 * 86_400.0), drifts, sigmas)
def test_round_trip_a_to_b_to_a_returns_to_start(
    site_a, site_b, radec, unix_a, gap_s, drift_hz_s, sigma_drift
):
    # Property: predicting B from A and then A from that prediction gives back A; the
    # uncertainty grows to sqrt(sigma_f0^2 + 2 (gap sigma_drift)^2) (error propagation, common
    # practice, no source). Tolerances 1e-5 Hz, 1e-9 Hz/s, 1e-3 relative.
    unix_b = float(np.clip(unix_a + gap_s, FIRST, LAST))
    a, b = site_location(*site_a), site_location(*site_b)
    target = target_coord(*radec)
    start = SignalMeasurement(a, unix_a, HYDROGEN_LINE_HZ, drift_hz_s, 1.0, sigma_drift * 1e-3)
    there = predict_signal(start, target, b, unix_b, _shared_cache)
    middle = SignalMeasurement(
        b,
        unix_b,
        float(there.frequency_hz[0]),
        float(there.drift_hz_s[0]),
        float(there.frequency_uncertainty_hz[0]),
        float(there.drift_uncertainty_hz_s[0]),
    )
    back = predict_signal(middle, target, a, unix_a, _shared_cache)
    assert abs(back.frequency_hz[0] - HYDROGEN_LINE_HZ) <= 1e-5
    assert abs(back.drift_hz_s[0] - drift_hz_s) <= 1e-9
    gap = float(there.barycentric_gap_s[0])
    expected_sigma = np.sqrt(1.0 + 2.0 * (gap * sigma_drift * 1e-3) ** 2)
    assert abs(back.frequency_uncertainty_hz[0] - expected_sigma) <= 1e-3 * expected_sigma


def test_prediction_for_another_site_and_day_matches_skyfield(skyfield_ref):
    # Source: skyfield + DE421 (Doppler factor zb, Earth drift, Roemer delay from the
    # barycentric site positions). Model: constant barycentric frequency rate r / D_A^2 in
    # barycentric arrival time. Tolerances: 0.1 Hz at 1.42 GHz (2 cm/s), 1e-5 Hz/s, 1 ms.
    site_a, site_b = (35.0, -106.0, 2100.0), (-31.0, 21.0, 1800.0)
    ra, dec = 283.0, -12.0
    moment_a = datetime(2025, 6, 10, 4, 0, tzinfo=UTC)
    moment_b = moment_a + timedelta(days=3, hours=7, minutes=13)
    residual_hz_s = 0.37
    t_a, t_b = skyfield_ref.times([moment_a]), skyfield_ref.times([moment_b])
    zb_a = skyfield_ref.doppler_factor(site_a, ra, dec, t_a)[0]
    zb_b = skyfield_ref.doppler_factor(site_b, ra, dec, t_b)[0]
    f_bary = HYDROGEN_LINE_HZ
    drift_a = skyfield_ref.earth_drift_hz_s(site_a, ra, dec, t_a, f_bary)[0] + residual_hz_s
    n = unit_vector(ra, dec)
    position_a = skyfield_ref.observer(*site_a).at(t_a).position.m[:, 0]
    position_b = skyfield_ref.observer(*site_b).at(t_b).position.m[:, 0]
    gap_s = (t_b.tdb - t_a.tdb)[0] * 86_400.0 + n @ (position_b - position_a) / C_M_S

    location_a, location_b = site_location(*site_a), site_location(*site_b)
    target = target_coord(ra, dec)
    ours_gap = barycentric_gap_s(
        location_a, moment_a.timestamp(), location_b, moment_b.timestamp(), target
    )[0]
    assert abs(ours_gap - gap_s) <= 1e-3

    measurement = SignalMeasurement(location_a, moment_a.timestamp(), f_bary * zb_a, drift_a)
    got = predict_signal(measurement, target, location_b, moment_b.timestamp())
    rate = residual_hz_s / zb_a**2
    expected_f = (f_bary + rate * gap_s) * zb_b
    expected_drift = (
        rate * zb_b**2
        + skyfield_ref.earth_drift_hz_s(site_b, ra, dec, t_b, f_bary + rate * gap_s)[0]
    )
    assert abs(got.frequency_hz[0] - expected_f) <= 0.1
    assert abs(got.drift_hz_s[0] - expected_drift) <= 1e-5
    assert abs(got.residual_drift_hz_s - residual_hz_s) <= 1e-5


def test_uncertainty_grows_with_the_gap():
    # sigma_f = sqrt(sigma_f0^2 + (gap * sigma_drift)^2): error propagation (common practice,
    # no source); tolerance 1e-3 relative (Doppler factors differ from 1 by <= 1e-4).
    location = site_location(10.0, 10.0, 0.0)
    start = datetime(2025, 2, 1, tzinfo=UTC).timestamp()
    measurement = SignalMeasurement(location, start, 8.4e9, 0.2, 2.0, 0.01)
    gaps = np.array([0.0, 600.0, 86_400.0, 20 * 86_400.0])
    got = predict_signal(measurement, target_coord(100.0, 20.0), location, start + gaps)
    expected = np.hypot(2.0, got.barycentric_gap_s * 0.01)
    assert np.all(np.abs(got.frequency_uncertainty_hz - expected) <= 1e-3 * expected)
    assert np.all(np.diff(got.frequency_uncertainty_hz) > 0.0)
    assert np.all(np.abs(got.drift_uncertainty_hz_s - 0.01) <= 1e-5)


def test_cached_and_direct_predictions_agree():
    # Interpolated tracks vs direct astropy. An acceleration error da at the detection grows
    # into the frequency as f/c * da * gap: bound f/c * (1e-5 m/s + 2e-8 m/s^2 * gap) from the
    # track tolerances (test_physics_tracks.py).
    a, b = site_location(-25.0, 120.0, 300.0), site_location(48.0, 2.0, 100.0)
    start = datetime(2025, 8, 8, 8, 8, tzinfo=UTC).timestamp()
    frequency_hz = 8.4e9
    measurement = SignalMeasurement(a, start, frequency_hz, -0.05, 1.0, 0.001)
    target = target_coord(10.0, -40.0)
    gaps = np.array([3600.0, 5 * 86_400.0])
    direct = predict_signal(measurement, target, b, start + gaps)
    cached = predict_signal(measurement, target, b, start + gaps, TrackCache())
    bound = frequency_hz / C_M_S * (1e-5 + 2e-8 * gaps)
    assert np.all(np.abs(direct.frequency_hz - cached.frequency_hz) <= bound)
    assert np.max(np.abs(direct.drift_hz_s - cached.drift_hz_s)) <= frequency_hz / C_M_S * 4e-8
