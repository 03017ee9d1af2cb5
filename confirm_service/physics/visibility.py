"""When a target is observable from a site: above an elevation limit and away from the Sun.

Elevations are geometric apparent (astropy AltAz with pressure 0: aberration included, no
refraction). Method: astropy alt/az at knots every 10 min and Sun separation every hour, cubic
splines between them (interpolation error below 0.1 arcsec away from the zenith), the combined
condition on a ``step_s`` grid, window edges refined by bisection to below 0.1 s and the peak
elevation re-evaluated with astropy around the spline's maximum. Windows shorter than about
``step_s`` may be missed.

Telescope safety limits (Sun avoidance, wind, slew limits) belong to the site; these windows are
geometry only.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timedelta

import astropy.units as u
import numpy as np
from astropy.coordinates import AltAz, EarthLocation, SkyCoord, get_sun
from astropy.time import Time
from numpy.typing import ArrayLike, NDArray
from scipy.interpolate import CubicSpline

from .errors import PhysicsInputError
from .frames import require_finite_target, time_from_unix_s, utc_datetime, utc_time
from .iers import check_time_coverage

__all__ = [
    "VisibilityWindow",
    "altaz",
    "max_elevation_deg",
    "next_windows",
    "sun_separation_deg",
    "visibility_windows",
]

_ALTITUDE_KNOT_S = 600.0
_SUN_KNOT_S = 3600.0
_PAD_KNOTS = 3
_EDGE_TOLERANCE_S = 0.1
_PEAK_SAMPLE_S = 2.0
_MAX_SPAN_DAYS = 400.0


@dataclass(frozen=True)
class VisibilityWindow:
    """A span when the target is above the elevation limit and far enough from the Sun.

    ``starts_at_search_start`` / ``ends_at_search_end`` mark windows cut by the searched period.
    """

    start: datetime
    end: datetime
    max_elevation_deg: float
    starts_at_search_start: bool = False
    ends_at_search_end: bool = False

    @property
    def duration_s(self) -> float:
        return (self.end - self.start).total_seconds()


def _direction(target: SkyCoord) -> SkyCoord:
    """ICRS direction only (parallax and proper motion are far below what visibility needs)."""
    icrs = require_finite_target(target).icrs
    return SkyCoord(ra=icrs.ra, dec=icrs.dec, frame="icrs")


def _frame(location: EarthLocation, times: Time) -> AltAz:
    return AltAz(obstime=times, location=location, pressure=0.0 * u.hPa)


def altaz(
    location: EarthLocation, target: SkyCoord, times: Time
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Elevation and azimuth (deg, azimuth east of north) of the target, without refraction."""
    check_time_coverage(times)
    seen = _direction(target).transform_to(_frame(location, times))
    return (
        np.asarray(seen.alt.deg, dtype=np.float64),
        np.asarray(seen.az.deg, dtype=np.float64),
    )


SPAN_SAMPLE_S = 300.0
"""Largest spacing (s) of the elevation samples over a span in :func:`max_elevation_deg`."""


def max_elevation_deg(
    location: EarthLocation, target: SkyCoord, start_unix_s: float, duration_s: float
) -> float:
    """Highest elevation (deg, no refraction) of the target during [start, start + duration]:
    astropy alt/az at both ends and every SPAN_SAMPLE_S at most in between (a target's elevation
    changes by at most 15 deg/h, so the sampled maximum is within 1.25 deg of the true one)."""
    span = max(float(duration_s), 0.0)
    count = int(math.ceil(span / SPAN_SAMPLE_S)) + 1
    times = np.linspace(float(start_unix_s), float(start_unix_s) + span, max(count, 2))
    elevation, _ = altaz(location, target, time_from_unix_s(times))
    return float(np.max(elevation))


def _separation_deg(
    alt1: ArrayLike, az1: ArrayLike, alt2: ArrayLike, az2: ArrayLike
) -> NDArray[np.float64]:
    """Great-circle angle (deg) between two alt/az directions (Vincenty form, stable)."""
    a1, z1, a2, z2 = (np.radians(np.asarray(x, dtype=np.float64)) for x in (alt1, az1, alt2, az2))
    dz = z2 - z1
    num = np.hypot(
        np.cos(a2) * np.sin(dz), np.cos(a1) * np.sin(a2) - np.sin(a1) * np.cos(a2) * np.cos(dz)
    )
    den = np.sin(a1) * np.sin(a2) + np.cos(a1) * np.cos(a2) * np.cos(dz)
    return np.asarray(np.degrees(np.arctan2(num, den)), dtype=np.float64)


