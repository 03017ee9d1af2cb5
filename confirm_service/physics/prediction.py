"""Frequency and drift expected at another site and time from one detection.

Model (hypothesis under test): the transmitter is fixed on the sky and its barycentric
frequency changes at a constant rate. With v the barycentric correction (doppler.py), D = 1 + v/c
and t_b the barycentric arrival time (TDB plus astropy's Roemer light-travel time to the solar
system barycentre):

* detection at site A, time t_A: f_bary,A = f_A / D_A, residual drift r = drift_A - earth_A,
  barycentric rate  fdot = r / D_A^2  (Hz per barycentric second, cycles conserved);
* at site B, time t_B with gap g = t_b(B) - t_b(A):
  f_bary,B = f_bary,A + fdot * g,  f_B = f_bary,B * D_B,
  drift_B = fdot * D_B^2 + f_bary,B * (dv_B/dt) / c.

Uncertainty (1 sigma, inputs independent):
  sigma_f,B = D_B * sqrt((sigma_f,A / D_A)^2 + (g * sigma_drift,A / D_A^2)^2)
  sigma_drift,B = sigma_drift,A * (D_B / D_A)^2
i.e. sigma_f = sqrt(sigma_f0^2 + (gap * sigma_drift)^2) to 1e-4 relative. Not included:
ephemeris and Earth-orientation errors (about 1 mm/s, 0.005 Hz at 1.42 GHz, inside the IERS
tables) and relativistic clock-rate terms of the time base (about 1.5e-8 of the gap times the
residual drift). A prediction that is met supports the hypothesis; it is not a detection.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import astropy.units as u
import numpy as np
from astropy.coordinates import EarthLocation, SkyCoord
from numpy.typing import ArrayLike, NDArray

from .doppler import (
    SPEED_OF_LIGHT_M_S,
    barycentric_drift_hz_s,
    doppler_factor,
    radial_velocity_and_acceleration,
    require_positive_frequency,
    topocentric_drift_hz_s,
)
from .errors import PhysicsInputError
from .frames import require_finite_target, time_from_unix_s
from .interpolant import TrackCache, TrackRequest

__all__ = [
    "MODEL_DESCRIPTION",
    "Prediction",
    "SignalMeasurement",
    "barycentric_gap_s",
    "predict_signal",
    "predict_signal_many",
]

MODEL_DESCRIPTION = (
    "sky-fixed transmitter whose barycentric frequency changes at a constant rate (the residual "
    "drift) in barycentric arrival time; sigma_f = sqrt(sigma_f0^2 + (gap * sigma_drift)^2)"
)


@dataclass(frozen=True)
class SignalMeasurement:
    """A detection: site, time (POSIX s), observed frequency (Hz) and drift (Hz/s)."""

    location: EarthLocation
    unix_s: float
    frequency_hz: float
    drift_hz_s: float
    frequency_uncertainty_hz: float = 0.0
    drift_uncertainty_hz_s: float = 0.0


@dataclass(frozen=True)
class Prediction:
    """Expected signal at the requested site, one array element per requested time."""

    unix_s: NDArray[np.float64]
    frequency_hz: NDArray[np.float64]
    drift_hz_s: NDArray[np.float64]
    frequency_uncertainty_hz: NDArray[np.float64]
    drift_uncertainty_hz_s: NDArray[np.float64]
    barycentric_frequency_hz: float  # at the detection
    residual_drift_hz_s: float  # at the detection: observed - earth drift
    radial_velocity_m_s: NDArray[np.float64]  # at the requested site and times
    earth_drift_hz_s: NDArray[np.float64]  # at the requested site, at the predicted frequency
    source_radial_velocity_m_s: float  # at the detection
    source_earth_drift_hz_s: float  # at the detection, at the observed frequency
    barycentric_drift_hz_s: float  # rate of the barycentric frequency, Hz per barycentric s
    barycentric_gap_s: NDArray[np.float64]  # barycentric arrival-time gap to each time


def _non_negative(value: float, field: str) -> float:
    number = float(value)
    if not math.isfinite(number) or number < 0.0:
        raise PhysicsInputError(field, f"must be finite and >= 0, got {value!r}")
    return number


def _checked(measurement: SignalMeasurement) -> SignalMeasurement:
    require_positive_frequency(measurement.frequency_hz, "frequency_hz")
    if not math.isfinite(float(measurement.drift_hz_s)):
        raise PhysicsInputError("drift_hz_s", "must be finite")
    _non_negative(measurement.frequency_uncertainty_hz, "frequency_uncertainty_hz")
    _non_negative(measurement.drift_uncertainty_hz_s, "drift_uncertainty_hz_s")
    time_from_unix_s(measurement.unix_s, "unix_s")
    return measurement


def _kinematics(
    location: EarthLocation, target: SkyCoord, unix_s: NDArray[np.float64], cache: TrackCache | None
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Radial velocity (m/s) and acceleration (m/s^2): direct astropy or cached tracks."""
    if cache is None:
        return radial_velocity_and_acceleration(location, target, time_from_unix_s(unix_s))
    pairs = np.zeros(unix_s.shape, dtype=np.int64)
    return cache.kinematics([TrackRequest(location, target)], pairs, unix_s)


