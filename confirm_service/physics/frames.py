"""Sites, targets and times as astropy objects, with input checks.

Sites are WGS84 geodetic positions; targets are ICRS directions (optionally with proper motion
and parallax); times are UTC. Naive datetimes and years outside 1900-2100 (the span of astropy's
builtin solar-system ephemeris) are refused.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from datetime import UTC, datetime

import astropy.units as u
import numpy as np
from astropy.coordinates import Distance, EarthLocation, SkyCoord
from astropy.time import Time
from numpy.typing import ArrayLike, NDArray

from .errors import PhysicsInputError
from .iers import configure_offline

__all__ = [
    "FIRST_YEAR",
    "LAST_YEAR",
    "location_key",
    "require_finite_target",
    "site_distance_km",
    "site_location",
    "target_coord",
    "target_key",
    "time_from_unix_s",
    "unix_s_from_time",
    "utc_datetime",
    "utc_time",
]

FIRST_YEAR = 1900
LAST_YEAR = 2100
_FIRST_UNIX_S = datetime(FIRST_YEAR, 1, 1, tzinfo=UTC).timestamp()
_END_UNIX_S = datetime(LAST_YEAR + 1, 1, 1, tzinfo=UTC).timestamp()
_LOWEST_ELEVATION_M = -12_000.0
_HIGHEST_ELEVATION_M = 100_000.0


def _finite(value: object, field: str) -> float:
    """``value`` as a finite float, or PhysicsInputError naming ``field``."""
    if value is None or isinstance(value, bool):
        raise PhysicsInputError(field, "a finite number is required")
    try:
        number = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise PhysicsInputError(field, f"not a number: {value!r}") from None
    if not math.isfinite(number):
        raise PhysicsInputError(field, f"must be finite, got {number}")
    return number


def site_location(latitude_deg: float, longitude_deg: float, elevation_m: float) -> EarthLocation:
    """A site on the WGS84 ellipsoid (latitude/longitude in degrees, height above it in m)."""
    lat = _finite(latitude_deg, "latitude_deg")
    lon = _finite(longitude_deg, "longitude_deg")
    elev = _finite(elevation_m, "elevation_m")
    if not -90.0 <= lat <= 90.0:
        raise PhysicsInputError("latitude_deg", f"must lie within -90..90, got {lat}")
    if not _LOWEST_ELEVATION_M <= elev <= _HIGHEST_ELEVATION_M:
        raise PhysicsInputError(
            "elevation_m",
            f"must lie within {_LOWEST_ELEVATION_M:.0f}..{_HIGHEST_ELEVATION_M:.0f} m, got {elev}",
        )
    configure_offline()
    return EarthLocation.from_geodetic(
        lon=lon * u.deg, lat=lat * u.deg, height=elev * u.m, ellipsoid="WGS84"
    )


def target_coord(
    ra_deg: float | None,
    dec_deg: float | None,
    *,
    pm_ra_mas_yr: float | None = None,
    pm_dec_mas_yr: float | None = None,
    parallax_mas: float | None = None,
    distance_pc: float | None = None,
    epoch: datetime | None = None,
) -> SkyCoord:
    """An ICRS target.

    ``pm_ra_mas_yr`` is the proper motion in right ascension times cos(dec). Proper motion needs
    a parallax or a distance (astropy's space motion needs both) and refers to ``epoch``
    (default J2000.0); the target's own radial velocity is taken as 0.
    """
    ra = _finite(ra_deg, "ra_deg") % 360.0
    dec = _finite(dec_deg, "dec_deg")
    if not -90.0 <= dec <= 90.0:
        raise PhysicsInputError("dec_deg", f"must lie within -90..90, got {dec}")
    distance = _target_distance(parallax_mas, distance_pc)
    has_pm = pm_ra_mas_yr is not None or pm_dec_mas_yr is not None
    configure_offline()
    if not has_pm:
        if distance is None:
            return SkyCoord(ra=ra * u.deg, dec=dec * u.deg, frame="icrs")
        return SkyCoord(ra=ra * u.deg, dec=dec * u.deg, distance=distance, frame="icrs")
    pm_ra = _finite(pm_ra_mas_yr, "pm_ra_mas_yr")
    pm_dec = _finite(pm_dec_mas_yr, "pm_dec_mas_yr")
    if distance is None:
        raise PhysicsInputError("parallax_mas", "proper motion needs parallax_mas or distance_pc")
    obstime = Time("J2000.0") if epoch is None else utc_time(epoch, "epoch")
    return SkyCoord(
        ra=ra * u.deg,
        dec=dec * u.deg,
        distance=distance,
        pm_ra_cosdec=pm_ra * u.mas / u.yr,
        pm_dec=pm_dec * u.mas / u.yr,
        radial_velocity=0.0 * u.km / u.s,
        obstime=obstime,
        frame="icrs",
    )


def _target_distance(parallax_mas: float | None, distance_pc: float | None) -> Distance | None:
    if parallax_mas is not None and distance_pc is not None:
        raise PhysicsInputError("distance_pc", "give parallax_mas or distance_pc, not both")
    if parallax_mas is not None:
        parallax = _finite(parallax_mas, "parallax_mas")
        if parallax <= 0.0:
            raise PhysicsInputError("parallax_mas", f"must be > 0, got {parallax}")
        return Distance(parallax=parallax * u.mas)
    if distance_pc is not None:
        distance = _finite(distance_pc, "distance_pc")
        if distance <= 0.0:
            raise PhysicsInputError("distance_pc", f"must be > 0, got {distance}")
        return Distance(distance * u.pc)
    return None


def require_finite_target(target: SkyCoord | None, field: str = "target") -> SkyCoord:
    """Refuse a missing target or one whose coordinates are not finite."""
    if target is None:
        raise PhysicsInputError(field, "target coordinates are required")
    icrs = target.icrs
    ra = np.asarray(icrs.ra.deg, dtype=np.float64)
    dec = np.asarray(icrs.dec.deg, dtype=np.float64)
    if not (np.all(np.isfinite(ra)) and np.all(np.isfinite(dec))):
        raise PhysicsInputError(field, "target coordinates must be finite (got NaN/inf)")
    return target


def _as_utc_datetime(value: object, field: str) -> datetime:
    if not isinstance(value, datetime):
        raise PhysicsInputError(field, f"a timezone-aware datetime is required, got {value!r}")
    if value.tzinfo is None or value.utcoffset() is None:
        raise PhysicsInputError(field, "naive datetime refused: give a timezone (UTC)")
    moment = value.astimezone(UTC)
    if not FIRST_YEAR <= moment.year <= LAST_YEAR:
        raise PhysicsInputError(
            field, f"year {moment.year} outside the supported {FIRST_YEAR}-{LAST_YEAR}"
        )
    return moment


def utc_time(value: datetime | Sequence[datetime], field: str = "time") -> Time:
    """astropy UTC Time from timezone-aware datetime(s), exact to the microsecond."""
    configure_offline()
    if isinstance(value, datetime):
        return Time(_as_utc_datetime(value, field).replace(tzinfo=None), scale="utc")
    moments = [_as_utc_datetime(item, field).replace(tzinfo=None) for item in value]
    if not moments:
        raise PhysicsInputError(field, "at least one time is required")
    return Time(moments, scale="utc")


def time_from_unix_s(unix_s: ArrayLike, field: str = "unix_s") -> Time:
    """astropy UTC Time from POSIX seconds (leap seconds ignored, as datetime.timestamp())."""
    values = np.asarray(unix_s, dtype=np.float64)
    if not np.all(np.isfinite(values)):
        raise PhysicsInputError(field, "times must be finite")
    if values.size and (values.min() < _FIRST_UNIX_S or values.max() >= _END_UNIX_S):
        raise PhysicsInputError(field, f"times outside the supported {FIRST_YEAR}-{LAST_YEAR}")
    configure_offline()
    return Time(values, format="unix", scale="utc")


def unix_s_from_time(time: Time) -> NDArray[np.float64]:
    """POSIX seconds (float64) of an astropy Time."""
    return np.asarray(time.utc.unix, dtype=np.float64)


def utc_datetime(unix_s: float) -> datetime:
    """Timezone-aware UTC datetime from POSIX seconds."""
    return datetime.fromtimestamp(float(unix_s), tz=UTC)


def site_distance_km(loc_a: EarthLocation, loc_b: EarthLocation) -> float:
    """Straight-line (chord) distance between two sites in km."""
    a = np.array([loc_a.x.to_value(u.m), loc_a.y.to_value(u.m), loc_a.z.to_value(u.m)])
    b = np.array([loc_b.x.to_value(u.m), loc_b.y.to_value(u.m), loc_b.z.to_value(u.m)])
    return float(np.linalg.norm(a - b) / 1000.0)


def location_key(location: EarthLocation) -> tuple[float, float, float]:
    """Hashable identity of a site: geocentric x, y, z rounded to 1 mm."""
    return (
        round(float(location.x.to_value(u.m)), 3),
        round(float(location.y.to_value(u.m)), 3),
        round(float(location.z.to_value(u.m)), 3),
    )


def target_key(target: SkyCoord) -> tuple[object, ...]:
    """Hashable identity of a target: ICRS direction, distance, proper motion and epoch."""
    icrs = target.icrs
    data = icrs.data
    key: list[object] = [round(float(icrs.ra.deg), 12), round(float(icrs.dec.deg), 12)]
    distance = getattr(data, "distance", None)
    if distance is not None and distance.unit.physical_type == "length":
        key.append(float(distance.to_value(u.pc)))
    differential = data.differentials.get("s")
    if differential is not None:
        key.append(float(icrs.pm_ra_cosdec.to_value(u.mas / u.yr)))
        key.append(float(icrs.pm_dec.to_value(u.mas / u.yr)))
    obstime = getattr(target, "obstime", None)
    if obstime is not None:
        key.append(float(obstime.tt.jd1) + float(obstime.tt.jd2))
    return tuple(key)
