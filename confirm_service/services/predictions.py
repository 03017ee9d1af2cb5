"""Prediction and visibility services on plain values (no database).

Refused inputs raise PhysicsInputError whose ``field`` is the parameter name used here
(``site_lat_deg``, ``to_site_lat_deg``, ``time``, ``observed_frequency_hz``, ...).
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import datetime, timedelta
from typing import TYPE_CHECKING, Any

from confirm_service.cautions import SITE_SAFETY
from confirm_service.physics import (
    MODEL_DESCRIPTION,
    PhysicsInputError,
    SignalMeasurement,
    VisibilityWindow,
    barycentric_frequency_hz,
    current_ephemeris,
    drift_from_acceleration_hz_s,
    predict_signal,
    radial_velocity_and_acceleration,
    site_distance_km,
    site_location,
    target_coord,
    utc_time,
    visibility_windows,
)
from confirm_service.physics.doppler import require_positive_frequency
from confirm_service.schemas.predictions import (
    PredictionResult,
    VisibilityResult,
    VisibilityWindowResult,
)

if TYPE_CHECKING:
    from astropy.coordinates import EarthLocation, SkyCoord
    from astropy.time import Time

__all__ = ["compute_prediction", "compute_visibility", "window_result"]

VISIBILITY_CAUTION = f"Geometry only (no refraction). {SITE_SAFETY}"
MAX_VISIBILITY_DAYS = 400.0


@contextmanager
def _fields(**renames: str) -> Iterator[None]:
    """Report refusals under this module's parameter names."""
    try:
        yield
    except PhysicsInputError as error:
        raise error.renamed(renames.get(error.field, error.field)) from error


def _site(lat: float, lon: float, elevation: float, prefix: str):
    with _fields(
        latitude_deg=f"{prefix}lat_deg",
        longitude_deg=f"{prefix}lon_deg",
        elevation_m=f"{prefix}elevation_m",
    ):
        return site_location(lat, lon, elevation)


def _optional_finite(value: float | None, field: str, *, non_negative: bool = False):
    if value is None:
        return None
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise PhysicsInputError(field, f"not a number: {value!r}") from None
    if not math.isfinite(number) or (non_negative and number < 0.0):
        raise PhysicsInputError(field, "must be finite" + (" and >= 0" if non_negative else ""))
    return number


def _ephemeris_name() -> str:
    name = current_ephemeris()
    return name if name == "builtin" else os.path.basename(name)


def compute_prediction(
    site_lat_deg: float,
    site_lon_deg: float,
    site_elevation_m: float,
    ra_deg: float,
    dec_deg: float,
    time: datetime,
    observed_frequency_hz: float,
    observed_drift_hz_s: float | None = None,
    drift_uncertainty_hz_s: float | None = None,
    to_site: tuple[float, float, float] | None = None,
    to_time: datetime | None = None,
    *,
    frequency_uncertainty_hz: float = 0.0,
    pm_ra_mas_yr: float | None = None,
    pm_dec_mas_yr: float | None = None,
    parallax_mas: float | None = None,
    distance_pc: float | None = None,
    epoch: datetime | None = None,
) -> PredictionResult:
    """Doppler quantities of a detection and, when ``to_site`` or ``to_time`` is given, the
    frequency and drift expected there (sky-fixed transmitter, constant residual drift).

    ``to_site`` is (lat_deg, lon_deg, elevation_m); it defaults to the detecting site when only
    ``to_time`` is given, and ``to_time`` defaults to ``time``.
    """
    location = _site(site_lat_deg, site_lon_deg, site_elevation_m, "site_")
    motion: dict[str, Any] = dict(
        pm_ra_mas_yr=pm_ra_mas_yr,
        pm_dec_mas_yr=pm_dec_mas_yr,
        parallax_mas=parallax_mas,
        distance_pc=distance_pc,
        epoch=epoch,
    )
    target = target_coord(ra_deg, dec_deg, **motion)
    when = utc_time(time, "time")
    frequency = float(require_positive_frequency(observed_frequency_hz, "observed_frequency_hz"))
    drift, sigma_drift, sigma_f = _checked_drift_and_uncertainties(
        observed_drift_hz_s, drift_uncertainty_hz_s, frequency_uncertainty_hz
    )
    echo = dict(
        site_lat_deg=float(site_lat_deg),
        site_lon_deg=float(site_lon_deg),
        site_elevation_m=float(site_elevation_m),
        ra_deg=float(ra_deg),
        dec_deg=float(dec_deg),
        time=time,
        observed_frequency_hz=frequency,
        frequency_uncertainty_hz=sigma_f or 0.0,
        observed_drift_hz_s=drift,
        drift_uncertainty_hz_s=sigma_drift,
        **{k: v for k, v in motion.items() if k != "epoch"},
    )
    if to_site is None and to_time is None:
        return _at_detection(location, target, when, frequency, drift, echo)
    return _with_prediction(
        location, target, when, time, frequency, drift, sigma_f, sigma_drift, to_site, to_time, echo
    )


