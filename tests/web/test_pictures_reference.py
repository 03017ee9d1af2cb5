"""The numbers behind the pictures, against an independent library: skyfield with
skyfield-data's DE421 (tests/physics/skyfield_reference.py), no downloads.

Elevation: skyfield's apparent alt/az without refraction, as astropy's AltAz at pressure 0.
Earth's drift at each linked hit: f_bary · dzb/dt from skyfield's barycentric site velocity.
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import pytest

from confirm_service.demo import SITES, TARGETS
from confirm_service.services import observing_views
from confirm_service.web import plots
from tests.physics.skyfield_reference import SkyfieldReference
from tests.services.test_candidate_flow import post_scenario

ELEVATION_TOLERANCE_DEG = 0.01
"""Both apparent, unrefracted; they differ by arc-seconds (nutation and polar-motion models)."""
DRIFT_TOLERANCE_HZ_S = 2e-4
"""The tracks are interpolants of astropy's correction and skyfield uses DE421: parts in 1e3."""


@pytest.fixture(scope="module")
def skyfield() -> SkyfieldReference:
    return SkyfieldReference()


def test_elevation_at_every_site_matches_skyfield(client, auth, db, skyfield):
    post_scenario(client, auth)
    start = datetime(2026, 11, 20, 0, 0, tzinfo=UTC)
    target = TARGETS[0]
    with db.read() as session:
        tracks = observing_views.elevation_tracks(session, target["name"], start, hours=48.0)
    assert [t.site for t in tracks] == [s["code"] for s in SITES]
    from skyfield.api import Star

    star = Star(ra_hours=target["ra_deg"] / 15.0, dec_degrees=target["dec_deg"])
    for track, site in zip(tracks, SITES, strict=True):
        picks = track.unix_s[::36]  # every 6 hours
        moments = [datetime.fromtimestamp(s, UTC) for s in picks]
        observer = skyfield.observer(
            site["latitude_deg"], site["longitude_deg"], site["elevation_m"]
        )
        altitude, _, _ = observer.at(skyfield.times(moments)).observe(star).apparent().altaz()
        ours = track.elevation_deg[::36]
        assert np.max(np.abs(ours - altitude.degrees)) < ELEVATION_TOLERANCE_DEG, site["code"]
        for window_start, window_end, _peak in track.windows:  # windows lie above the limit
            inside = (track.unix_s > window_start.timestamp() + 600) & (
                track.unix_s < window_end.timestamp() - 600
            )
            assert np.all(track.elevation_deg[inside] >= site["min_elevation_deg"])
    svg = plots.elevation_at_sites(target["name"], tracks)
    assert svg.count("Elevation (deg)") == len(SITES)


def test_earth_drift_at_each_hit_matches_skyfield(client, auth, db, skyfield):
    review = next(c for c in post_scenario(client, auth) if c["stage"] == "review")
    target = TARGETS[0]
    with db.read() as session:
        data = observing_views.candidate_tracks(session, review["id"])
    assert {h.detection_id for h in data.hits} == {d["id"] for d in review["detections"]}
    sites = {s["code"]: s for s in SITES}
    for hit in data.hits:
        site = sites[hit.site]
        moment = skyfield.times([datetime.fromtimestamp(hit.unix_s, UTC)])
        expected = skyfield.earth_drift_hz_s(
            (site["latitude_deg"], site["longitude_deg"], site["elevation_m"]),
            target["ra_deg"],
            target["dec_deg"],
            moment,
            review["barycentric_frequency_hz"],
        )[0]
        assert hit.earth_drift_hz_s == pytest.approx(expected, abs=DRIFT_TOLERANCE_HZ_S)
        # the demo's transmitter is sky-fixed: each hit sits on its site's track within 3 sigma
        assert abs(hit.frequency_hz - hit.predicted_frequency_hz) <= 3 * hit.frequency_sigma_hz
    svg = plots.frequency_against_time(data)
    for label in ("Time (UTC)", "Modified Julian Date (UTC)", "±3σ band", "PRA: predicted"):
        assert label in svg
