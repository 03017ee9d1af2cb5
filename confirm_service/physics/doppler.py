"""Doppler shift and drift from the observer's motion (Earth rotation, orbit, Moon, planets).

Sign conventions
----------------
* ``radial_velocity_m_s`` (v) is astropy's barycentric correction,
  ``SkyCoord.radial_velocity_correction(kind="barycentric")``: positive when the observer
  moves toward the target. It is the optical-convention velocity ``v = (zb - 1) c`` of the
  barycentric redshift zb of Wright & Eastman (2014, eq. 28), so besides the velocity component
  toward the target (to +-30 km/s) it holds a near-constant few-m/s part from time dilation and
  gravitational redshift.
* Frequencies: a signal of constant barycentric frequency f_bary arrives at the site at
  ``f_site = f_bary * (1 + v / c)`` (exact; no first-order approximation). This is the frequency
  form of astropy's rule ``rv_bary = rv + v + rv * v / c`` with optical-convention velocities
  ``1 + rv / c = f_rest / f``. An approaching observer (v > 0) sees a higher frequency.
* Drift rates are d(frequency)/dt in Hz/s, positive when the frequency rises; t is the site's
  clock (UTC seconds).
* ``earth_drift_hz_s`` is the drift that a transmitter fixed on the sky with constant
  barycentric frequency shows at the site: ``f_bary * (dv/dt) / c``, equal to
  ``f_site * (dv/dt) / (c + v)`` for the observed frequency f_site; it differs from
  ``f_site * (dv/dt) / c`` by the factor 1/(1 + v/c), i.e. <= 1e-4 relative (<= 2e-5 Hz/s at
  1.42 GHz).
* ``residual_drift_hz_s = observed_drift_hz_s - earth_drift_hz_s``: the drift not explained by
  the observer's motion (0 for a constant-frequency transmitter fixed on the sky).

Scale: at 1.42 GHz, 1 m/s of radial velocity is 4.74 Hz and 1 m/s^2 of radial acceleration is
4.74 Hz/s. Derivatives of astropy's velocity use the five-point central difference with a 60 s
step: truncation below 1e-12 m/s^2; astropy's numerical noise (about 1e-7 m/s) leaves an error
near 2e-9 m/s^2, i.e. 1e-8 Hz/s at 1.42 GHz.
"""

from __future__ import annotations

import astropy.units as u
import numpy as np
from astropy.coordinates import EarthLocation, SkyCoord
from astropy.time import Time, TimeDelta
from numpy.typing import ArrayLike, NDArray

from .errors import PhysicsInputError
from .frames import require_finite_target
from .iers import check_time_coverage

__all__ = [
    "DERIVATIVE_STEP_S",
    "HYDROGEN_LINE_HZ",
    "MAX_EARTH_ACCELERATION_M_S2",
    "SPEED_OF_LIGHT_M_S",
    "barycentric_drift_hz_s",
    "barycentric_frequency_hz",
    "doppler_factor",
    "drift_from_acceleration_hz_s",
    "earth_drift_hz_s",
    "max_earth_drift_hz_s",
    "radial_velocity_and_acceleration",
    "radial_velocity_m_s",
    "require_positive_frequency",
    "residual_drift_hz_s",
    "topocentric_drift_hz_s",
    "topocentric_frequency_hz",
]

