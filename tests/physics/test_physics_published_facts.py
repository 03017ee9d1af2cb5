"""The service's Doppler values reach published constants and handbook magnitudes."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import numpy as np
from astropy import constants

from confirm_service.physics import (
    HYDROGEN_LINE_HZ,
    SPEED_OF_LIGHT_M_S,
    earth_drift_hz_s,
    radial_velocity_m_s,
    site_location,
    target_coord,
    utc_time,
)

WGS84_A_M = 6_378_137.0  # WGS84 semi-major axis (NIMA TR8350.2)
EARTH_ROTATION_RAD_S = 7.292115e-5  # nominal mean angular velocity (IERS Conventions 2010)
GM_SUN = 1.3271244e20  # IAU 2015 Resolution B3, m^3/s^2
AU_M = 1.495978707e11  # IAU 2012 Resolution B2
EARTH_MEAN_ORBITAL_SPEED_M_S = 29_780.0  # NASA Earth fact sheet (from memory: 29.78 km/s)
OBLIQUITY_DEG = 23.4393  # mean obliquity of the ecliptic at J2000 (IAU 2006), rounded
MARCH_EQUINOX_2025 = datetime(2025, 3, 20, 9, 1, tzinfo=UTC)  # from memory

EQUATOR = site_location(0.0, 0.0, 0.0)
NORTH_POLE = site_location(90.0, 0.0, 0.0)  # no rotational velocity


def _every(start: datetime, minutes: float, count: int):
    return utc_time([start + timedelta(minutes=minutes * k) for k in range(count)])


def test_hydrogen_line_constant():
    # Source: hydrogen maser measurement, 1420.405751768 MHz (Hellwig et al. 1970; from memory).
    assert HYDROGEN_LINE_HZ == 1_420_405_751.768
    # Source: the SI definition of the metre (BIPM SI Brochure, 9th ed.), via astropy.constants.
    assert SPEED_OF_LIGHT_M_S == constants.c.to_value("m/s") == 299_792_458.0


def test_equatorial_rotation_speed_reached():
    # Published figure: Earth's equatorial rotation speed 465.1 m/s (omega * a with the IERS
    # Conventions 2010 rate and the WGS84 semi-major axis; the rounded figure from memory).
    # The service's rotation part, isolated as equator minus pole for a target on the celestial
    # equator over one sidereal day in 5-min steps, must reach it. Tolerance 0.5 m/s: 5-min
    # sampling (0.03 m/s), the v_orbit.v_rotation/c time-dilation term (0.05 m/s), rounding.
    times = _every(datetime(2025, 5, 1, tzinfo=UTC), 5.0, 289)
    target = target_coord(90.0, 0.0)
    rotation = radial_velocity_m_s(EQUATOR, target, times) - radial_velocity_m_s(
        NORTH_POLE, target, times
    )
    amplitude = 0.5 * (rotation.max() - rotation.min())
    assert abs(amplitude - 465.1) <= 0.5, amplitude
    assert abs(amplitude - EARTH_ROTATION_RAD_S * WGS84_A_M) <= 0.5, amplitude


def test_largest_rotational_and_orbital_drift_reached():
    # Published figures: at 1.42 GHz the rotational drift reaches omega^2 a f / c = 0.161 Hz/s
    # and the orbital one GM_sun / AU^2 * f / c = 0.028 Hz/s (constants above, each with its
    # source; the rounded magnitudes are common practice, no source). Target in the Sun's
    # direction at the March equinox (RA 0, Dec 0), site on the equator, one day in 5-min
    # steps: the service's drift swings between orbital - rotational and orbital + rotational.
    # Tolerance 0.001 Hz/s (rounding 0.0005, Sun distance 0.996 AU, Moon 1.6e-4 Hz/s).
    times = _every(MARCH_EQUINOX_2025, 5.0, 289)
    drift = earth_drift_hz_s(EQUATOR, target_coord(0.0, 0.0), times, HYDROGEN_LINE_HZ)
    rotational_hz_s = 0.5 * (drift.max() - drift.min())
    orbital_hz_s = 0.5 * (drift.max() + drift.min())
    assert abs(rotational_hz_s - 0.161) <= 0.001, rotational_hz_s
    assert abs(orbital_hz_s - 0.028) <= 0.001, orbital_hz_s
    # The same figures from the published constants, unrounded (f = the hydrogen line).
    f_over_c = 1_420_405_751.768 / 299_792_458.0
    assert abs(rotational_hz_s - EARTH_ROTATION_RAD_S**2 * WGS84_A_M * f_over_c) <= 0.001
    assert abs(orbital_hz_s - GM_SUN / AU_M**2 * f_over_c) <= 0.001
    assert abs(drift.max() - 0.161 - 0.028) <= 0.001


def test_yearly_amplitude_for_ecliptic_target_reached():
    # Source: Earth's mean orbital speed 29.78 km/s. Half the range over a year of daily values
    # at the pole (no rotation) for a target on the ecliptic; for an ellipse it equals
    # v_mean / sqrt(1 - e^2) = 29.784 km/s in any in-plane direction. Tolerance 50 m/s
    # (Moon 12 m/s, planets ~13 m/s, daily sampling 1 m/s).
    target = target_coord(90.0, OBLIQUITY_DEG)  # ecliptic longitude 90 deg
    days = utc_time([datetime(2025, 1, 1, tzinfo=UTC) + timedelta(days=k) for k in range(366)])
    velocity = radial_velocity_m_s(NORTH_POLE, target, days)
    assert abs(0.5 * (velocity.max() - velocity.min()) - EARTH_MEAN_ORBITAL_SPEED_M_S) <= 50.0

    # The year's maximum at the equator adds the rotation, omega * a * cos(dec) = 426.7 m/s.
    # Three days around the orbital maximum in 5-min steps; tolerance 2 m/s (orbital curvature
    # over half a day 1.1 m/s, sampling 0.03 m/s).
    peak_day = datetime(2025, 1, 1, tzinfo=UTC) + timedelta(days=int(np.argmax(velocity)) - 1)
    times = _every(peak_day, 5.0, 3 * 288)
    at_equator = radial_velocity_m_s(EQUATOR, target, times).max()
    at_pole = radial_velocity_m_s(NORTH_POLE, target, times).max()
    rotation = EARTH_ROTATION_RAD_S * WGS84_A_M * np.cos(np.radians(OBLIQUITY_DEG))
    assert abs((at_equator - at_pole) - rotation) <= 2.0