def sun_separation_deg(
    location: EarthLocation, target: SkyCoord, times: Time
) -> NDArray[np.float64]:
    """Angle (deg) between the target and the Sun as seen from the site."""
    check_time_coverage(times)
    frame = _frame(location, times)
    star = _direction(target).transform_to(frame)
    sun = get_sun(times).transform_to(frame)
    return _separation_deg(star.alt.deg, star.az.deg, sun.alt.deg, sun.az.deg)


def _knots(start_unix_s: float, end_unix_s: float, spacing_s: float) -> NDArray[np.float64]:
    first = math.floor(start_unix_s / spacing_s) - _PAD_KNOTS
    last = math.ceil(end_unix_s / spacing_s) + _PAD_KNOTS
    return np.arange(first, last + 1, dtype=np.float64) * spacing_s


@dataclass(frozen=True)
class _Sky:
    """Splines of elevation (deg) and Sun separation (deg) over POSIX seconds."""

    elevation: CubicSpline
    sun_separation: CubicSpline

    @classmethod
    def build(
        cls, location: EarthLocation, target: SkyCoord, start_unix_s: float, end_unix_s: float
    ) -> _Sky:
        alt_knots = _knots(start_unix_s, end_unix_s, _ALTITUDE_KNOT_S)
        sun_knots = _knots(start_unix_s, end_unix_s, _SUN_KNOT_S)
        elevation, _ = altaz(location, target, time_from_unix_s(alt_knots))
        separation = sun_separation_deg(location, target, time_from_unix_s(sun_knots))
        return cls(CubicSpline(alt_knots, elevation), CubicSpline(sun_knots, separation))

    def observable(
        self, unix_s: NDArray[np.float64], min_elevation_deg: float, sun_avoidance_deg: float
    ) -> NDArray[np.bool_]:
        high = np.asarray(self.elevation(unix_s)) > min_elevation_deg
        clear_of_sun = np.asarray(self.sun_separation(unix_s)) > sun_avoidance_deg
        return high & clear_of_sun


def _refine_edges(
    sky: _Sky,
    low: NDArray[np.float64],
    high: NDArray[np.float64],
    min_elevation_deg: float,
    sun_avoidance_deg: float,
) -> NDArray[np.float64]:
    """Bisect each [low, high] where the condition changes; returns the change times."""
    low, high = low.astype(np.float64).copy(), high.astype(np.float64).copy()
    state_low = sky.observable(low, min_elevation_deg, sun_avoidance_deg)
    while low.size and np.max(high - low) > _EDGE_TOLERANCE_S:
        middle = 0.5 * (low + high)
        same = sky.observable(middle, min_elevation_deg, sun_avoidance_deg) == state_low
        low = np.where(same, middle, low)
        high = np.where(same, high, middle)
    return 0.5 * (low + high)


def _check_limits(min_elevation_deg: float, sun_avoidance_deg: float, step_s: float) -> None:
    if not (math.isfinite(min_elevation_deg) and -90.0 <= min_elevation_deg <= 90.0):
        raise PhysicsInputError("min_elevation_deg", "must lie within -90..90")
    if not (math.isfinite(sun_avoidance_deg) and 0.0 <= sun_avoidance_deg <= 180.0):
        raise PhysicsInputError("sun_avoidance_deg", "must lie within 0..180")
    if not (math.isfinite(step_s) and 1.0 <= step_s <= 600.0):
        raise PhysicsInputError("step_s", "must lie within 1..600 s")


