"""Proper motion runs from the target's catalogue epoch (J2000.0 when none is given) to the time
of each observation, checked against skyfield's ``Star`` (independent: its own linear space
motion, DE421 for the Solar System barycentre)."""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
from astropy.time import Time

from confirm_service.physics import radial_velocity_m_s, site_location, target_coord, utc_time

# An invented fast-moving nearby star, so that a wrong epoch shows: 5 arcsec/yr in declination
# moves it 80 arcsec between J2000 and 2016 (about 11 m/s of radial-velocity correction).
STAR = {"ra_deg": 201.365, "dec_deg": -4.42, "pm_ra_mas_yr": -1200.0, "pm_dec_mas_yr": 5000.0}
PARALLAX_MAS = 20.0
CATALOGUE_EPOCH = datetime(2016, 1, 1, tzinfo=UTC)
OBSERVED = [datetime(2026, 11, 20, 3, 0, tzinfo=UTC), datetime(2026, 11, 21, 9, 0, tzinfo=UTC)]
SITE = (38.52, -107.31, 2410.0)  # invented site


def skyfield_star(skyfield_ref, epoch: datetime | None):
    from skyfield.api import Star

    # skyfield's Star takes mu_alpha* (times cos dec), as the service does; epoch as TT Julian
    # date; J2000.0 is its documented default (skyfield API reference, ``Star``).
    when = skyfield_ref.timescale.from_datetime(epoch).tt if epoch else 2451545.0
    return Star(
        ra_hours=STAR["ra_deg"] / 15.0,
        dec_degrees=STAR["dec_deg"],
        ra_mas_per_year=STAR["pm_ra_mas_yr"],
        dec_mas_per_year=STAR["pm_dec_mas_yr"],
        parallax_mas=PARALLAX_MAS,
        epoch=when,
    )


def skyfield_direction_deg(skyfield_ref, star, moment: datetime) -> tuple[float, float]:
    """Astrometric (ICRS) direction of ``star`` seen from the geocentre at ``moment``."""
    t = skyfield_ref.times([moment])
    ra, dec, _ = skyfield_ref.ephemeris["earth"].at(t).observe(star).radec()
    return float(ra._degrees[0]), float(dec.degrees[0])


def astropy_direction_deg(coord, moment: datetime) -> tuple[float, float]:
    """The same from astropy: the star moved to ``moment``, seen from the Earth's centre."""
    from astropy.coordinates import (
        CartesianRepresentation,
        SphericalRepresentation,
        get_body_barycentric,
    )

    moved = coord.apply_space_motion(new_obstime=Time(moment))
    earth = get_body_barycentric("earth", Time(moment))
    seen = CartesianRepresentation(moved.cartesian.xyz - earth.xyz)
    spherical = seen.represent_as(SphericalRepresentation)
    return float(spherical.lon.deg), float(spherical.lat.deg)


def ours(epoch: datetime | None):
    return target_coord(**STAR, parallax_mas=PARALLAX_MAS, epoch=epoch)


def test_position_moves_from_the_catalogue_epoch_like_skyfield(skyfield_ref):
    for epoch in (CATALOGUE_EPOCH, None):  # None: J2000.0
        star = skyfield_star(skyfield_ref, epoch)
        for moment in OBSERVED:
            our_ra, our_dec = astropy_direction_deg(ours(epoch), moment)
            ra, dec = skyfield_direction_deg(skyfield_ref, star, moment)
            offset_mas = np.hypot((our_ra - ra) * np.cos(np.radians(dec)), our_dec - dec) * 3.6e6
            # linear space motion on both sides; 1 mas is far below what Doppler terms feel
            assert offset_mas < 1.0, (epoch, moment, offset_mas)


def test_doppler_correction_uses_the_motion_since_the_catalogue_epoch(skyfield_ref):
    # Source: skyfield + DE421, the observer's barycentric velocity onto skyfield's direction of
    # the star moved from its catalogue epoch (Wright & Eastman 2014 zb, skyfield_reference.py).
    # The demo's star (modest motion): within 0.01 m/s (0.05 Hz at 1.42 GHz).
    demo = {"ra_deg": 201.365, "dec_deg": -4.42, "pm_ra_mas_yr": -12.5, "pm_dec_mas_yr": 4.1}
    location = site_location(*SITE)
    coord = target_coord(**demo, parallax_mas=38.2, epoch=CATALOGUE_EPOCH)
    computed = radial_velocity_m_s(location, coord, utc_time(OBSERVED))
    from skyfield.api import Star

    star = Star(
        ra_hours=demo["ra_deg"] / 15.0,
        dec_degrees=demo["dec_deg"],
        ra_mas_per_year=demo["pm_ra_mas_yr"],
        dec_mas_per_year=demo["pm_dec_mas_yr"],
        parallax_mas=38.2,
        epoch=skyfield_ref.timescale.from_datetime(CATALOGUE_EPOCH).tt,
    )
    for value, moment in zip(computed, OBSERVED, strict=True):
        ra, dec = skyfield_direction_deg(skyfield_ref, star, moment)
        t = skyfield_ref.times([moment])
        theirs = float(skyfield_ref.radial_velocity_m_s(SITE, ra, dec, t)[0])
        assert abs(value - theirs) <= 0.01, (moment, value - theirs)