def _light_travel_s(
    location: EarthLocation, target: SkyCoord, unix_s: NDArray[np.float64]
) -> NDArray[np.float64]:
    times = time_from_unix_s(unix_s)
    delay = times.light_travel_time(target, kind="barycentric", location=location)
    return np.asarray(delay.to_value(u.s), dtype=np.float64)


def barycentric_gap_s(
    from_location: EarthLocation,
    from_unix_s: float,
    to_location: EarthLocation,
    to_unix_s: ArrayLike,
    target: SkyCoord,
) -> NDArray[np.float64]:
    """Barycentric arrival-time difference (s) of a wavefront from the target: TDB difference
    plus the difference of astropy's Roemer light-travel times to the barycentre."""
    to_times = np.atleast_1d(np.asarray(to_unix_s, dtype=np.float64))
    start = time_from_unix_s(from_unix_s)
    tdb_gap = (time_from_unix_s(to_times).tdb - start.tdb).to_value(u.s)
    light_a = _light_travel_s(from_location, target, np.asarray(float(from_unix_s)))
    light_b = _light_travel_s(to_location, target, to_times)
    return np.asarray(tdb_gap, dtype=np.float64) + (light_b - light_a)


@dataclass(frozen=True)
class _Source:
    """The measured signal at its own site: v (m/s), 1 + v/c, the barycentric frequency (Hz),
    Earth's drift there (Hz/s), the residual drift (Hz/s) and the barycentric rate (Hz/s)."""

    velocity_m_s: float
    factor: float
    barycentric_frequency_hz: float
    earth_drift_hz_s: float
    residual_drift_hz_s: float
    barycentric_rate_hz_s: float

    @classmethod
    def of(
        cls, measurement: SignalMeasurement, target: SkyCoord, cache: TrackCache | None
    ) -> _Source:
        at = np.asarray([float(measurement.unix_s)])
        velocity, acceleration = (
            x[0] for x in _kinematics(measurement.location, target, at, cache)
        )
        factor = float(doppler_factor(velocity))
        f_bary = float(measurement.frequency_hz) / factor
        earth = f_bary * float(acceleration) / SPEED_OF_LIGHT_M_S
        residual = float(measurement.drift_hz_s) - earth
        rate = float(barycentric_drift_hz_s(residual, velocity))
        return cls(float(velocity), factor, f_bary, earth, residual, rate)


def predict_signal(
    measurement: SignalMeasurement,
    target: SkyCoord,
    to_location: EarthLocation,
    to_unix_s: ArrayLike,
    cache: TrackCache | None = None,
) -> Prediction:
    """Frequency, drift and uncertainties expected at ``to_location`` at ``to_unix_s``."""
    _checked(measurement)
    require_finite_target(target)
    to_times = np.atleast_1d(np.asarray(to_unix_s, dtype=np.float64))
    time_from_unix_s(to_times, "to_unix_s")
    source = _Source.of(measurement, target, cache)
    velocity_b, acceleration_b = _kinematics(to_location, target, to_times, cache)
    gap = barycentric_gap_s(measurement.location, measurement.unix_s, to_location, to_times, target)

    factor_a, rate = source.factor, source.barycentric_rate_hz_s
    factor_b = doppler_factor(velocity_b)
    f_bary_b = source.barycentric_frequency_hz + rate * gap
    if np.any(f_bary_b <= 0.0):
        raise PhysicsInputError("to_unix_s", "the drift extrapolates to a non-positive frequency")
    sigma_f_bary = np.hypot(
        measurement.frequency_uncertainty_hz / factor_a,
        gap * measurement.drift_uncertainty_hz_s / factor_a**2,
    )
    return Prediction(
        unix_s=to_times,
        frequency_hz=f_bary_b * factor_b,
        drift_hz_s=topocentric_drift_hz_s(f_bary_b, rate, velocity_b, acceleration_b),
        frequency_uncertainty_hz=sigma_f_bary * factor_b,
        drift_uncertainty_hz_s=measurement.drift_uncertainty_hz_s * (factor_b / factor_a) ** 2,
        barycentric_frequency_hz=source.barycentric_frequency_hz,
        residual_drift_hz_s=source.residual_drift_hz_s,
        radial_velocity_m_s=np.asarray(velocity_b, dtype=np.float64),
        earth_drift_hz_s=f_bary_b * acceleration_b / SPEED_OF_LIGHT_M_S,
        source_radial_velocity_m_s=source.velocity_m_s,
        source_earth_drift_hz_s=source.earth_drift_hz_s,
        barycentric_drift_hz_s=rate,
        barycentric_gap_s=gap,
    )


def predict_signal_many(
    measurements: Sequence[SignalMeasurement],
    targets: Sequence[SkyCoord],
    to_locations: Sequence[EarthLocation],
    to_unix_s: Sequence[ArrayLike],
    cache: TrackCache | None = None,
) -> list[Prediction]:
    """predict_signal for many detections, sharing one track cache (built if not given)."""
    if not len(measurements) == len(targets) == len(to_locations) == len(to_unix_s):
        raise ValueError("measurements, targets, to_locations and to_unix_s must pair up")
    shared = cache if cache is not None else TrackCache()
    return [
        predict_signal(m, t, loc, when, shared)
        for m, t, loc, when in zip(measurements, targets, to_locations, to_unix_s, strict=True)
    ]
