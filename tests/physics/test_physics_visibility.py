"""Visibility windows against skyfield's rising/setting search (independent code, DE421)."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from skyfield import almanac
from skyfield.api import Star

from confirm_service.physics import (
    altaz,
    next_windows,
    site_location,
    sun_separation_deg,
    target_coord,
    utc_time,
    visibility_windows,
)

START = datetime(2025, 9, 1, tzinfo=UTC)
# Requirement: edges within 60 s of skyfield. Held here: 1 s (edges are bisected to 0.1 s; the
# two libraries' apparent places differ by milliarcseconds).
EDGE_TOLERANCE_S = 1.0

CASES = [
    ((40.0, -105.0, 1600.0), (83.6, 22.0), 15.0),
    ((-33.0, 150.0, 500.0), (250.0, -60.0), 30.0),
    ((0.0, 0.0, 0.0), (10.0, 5.0), 0.0),
]


def _skyfield_edges(skyfield_ref, site, ra, dec, min_el, start, end):
    observer = skyfield_ref.observer(*site)
    star = Star(ra_hours=ra / 15.0, dec_degrees=dec)
    t0, t1 = skyfield_ref.times([start, end])
    rises, rose = almanac.find_risings(observer, star, t0, t1, horizon_degrees=min_el)
    sets, did_set = almanac.find_settings(observer, star, t0, t1, horizon_degrees=min_el)
    return (
        [t.utc_datetime() for t, ok in zip(rises, rose, strict=True) if ok],
        [t.utc_datetime() for t, ok in zip(sets, did_set, strict=True) if ok],
        observer,
        star,
    )


@pytest.mark.parametrize(("site", "radec", "min_el"), CASES)
def test_windows_match_skyfield_risings_and_settings(skyfield_ref, site, radec, min_el):
    # Source: skyfield.almanac.find_risings / find_settings with horizon at min elevation.
    end = START + timedelta(days=3)
    windows = visibility_windows(
        site_location(*site),
        target_coord(*radec),
        START,
        end,
        min_elevation_deg=min_el,
        sun_avoidance_deg=0.0,
    )
    rises, sets, observer, star = _skyfield_edges(skyfield_ref, site, *radec, min_el, START, end)
    ours_rise = [w.start for w in windows if not w.starts_at_search_start]
    ours_set = [w.end for w in windows if not w.ends_at_search_end]
    assert len(ours_rise) == len(rises) and len(ours_set) == len(sets)
    for mine, theirs in zip(ours_rise + ours_set, rises + sets, strict=True):
        assert abs((mine - theirs).total_seconds()) <= EDGE_TOLERANCE_S

    # Peak elevation vs skyfield's altitude at meridian transit: tolerance 0.01 deg.
    transits = almanac.find_transits(observer, star, *skyfield_ref.times([START, end]))
    peak = observer.at(transits).observe(star).apparent().altaz()[0].degrees
    inside = [w for w in windows if not (w.starts_at_search_start or w.ends_at_search_end)]
    assert inside
    for window in inside:
        assert np.min(np.abs(peak - window.max_elevation_deg)) <= 0.01


def test_sun_separation_matches_skyfield(skyfield_ref):
    # Source: skyfield apparent places of Sun (DE421) and star, separation_from. Tolerance 1e-4
    # deg (0.4 arcsec).
    site, (ra, dec) = (52.0, 10.0, 100.0), (150.0, 12.0)
    moments = [START + timedelta(hours=7 * k) for k in range(12)]
    ours = sun_separation_deg(site_location(*site), target_coord(ra, dec), utc_time(moments))
    at = skyfield_ref.observer(*site).at(skyfield_ref.times(moments))
    sun = at.observe(skyfield_ref.ephemeris["sun"]).apparent()
    theirs = sun.separation_from(at.observe(Star(ra_hours=ra / 15.0, dec_degrees=dec)).apparent())
    assert np.max(np.abs(ours - theirs.degrees)) <= 1e-4


def test_altaz_matches_skyfield(skyfield_ref):
    # Source: skyfield altaz() without refraction. Tolerance 5e-4 deg (1.8 arcsec): skyfield
    # leaves out polar motion unless given a table (about 0.3 arcsec here), astropy applies it.
    site, (ra, dec) = (-33.0, 150.0, 500.0), (250.0, -60.0)
    moments = [START + timedelta(minutes=97 * k) for k in range(15)]
    alt, az = altaz(site_location(*site), target_coord(ra, dec), utc_time(moments))
    at = skyfield_ref.observer(*site).at(skyfield_ref.times(moments))
    s_alt, s_az, _ = at.observe(Star(ra_hours=ra / 15.0, dec_degrees=dec)).apparent().altaz()
    assert np.max(np.abs(alt - s_alt.degrees)) <= 5e-4
    assert np.max(np.abs((az - s_az.degrees + 180.0) % 360.0 - 180.0)) <= 2e-3


@pytest.mark.parametrize("ra", [135.0, 195.0])
def test_sun_avoidance_edges_sit_where_skyfield_separation_crosses(skyfield_ref, ra):
    # The Sun's RA is about 160 deg on 2025-09-01 and grows about 1 deg/day (from memory):
    # RA 135 moves out of, RA 195 into, a 30 deg avoidance zone within 12 days. Sun-limited
    # edges must sit where skyfield's separation equals 30 deg: tolerance 0.01 deg.
    site, dec = (0.0, 0.0, 0.0), 0.0
    location, target = site_location(*site), target_coord(ra, dec)
    windows = visibility_windows(
        location,
        target,
        START,
        START + timedelta(days=12),
        min_elevation_deg=-90.0,
        sun_avoidance_deg=30.0,
    )
    edges = [w.start for w in windows if not w.starts_at_search_start]
    edges += [w.end for w in windows if not w.ends_at_search_end]
    assert len(edges) == 1
    at = skyfield_ref.observer(*site).at(skyfield_ref.times(edges))
    sun = at.observe(skyfield_ref.ephemeris["sun"]).apparent()
    theirs = sun.separation_from(at.observe(Star(ra_hours=ra / 15.0, dec_degrees=dec)).apparent())
    assert np.max(np.abs(theirs.degrees - 30.0)) <= 0.01


def test_circumpolar_target_is_one_window_cut_at_both_ends():
    windows = visibility_windows(
        site_location(70.0, 25.0, 0.0),
        target_coord(0.0, 85.0),
        START,
        START + timedelta(days=1),
        min_elevation_deg=20.0,
        sun_avoidance_deg=0.0,
    )
    assert len(windows) == 1
    only = windows[0]
    assert only.starts_at_search_start and only.ends_at_search_end
    assert only.duration_s == 86_400.0
    # Upper culmination at latitude 70 is 90 - (dec_of_date - 70). Precession in declination is
    # 20.04 arcsec/yr * cos(RA) (handbook value, from memory): 25.67 yr after J2000 dec 85
    # becomes 85.143. Tolerance 0.02 deg (nutation 0.003 deg, annual aberration 0.006 deg).
    dec_of_date = 85.0 + 20.04 / 3600.0 * 25.67
    assert abs(only.max_elevation_deg - (90.0 - (dec_of_date - 70.0))) <= 0.02


def test_next_windows_gives_count_windows_per_site():
    sites = [
        ("ALPHA", site_location(40.0, -105.0, 1600.0), 15.0, 10.0),
        ("BRAVO", site_location(-33.0, 150.0, 500.0), 20.0, 10.0),
    ]
    found = next_windows(sites, target_coord(83.6, 22.0), START, 3)
    assert set(found) == {"ALPHA", "BRAVO"}
    for windows in found.values():
        assert len(windows) == 3
        assert all(w.start >= START and w.end > w.start for w in windows)
        assert all(a.end <= b.start for a, b in zip(windows, windows[1:], strict=False))