def visibility_windows(
    location: EarthLocation,
    target: SkyCoord,
    start: datetime,
    end: datetime,
    *,
    min_elevation_deg: float,
    sun_avoidance_deg: float,
    step_s: float = 60.0,
) -> list[VisibilityWindow]:
    """Windows in [start, end] with elevation > min_elevation_deg and Sun angle >
    sun_avoidance_deg, edges to 0.1 s, peak elevation to about 0.01 deg."""
    _check_limits(min_elevation_deg, sun_avoidance_deg, step_s)
    begin = float(utc_time(start, "start").unix)
    finish = float(utc_time(end, "end").unix)
    if not finish > begin:
        raise PhysicsInputError("end", "must be later than start")
    if finish - begin > _MAX_SPAN_DAYS * 86_400.0:
        raise PhysicsInputError("end", f"search spans at most {_MAX_SPAN_DAYS:.0f} days")
    direction = _direction(target)
    sky = _Sky.build(location, direction, begin, finish)
    grid = np.append(np.arange(begin, finish, step_s), finish)
    ok = sky.observable(grid, min_elevation_deg, sun_avoidance_deg)
    change = np.flatnonzero(ok[1:] != ok[:-1])
    edges = _refine_edges(sky, grid[change], grid[change + 1], min_elevation_deg, sun_avoidance_deg)
    rising = edges[ok[change + 1]]
    setting = edges[~ok[change + 1]]
    starts = np.concatenate([[begin] if ok[0] else [], rising])
    ends = np.concatenate([setting, [finish] if ok[-1] else []])
    peaks = _peak_elevations(location, direction, sky, starts, ends, step_s)
    return [
        VisibilityWindow(
            start=utc_datetime(s),
            end=utc_datetime(e),
            max_elevation_deg=float(p),
            starts_at_search_start=bool(s == begin and ok[0]),
            ends_at_search_end=bool(e == finish and ok[-1]),
        )
        for s, e, p in zip(starts, ends, peaks, strict=True)
    ]


def _peak_elevations(
    location: EarthLocation,
    target: SkyCoord,
    sky: _Sky,
    starts: NDArray[np.float64],
    ends: NDArray[np.float64],
    step_s: float,
) -> NDArray[np.float64]:
    """Highest elevation (deg) in each window: astropy around the spline's maximum."""
    if starts.size == 0:
        return np.empty(0)
    offsets = np.arange(-step_s, step_s + _PEAK_SAMPLE_S, _PEAK_SAMPLE_S)
    samples = []
    for s, e in zip(starts, ends, strict=True):
        grid = np.append(np.arange(s, e, step_s), e)
        best = grid[int(np.argmax(sky.elevation(grid)))]
        samples.append(np.concatenate([[s, e], np.clip(best + offsets, s, e)]))
    times = np.stack(samples)
    elevation, _ = altaz(location, target, time_from_unix_s(times))
    return np.asarray(elevation.max(axis=1), dtype=np.float64)


def next_windows(
    sites: Sequence[tuple[str, EarthLocation, float, float]],
    target: SkyCoord,
    start: datetime,
    count: int,
    *,
    max_search_days: float = 30.0,
    step_s: float = 60.0,
) -> dict[str, list[VisibilityWindow]]:
    """The next ``count`` windows at every site ``(code, location, min_elevation_deg,
    sun_avoidance_deg)`` from ``start``, searching at most ``max_search_days``."""
    if count < 1:
        raise PhysicsInputError("count", "must be >= 1")
    if not (math.isfinite(max_search_days) and 0.0 < max_search_days <= _MAX_SPAN_DAYS):
        raise PhysicsInputError("max_search_days", f"must lie within 0..{_MAX_SPAN_DAYS:.0f}")
    utc_time(start, "start")
    return {
        code: _next_at_site(location, target, start, count, min_el, avoid, max_search_days, step_s)
        for code, location, min_el, avoid in sites
    }


def _next_at_site(
    location: EarthLocation,
    target: SkyCoord,
    start: datetime,
    count: int,
    min_elevation_deg: float,
    sun_avoidance_deg: float,
    max_search_days: float,
    step_s: float,
) -> list[VisibilityWindow]:
    days = min(2.0, max_search_days)
    while True:
        windows = visibility_windows(
            location,
            target,
            start,
            start + timedelta(days=days),
            min_elevation_deg=min_elevation_deg,
            sun_avoidance_deg=sun_avoidance_deg,
            step_s=step_s,
        )
        complete = [w for w in windows if not w.ends_at_search_end]
        if len(complete) >= count or days >= max_search_days:
            return windows[:count]
        days = min(days * 3.0, max_search_days)
