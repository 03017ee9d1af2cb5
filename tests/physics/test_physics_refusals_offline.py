"""Refused inputs name their field; astropy runs offline; far-future times warn once."""

from __future__ import annotations

import math
import warnings
from datetime import UTC, datetime, timedelta, timezone

import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from astropy.utils import iers
from astropy.utils.data import conf as data_conf

from confirm_service.physics import (
    PhysicsAccuracyWarning,
    PhysicsInputError,
    SignalMeasurement,
    barycentric_frequency_hz,
    earth_drift_hz_s,
    predict_signal,
    radial_velocity_m_s,
    reset_accuracy_warning,
    set_ephemeris,
    site_location,
    target_coord,
    time_from_unix_s,
    topocentric_frequency_hz,
    utc_time,
    visibility_windows,
)

SITE = site_location(10.0, 20.0, 30.0)
TARGET = target_coord(40.0, 50.0)
WHEN = datetime(2025, 4, 1, tzinfo=UTC)


def _refused(field: str, call, *args, **kwargs) -> None:
    with pytest.raises(PhysicsInputError) as refused:
        call(*args, **kwargs)
    assert refused.value.field == field, refused.value


@pytest.mark.parametrize("latitude", [90.5, -91.0, math.nan, None])
def test_latitude_outside_range_is_refused(latitude):
    _refused("latitude_deg", site_location, latitude, 0.0, 0.0)


def test_other_site_fields_are_refused():
    _refused("longitude_deg", site_location, 0.0, math.inf, 0.0)
    _refused("elevation_m", site_location, 0.0, 0.0, 200_000.0)


@pytest.mark.parametrize(
    "moment",
    [
        datetime(2025, 4, 1),  # naive
        datetime(1899, 12, 31, 23, 0, tzinfo=UTC),
        datetime(2101, 1, 1, 0, 30, tzinfo=UTC),
    ],
)
def test_times_naive_or_outside_1900_2100_are_refused(moment):
    _refused("time", utc_time, moment)
    _refused(
        "start",
        visibility_windows,
        SITE,
        TARGET,
        moment,
        WHEN,
        min_elevation_deg=0.0,
        sun_avoidance_deg=0.0,
    )


def test_offset_is_honoured_before_the_range_is_judged():
    # 2101-01-01T01:00+02:00 is 2100-12-31T23:00 UTC: inside the range, so it is accepted.
    moment = datetime(2101, 1, 1, 1, 0, tzinfo=timezone(timedelta(hours=2)))
    assert utc_time(moment).utc.datetime == datetime(2100, 12, 31, 23, 0)


def test_unix_times_outside_range_are_refused():
    _refused("unix_s", time_from_unix_s, [datetime(2101, 1, 2, tzinfo=UTC).timestamp()])
    _refused("unix_s", time_from_unix_s, [math.nan])


@pytest.mark.parametrize(
    ("ra", "dec", "field"),
    [(None, 10.0, "ra_deg"), (10.0, math.nan, "dec_deg"), (10.0, 95.0, "dec_deg")],
)
def test_target_without_coordinates_is_refused(ra, dec, field):
    _refused(field, target_coord, ra, dec)


def test_missing_or_nan_skycoord_is_refused():
    _refused("target", radial_velocity_m_s, SITE, None, utc_time(WHEN))
    nan_target = SkyCoord(ra=[np.nan] * 1, dec=[0.0], unit="deg")
    _refused("target", radial_velocity_m_s, SITE, nan_target, utc_time(WHEN))


def test_proper_motion_needs_a_distance():
    _refused("parallax_mas", target_coord, 10.0, 10.0, pm_ra_mas_yr=5.0, pm_dec_mas_yr=1.0)
    _refused("pm_dec_mas_yr", target_coord, 10.0, 10.0, pm_ra_mas_yr=5.0, parallax_mas=10.0)
    _refused("parallax_mas", target_coord, 10.0, 10.0, parallax_mas=-1.0)


@pytest.mark.parametrize("frequency", [0.0, -1.0, math.nan])
def test_non_positive_frequency_is_refused(frequency):
    _refused("barycentric_frequency_hz", topocentric_frequency_hz, frequency, 0.0)
    _refused("observed_frequency_hz", barycentric_frequency_hz, frequency, 0.0)
    _refused("frequency_hz", earth_drift_hz_s, SITE, TARGET, utc_time(WHEN), frequency)
    measurement = SignalMeasurement(SITE, WHEN.timestamp(), frequency, 0.0)
    _refused("frequency_hz", predict_signal, measurement, TARGET, SITE, WHEN.timestamp())


def test_missing_ephemeris_file_is_refused(tmp_path):
    _refused("path", set_ephemeris, tmp_path / "absent.bsp")


def test_astropy_is_configured_offline():
    # Offline operation: no IERS downloads, no staleness check, no internet for astropy data.
    assert iers.conf.auto_download is False
    assert iers.conf.auto_max_age is None
    assert data_conf.allow_internet is False


def test_time_beyond_iers_tables_warns_once_and_still_computes(builtin_ephemeris):
    # 2095 is past the bundled IERS tables and leap-second list: one PhysicsAccuracyWarning
    # stating degraded accuracy, astropy's own per-call range warnings replaced, and a result.
    reset_accuracy_warning()
    late = utc_time([datetime(2095, 6, 1, tzinfo=UTC), datetime(2095, 6, 2, tzinfo=UTC)])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", PhysicsAccuracyWarning)
        first = radial_velocity_m_s(SITE, TARGET, late)
        second = earth_drift_hz_s(SITE, TARGET, late, 1.42e9)
    ours = [w for w in caught if issubclass(w.category, PhysicsAccuracyWarning)]
    assert len(ours) == 1
    assert "degraded accuracy" in str(ours[0].message)
    assert not [w for w in caught if "dubious year" in str(w.message)]
    assert not [w for w in caught if "Tried to get polar motions" in str(w.message)]
    assert np.all(np.isfinite(first)) and np.all(np.abs(first) < 31_000.0)
    assert np.all(np.abs(second) < 0.2)  # below the 0.19 Hz/s bound at 1.42 GHz


def test_time_inside_iers_tables_does_not_warn():
    reset_accuracy_warning()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", PhysicsAccuracyWarning)
        radial_velocity_m_s(SITE, TARGET, utc_time(WHEN))
    assert not [w for w in caught if issubclass(w.category, PhysicsAccuracyWarning)]