def _checked_drift_and_uncertainties(
    drift_hz_s: float | None, drift_uncertainty_hz_s: float | None, frequency_uncertainty_hz: float
) -> tuple[float | None, float | None, float | None]:
    """The observed drift (Hz/s) and the drift (Hz/s) and frequency (Hz) uncertainties, each
    finite when given, the uncertainties not negative."""
    return (
        _optional_finite(drift_hz_s, "observed_drift_hz_s"),
        _optional_finite(drift_uncertainty_hz_s, "drift_uncertainty_hz_s", non_negative=True),
        _optional_finite(frequency_uncertainty_hz, "frequency_uncertainty_hz", non_negative=True),
    )


def _at_detection(
    location: EarthLocation,
    target: SkyCoord,
    when: Time,
    frequency_hz: float,
    drift_hz_s: float | None,
    echo: dict[str, Any],
) -> PredictionResult:
    """The Doppler quantities at the detecting site and time alone."""
    velocity, acceleration = radial_velocity_and_acceleration(location, target, when)
    earth = float(drift_from_acceleration_hz_s(frequency_hz, velocity, acceleration))
    return PredictionResult(
        **echo,
        radial_velocity_m_s=float(velocity),
        earth_drift_hz_s=earth,
        barycentric_frequency_hz=float(barycentric_frequency_hz(frequency_hz, velocity)),
        residual_drift_hz_s=None if drift_hz_s is None else drift_hz_s - earth,
        ephemeris=_ephemeris_name(),
        notes=[],
    )


def _with_prediction(
    location, target, when, time, frequency, drift, sigma_f, sigma_drift, to_site, to_time, echo
) -> PredictionResult:
    to_location, (to_lat, to_lon, to_elev) = _destination(location, to_site, echo)
    to_moment = time if to_time is None else to_time
    to_when = utc_time(to_moment, "to_time")
    measurement = SignalMeasurement(
        location=location,
        unix_s=float(when.unix),
        frequency_hz=frequency,
        drift_hz_s=0.0 if drift is None else drift,
        frequency_uncertainty_hz=sigma_f or 0.0,
        drift_uncertainty_hz_s=sigma_drift or 0.0,
    )
    with _fields(unix_s="time", to_unix_s="to_time", frequency_hz="observed_frequency_hz"):
        prediction = predict_signal(measurement, target, to_location, float(to_when.unix))
    gap = float((to_when - when).to_value("s"))
    return PredictionResult(
        **echo,
        to_site_lat_deg=to_lat,
        to_site_lon_deg=to_lon,
        to_site_elevation_m=to_elev,
        to_time=to_moment,
        radial_velocity_m_s=prediction.source_radial_velocity_m_s,
        earth_drift_hz_s=prediction.source_earth_drift_hz_s,
        barycentric_frequency_hz=prediction.barycentric_frequency_hz,
        residual_drift_hz_s=None if drift is None else prediction.residual_drift_hz_s,
        predicted_frequency_hz=float(prediction.frequency_hz[0]),
        predicted_drift_hz_s=float(prediction.drift_hz_s[0]),
        predicted_frequency_uncertainty_hz=float(prediction.frequency_uncertainty_hz[0]),
        predicted_drift_uncertainty_hz_s=float(prediction.drift_uncertainty_hz_s[0]),
        to_radial_velocity_m_s=float(prediction.radial_velocity_m_s[0]),
        to_earth_drift_hz_s=float(prediction.earth_drift_hz_s[0]),
        time_gap_s=gap,
        barycentric_gap_s=float(prediction.barycentric_gap_s[0]),
        site_distance_km=site_distance_km(location, to_location),
        ephemeris=_ephemeris_name(),
        model=MODEL_DESCRIPTION,
        notes=_prediction_notes(drift is None, gap != 0.0 and sigma_drift is None),
    )


