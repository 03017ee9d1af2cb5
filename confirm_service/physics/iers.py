"""Offline Earth-orientation data (IERS tables) and the solar-system ephemeris.

Everything runs offline: astropy reads the IERS tables and the leap-second list that ship with
astropy-iers-data and never downloads. Times outside those tables are still computed, with one
PhysicsAccuracyWarning per process that states the degraded accuracy (astropy's own per-call
range warnings are silenced in favour of it).
"""

from __future__ import annotations

import functools
import os
import threading
import warnings
from dataclasses import dataclass

import numpy as np
from astropy.coordinates import solar_system_ephemeris
from astropy.time import Time
from astropy.utils import iers
from astropy.utils.data import conf as data_conf
from astropy.utils.exceptions import AstropyWarning
from erfa import ErfaWarning

from .errors import PhysicsAccuracyWarning, PhysicsInputError

__all__ = [
    "IersCoverage",
    "PhysicsAccuracyWarning",
    "check_time_coverage",
    "configure_offline",
    "current_ephemeris",
    "default_jpl_ephemeris_path",
    "ephemeris_generation",
    "iers_coverage",
    "reset_accuracy_warning",
    "set_ephemeris",
]

# astropy's per-call warnings for times outside its tables; replaced by one PhysicsAccuracyWarning.
_REPLACED_WARNINGS: tuple[tuple[str, type[Warning]], ...] = (
    (r'ERFA function "\w+" yielded \d+ of "dubious year', ErfaWarning),
    (r'ERFA function "epv00" yielded \d+ of "warning: date outside', ErfaWarning),
    (r"Tried to get polar motions for times (after|before) IERS data is valid", AstropyWarning),
)

_lock = threading.Lock()
_accuracy_warning_issued = False
_ephemeris_generation = 0
_ephemeris_name = "builtin"


def configure_offline() -> None:
    """Switch astropy to offline IERS/leap-second data and install the warning filters.

    Idempotent and cheap; every physics entry point calls it, so it also survives code (or test
    runners) that reset the warning filters.
    """
    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    data_conf.allow_internet = False
    _install_warning_filters()


def _install_warning_filters() -> None:
    installed = {(f[1].pattern if f[1] is not None else None, f[2]) for f in warnings.filters}
    for pattern, category in _REPLACED_WARNINGS:
        if (pattern, category) not in installed:
            warnings.filterwarnings("ignore", message=pattern, category=category)


@dataclass(frozen=True)
class IersCoverage:
    """Span (MJD, UTC) where astropy's offline tables give full accuracy."""

    first_mjd: float
    last_mjd: float
    leap_seconds_expire_mjd: float

    def describe(self) -> str:
        def iso(mjd: float) -> str:
            return str(Time(mjd, format="mjd", scale="utc").strftime("%Y-%m-%d"))

        return (
            f"Earth-orientation tables {iso(self.first_mjd)} to {iso(self.last_mjd)}, "
            f"leap seconds known until {iso(self.leap_seconds_expire_mjd)}"
        )


@functools.cache
def iers_coverage() -> IersCoverage:
    """The span covered by the IERS tables and leap-second list of astropy-iers-data."""
    configure_offline()
    table = iers.earth_orientation_table.get()
    mjd = np.asarray(table["MJD"].to_value("d") if hasattr(table["MJD"], "unit") else table["MJD"])
    expires = iers.LeapSeconds.auto_open().expires
    return IersCoverage(
        first_mjd=float(mjd[0]),
        last_mjd=float(mjd[-1]),
        leap_seconds_expire_mjd=float(expires.mjd),  # the list gives a date; scale immaterial
    )


def check_time_coverage(times: Time) -> bool:
    """True if all ``times`` lie inside the IERS tables; otherwise warn (once), return False."""
    configure_offline()
    mjd = np.atleast_1d(times.utc.mjd if times.scale != "utc" else times.mjd)
    if mjd.size == 0:
        return True
    coverage = iers_coverage()
    low, high = float(np.nanmin(mjd)), float(np.nanmax(mjd))
    inside = (
        low >= coverage.first_mjd
        and high <= coverage.last_mjd
        and high <= coverage.leap_seconds_expire_mjd
    )
    if not inside:
        _warn_degraded_accuracy_once(coverage)
    return inside


def _warn_degraded_accuracy_once(coverage: IersCoverage) -> None:
    global _accuracy_warning_issued
    with _lock:
        if _accuracy_warning_issued:
            return
        _accuracy_warning_issued = True
    warnings.warn(
        "Times outside the offline IERS data (" + coverage.describe() + "). "
        "Computed with UT1-UTC held at its last tabulated value, mean polar motion and no "
        "unannounced leap seconds: degraded accuracy. Each second of UT1 error shifts the "
        "rotational radial velocity by up to 0.034 m/s (0.16 Hz at 1.42 GHz), the Earth drift "
        "by up to 1.2e-5 Hz/s at 1.42 GHz and sky positions by up to 15 arcsec; decades ahead "
        "UT1 may be off by tens of seconds. Update astropy-iers-data to restore full accuracy.",
        PhysicsAccuracyWarning,
        stacklevel=3,
    )


def reset_accuracy_warning() -> None:
    """Allow the degraded-accuracy warning to be issued again (for tests)."""
    global _accuracy_warning_issued
    with _lock:
        _accuracy_warning_issued = False


def set_ephemeris(path: str | os.PathLike[str] | None) -> None:
    """Use a JPL ephemeris file (``.bsp``, e.g. skyfield-data's de421.bsp) instead of astropy's
    builtin one; ``None`` returns to the builtin ephemeris. Needs the jplephem package."""
    global _ephemeris_generation, _ephemeris_name
    configure_offline()
    if path is None:
        solar_system_ephemeris.set("builtin")
        name = "builtin"
    else:
        name = os.fspath(path)
        if not os.path.isfile(name):
            raise PhysicsInputError("path", f"no ephemeris file at {name!r}")
        try:
            import jplephem  # noqa: F401
        except ImportError as exc:  # pragma: no cover - jplephem ships with skyfield
            raise RuntimeError("reading a JPL ephemeris needs the jplephem package") from exc
        solar_system_ephemeris.set(name)
    with _lock:
        _ephemeris_generation += 1
        _ephemeris_name = name


def current_ephemeris() -> str:
    """``"builtin"`` or the path of the JPL ephemeris in use."""
    return _ephemeris_name


def ephemeris_generation() -> int:
    """Counter bumped by every set_ephemeris call (caches use it to drop stale tracks)."""
    return _ephemeris_generation


def default_jpl_ephemeris_path() -> str | None:
    """Path of de421.bsp from skyfield-data when that package is installed, else None."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # its bundled finals file may be old
            import skyfield_data

            path = os.path.join(skyfield_data.get_skyfield_data_path(), "de421.bsp")
    except ImportError:
        return None
    return path if os.path.isfile(path) else None
