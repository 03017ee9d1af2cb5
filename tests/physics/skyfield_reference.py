"""Independent reference: skyfield with skyfield-data's JPL DE421 ephemeris, no downloads.

The barycentric Doppler factor is built from skyfield's barycentric velocity of the site,
following the definition of Wright & Eastman (2014, eq. 28) that astropy documents:
zb = gamma * (1 + beta . n) / (1 + phi / c^2), with phi the (negative) Newtonian potential of
Sun, Jupiter, Moon at the geocentre and of the Earth at the site.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from datetime import datetime
from functools import cached_property

import numpy as np

C_M_S = 299_792_458.0  # SI definition of the metre
# Nominal values of IAU 2015 Resolution B3 (m^3/s^2)
GM_SUN = 1.3271244e20
GM_EARTH = 3.986004e14
GM_JUPITER = 1.2668653e17
GM_MOON = 4.9028e12  # from memory: DE430 lunar GM, 4902.80 km^3/s^2


def unit_vector(ra_deg: float, dec_deg: float) -> np.ndarray:
    ra, dec = np.radians(ra_deg), np.radians(dec_deg)
    return np.array([np.cos(dec) * np.cos(ra), np.cos(dec) * np.sin(ra), np.sin(dec)])


class SkyfieldReference:
    """skyfield's DE421 ephemeris and builtin timescale (files shipped with the packages)."""

    @cached_property
    def _loader(self):
        from skyfield.api import Loader

        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # skyfield-data's finals file age
            import skyfield_data

            return Loader(skyfield_data.get_skyfield_data_path(), verbose=False)

    @cached_property
    def ephemeris(self):
        return self._loader("de421.bsp")

    @cached_property
    def timescale(self):
        return self._loader.timescale(builtin=True)

    def times(self, moments: Sequence[datetime]):
        return self.timescale.from_datetimes(list(moments))

    def shifted(self, t, seconds: float):
        return self.timescale.tt_jd(t.tt + seconds / 86_400.0)

    def observer(self, lat_deg: float, lon_deg: float, elevation_m: float):
        from skyfield.api import wgs84

        return self.ephemeris["earth"] + wgs84.latlon(lat_deg, lon_deg, elevation_m=elevation_m)

    def doppler_factor(self, site: tuple[float, float, float], ra_deg, dec_deg, t) -> np.ndarray:
        """zb = f_site / f_bary for a constant-frequency source in direction (ra, dec)."""
        state = self.observer(*site).at(t)
        beta = state.velocity.m_per_s / C_M_S
        gamma = 1.0 / np.sqrt(1.0 - np.sum(beta**2, axis=0))
        n = unit_vector(ra_deg, dec_deg)
        geocentre = self.ephemeris["earth"].at(t).position.m
        potential = -GM_EARTH / np.linalg.norm(state.position.m - geocentre, axis=0)
        for name, gm in (("sun", GM_SUN), ("jupiter barycenter", GM_JUPITER), ("moon", GM_MOON)):
            body = self.ephemeris[name].at(t).position.m
            potential = potential - gm / np.linalg.norm(body - geocentre, axis=0)
        return gamma * (1.0 + np.einsum("i,i...->...", n, beta)) / (1.0 + potential / C_M_S**2)

    def radial_velocity_m_s(self, site, ra_deg, dec_deg, t) -> np.ndarray:
        return (self.doppler_factor(site, ra_deg, dec_deg, t) - 1.0) * C_M_S

    def earth_drift_hz_s(self, site, ra_deg, dec_deg, t, barycentric_frequency_hz, step_s=60.0):
        """f_bary * d zb/dt, five-point central difference with ``step_s`` (truncation below
        1e-12 m/s^2 for Earth rotation, omega^5 R step^4 / 30)."""
        weights = {-2: 1.0, -1: -8.0, 1: 8.0, 2: -1.0}
        slope = sum(
            w * self.doppler_factor(site, ra_deg, dec_deg, self.shifted(t, k * step_s))
            for k, w in weights.items()
        ) / (12.0 * step_s)
        return barycentric_frequency_hz * slope