def _destination(
    location: EarthLocation, to_site: tuple[float, float, float] | None, echo: dict[str, Any]
) -> tuple[EarthLocation, tuple[float, float, float]]:
    """The site a prediction is for, and its (lat_deg, lon_deg, elevation_m): by default the
    detecting site (its values as echoed)."""
    if to_site is None:
        here = (echo["site_lat_deg"], echo["site_lon_deg"], echo["site_elevation_m"])
        return location, here
    if len(to_site) != 3:
        raise PhysicsInputError("to_site", "give (lat_deg, lon_deg, elevation_m)")
    to_lat, to_lon, to_elev = (float(x) for x in to_site)
    return _site(to_lat, to_lon, to_elev, "to_site_"), (to_lat, to_lon, to_elev)


def _prediction_notes(no_drift: bool, fixed_uncertainty: bool) -> list[str]:
    """What the prediction assumed for values not given."""
    notes: list[str] = []
    if no_drift:
        notes.append("No drift given: residual drift taken as 0 (constant barycentric frequency).")
    if fixed_uncertainty:
        notes.append(
            "No drift uncertainty given: the frequency uncertainty does not grow with the time gap."
        )
    return notes


def window_result(window: VisibilityWindow) -> VisibilityWindowResult:
    """One physics window as it is answered (times UTC, duration in s, elevation in deg)."""
    return VisibilityWindowResult(
        start=window.start,
        end=window.end,
        duration_s=window.duration_s,
        max_elevation_deg=window.max_elevation_deg,
        starts_at_search_start=window.starts_at_search_start,
        ends_at_search_end=window.ends_at_search_end,
    )


def compute_visibility(
    site_lat_deg: float,
    site_lon_deg: float,
    site_elevation_m: float,
    ra_deg: float,
    dec_deg: float,
    start: datetime,
    days: float,
    min_elevation_deg: float,
    sun_avoidance_deg: float,
    *,
    step_s: float = 60.0,
) -> VisibilityResult:
    """Observable windows over ``days`` from ``start`` (elevation above the limit and the Sun
    farther than the avoidance angle)."""
    location = _site(site_lat_deg, site_lon_deg, site_elevation_m, "site_")
    target = target_coord(ra_deg, dec_deg)
    utc_time(start, "start")
    span_days, min_elevation, sun_avoidance, step = _visibility_limits(
        days, min_elevation_deg, sun_avoidance_deg, step_s
    )
    end = start + timedelta(days=span_days)
    windows = visibility_windows(
        location,
        target,
        start,
        end,
        min_elevation_deg=min_elevation,
        sun_avoidance_deg=sun_avoidance,
        step_s=step,
    )
    return VisibilityResult(
        site_lat_deg=float(site_lat_deg),
        site_lon_deg=float(site_lon_deg),
        site_elevation_m=float(site_elevation_m),
        ra_deg=float(ra_deg),
        dec_deg=float(dec_deg),
        start=start,
        end=end,
        days=span_days,
        min_elevation_deg=min_elevation,
        sun_avoidance_deg=sun_avoidance,
        step_s=step,
        windows=[window_result(w) for w in windows],
        notes=[VISIBILITY_CAUTION],
    )


def _visibility_limits(
    days: float, min_elevation_deg: float, sun_avoidance_deg: float, step_s: float
) -> tuple[float, float, float, float]:
    """The span (days), elevation limit (deg), Sun avoidance (deg) and step (s), checked."""
    span_days = _optional_finite(days, "days")
    if span_days is None or not 0.0 < span_days <= MAX_VISIBILITY_DAYS:
        raise PhysicsInputError("days", f"must lie within 0..{MAX_VISIBILITY_DAYS:.0f}")
    min_elevation = _optional_finite(min_elevation_deg, "min_elevation_deg")
    sun_avoidance = _optional_finite(sun_avoidance_deg, "sun_avoidance_deg")
    step = _optional_finite(step_s, "step_s")
    if min_elevation is None or sun_avoidance is None or step is None:
        missing = "min_elevation_deg" if min_elevation is None else "sun_avoidance_deg"
        raise PhysicsInputError(missing if step is not None else "step_s", "a number is required")
    return span_days, min_elevation, sun_avoidance, step