SPEED_OF_LIGHT_M_S = 299_792_458.0  # exact, SI definition of the metre
HYDROGEN_LINE_HZ = 1_420_405_751.768  # neutral hydrogen 21 cm line
DERIVATIVE_STEP_S = 60.0
_EARTH_ROTATION_RAD_S = 7.292115e-5  # IERS Conventions (2010), nominal mean angular velocity
_EARTH_EQUATORIAL_RADIUS_M = 6_378_137.0  # WGS 84 semi-major axis
_SUN_GM_M3_S2 = 1.32712440041e20  # IAU 2015 nominal solar mass parameter (TDB-compatible)
_ASTRONOMICAL_UNIT_M = 149_597_870_700.0  # IAU 2012 Resolution B2, exact
_EARTH_MOON_WOBBLE_M_S2 = 4.0e-5  # Earth's pull towards the Earth-Moon barycentre, rounded up
MAX_EARTH_ACCELERATION_M_S2 = (
    _EARTH_ROTATION_RAD_S**2 * _EARTH_EQUATORIAL_RADIUS_M  # rotation at the equator, 0.0339
    + _SUN_GM_M3_S2 / (0.983 * _ASTRONOMICAL_UNIT_M) ** 2  # orbit at perihelion, 0.0061
    + _EARTH_MOON_WOBBLE_M_S2
)
"""Upper bound (m/s^2) on the line-of-sight acceleration of any site on Earth towards any
direction: centripetal acceleration of the equator plus the Sun's pull at perihelion plus the
Moon's; about 0.040 m/s^2."""
_STENCIL = np.array([-2.0, -1.0, 1.0, 2.0])
_STENCIL_WEIGHTS = np.array([1.0, -8.0, 8.0, -1.0]) / 12.0


def require_positive_frequency(
    frequency_hz: ArrayLike, field: str = "frequency_hz"
) -> NDArray[np.float64]:
    """Frequencies as float64, refusing values that are not finite or not > 0."""
    values = np.asarray(frequency_hz, dtype=np.float64)
    if not np.all(np.isfinite(values)) or np.any(values <= 0.0):
        raise PhysicsInputError(field, "frequency must be finite and > 0 Hz")
    return values


def radial_velocity_m_s(
    location: EarthLocation, target: SkyCoord, times: Time
) -> NDArray[np.float64]:
    """Observer's barycentric velocity toward the target in m/s (astropy's correction)."""
    require_finite_target(target)
    check_time_coverage(times)
    correction = target.radial_velocity_correction(
        kind="barycentric", obstime=times, location=location
    )
    return np.asarray(correction.to_value(u.m / u.s), dtype=np.float64)


def _shifted(times: Time, offsets_s: NDArray[np.float64]) -> Time:
    """Times with a leading axis of offsets (s) added: shape (len(offsets),) + times.shape."""
    shape = (offsets_s.size,) + (1,) * times.ndim
    return times.reshape((1,) + times.shape) + TimeDelta(offsets_s.reshape(shape), format="sec")


def _derivative(velocity_at_stencil: NDArray[np.float64], step_s: float) -> NDArray[np.float64]:
    """d/dt from values at t + (-2, -1, 1, 2) * step along the first axis."""
    return np.tensordot(_STENCIL_WEIGHTS, velocity_at_stencil, axes=1) / step_s


def radial_velocity_and_acceleration(
    location: EarthLocation, target: SkyCoord, times: Time, step_s: float = DERIVATIVE_STEP_S
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Radial velocity (m/s) and its time derivative (m/s^2), five-point stencil on astropy."""
    offsets = np.append(_STENCIL * step_s, 0.0)
    velocity = radial_velocity_m_s(location, target, _shifted(times, offsets))
    return velocity[4], _derivative(velocity[:4], step_s)


def doppler_factor(radial_velocity_m_s: ArrayLike) -> NDArray[np.float64]:
    """f_site / f_bary = 1 + v/c for the barycentric correction v (m/s)."""
    return 1.0 + np.asarray(radial_velocity_m_s, dtype=np.float64) / SPEED_OF_LIGHT_M_S


def topocentric_frequency_hz(
    barycentric_frequency_hz: ArrayLike, radial_velocity_m_s: ArrayLike
) -> NDArray[np.float64]:
    """Frequency seen at the site (Hz) for a barycentric frequency (Hz): f_bary * (1 + v/c)."""
    f_bary = require_positive_frequency(barycentric_frequency_hz, "barycentric_frequency_hz")
    return f_bary * doppler_factor(radial_velocity_m_s)


def barycentric_frequency_hz(
    observed_frequency_hz: ArrayLike, radial_velocity_m_s: ArrayLike
) -> NDArray[np.float64]:
    """Barycentric frequency (Hz) of a frequency observed at the site: f_site / (1 + v/c)."""
    f_site = require_positive_frequency(observed_frequency_hz, "observed_frequency_hz")
    return f_site / doppler_factor(radial_velocity_m_s)


def drift_from_acceleration_hz_s(
    observed_frequency_hz: ArrayLike, radial_velocity_m_s: ArrayLike, acceleration_m_s2: ArrayLike
) -> NDArray[np.float64]:
    """Earth drift (Hz/s) from v (m/s) and dv/dt (m/s^2): f_site * (dv/dt) / (c + v)."""
    f_site = np.asarray(observed_frequency_hz, dtype=np.float64)
    velocity = np.asarray(radial_velocity_m_s, dtype=np.float64)
    return (
        f_site * np.asarray(acceleration_m_s2, dtype=np.float64) / (SPEED_OF_LIGHT_M_S + velocity)
    )


def max_earth_drift_hz_s(frequency_hz: ArrayLike) -> NDArray[np.float64]:
    """The largest drift (Hz/s, magnitude) Earth's motion can give a sky-fixed signal at
    ``frequency_hz``: f * a_max / c with :data:`MAX_EARTH_ACCELERATION_M_S2`."""
    values = np.asarray(frequency_hz, dtype=np.float64)
    return values * MAX_EARTH_ACCELERATION_M_S2 / SPEED_OF_LIGHT_M_S


def earth_drift_hz_s(
    location: EarthLocation, target: SkyCoord, times: Time, frequency_hz: ArrayLike
) -> NDArray[np.float64]:
    """Drift (Hz/s) a constant-barycentric-frequency transmitter on the sky shows at the site.

    ``frequency_hz`` is the frequency observed at the site at ``times``. Direct astropy
    evaluation (five-point central difference, 60 s step); for many times use TrackCache.
    """
    f_site = require_positive_frequency(frequency_hz)
    velocity = radial_velocity_m_s(location, target, _shifted(times, _STENCIL * DERIVATIVE_STEP_S))
    acceleration = _derivative(velocity, DERIVATIVE_STEP_S)
    # The mean of v(t -+ step) is within 5e-3 m/s of v(t); it only enters through 1/(c + v).
    return drift_from_acceleration_hz_s(f_site, 0.5 * (velocity[1] + velocity[2]), acceleration)


def residual_drift_hz_s(
    observed_drift_hz_s: ArrayLike, earth_drift_hz_s: ArrayLike
) -> NDArray[np.float64]:
    """Drift not explained by the observer's motion (Hz/s): observed - earth."""
    return np.asarray(observed_drift_hz_s, dtype=np.float64) - np.asarray(
        earth_drift_hz_s, dtype=np.float64
    )


def barycentric_drift_hz_s(
    residual_drift_hz_s: ArrayLike, radial_velocity_m_s: ArrayLike
) -> NDArray[np.float64]:
    """Rate of the barycentric frequency (Hz per barycentric second) from a residual drift.

    With f_site(t) = f_bary(t_b) (1 + v/c) and dt_b/dt = 1 + v/c (cycles are conserved),
    d f_site/dt = (d f_bary/dt_b) (1 + v/c)^2 + f_bary (dv/dt)/c.
    """
    return (
        np.asarray(residual_drift_hz_s, dtype=np.float64) / doppler_factor(radial_velocity_m_s) ** 2
    )


def topocentric_drift_hz_s(
    barycentric_frequency_hz: ArrayLike,
    barycentric_drift_hz_s: ArrayLike,
    radial_velocity_m_s: ArrayLike,
    acceleration_m_s2: ArrayLike,
) -> NDArray[np.float64]:
    """Drift at the site (Hz/s): f_bary-rate * (1 + v/c)^2 + f_bary * (dv/dt)/c."""
    factor = doppler_factor(radial_velocity_m_s)
    rate = np.asarray(barycentric_drift_hz_s, dtype=np.float64)
    f_bary = np.asarray(barycentric_frequency_hz, dtype=np.float64)
    acceleration = np.asarray(acceleration_m_s2, dtype=np.float64)
    return rate * factor**2 + f_bary * acceleration / SPEED_OF_LIGHT_M_S
