"""Looks that saw nothing: misses only when they could have seen the signal, one per session.

References: the target's elevation from skyfield (apparent alt/az without refraction,
skyfield-data's DE421 and builtin timescale), independent of the astropy engine under test;
the radiometer equation for a narrowband signal, SNR = (F / SEFD) sqrt(n_pol t / B) (Dicke
1946; Wilson, Rohlfs and Huttemeister, Tools of Radio Astronomy; from memory).
"""

from __future__ import annotations

import math
from dataclasses import replace
from datetime import UTC, datetime

import numpy as np
import pytest

from confirm_service.protocol import build_candidate_view
from confirm_service.protocol.checks import get_check
from confirm_service.protocol.misses import session_of
from tests.physics.skyfield_reference import SkyfieldReference

from .scenarios import SCAN_S, SIDEREAL_DAY_S, SITES, report_from

SITE = {"min_distance_km": 1000.0, "max_misses": 2}
REOBS = {"min_gap_hours": 12.0, "max_misses": 2, "same_site_only": False}
BRN_LIMIT_DEG = 10.0
SAMPLING_ERROR_DEG = 0.7  # samples every 300 s; elevation moves at most 15 deg/h (Earth's turn)


@pytest.fixture(scope="module")
def skyfield_ref() -> SkyfieldReference:
    return SkyfieldReference()


def skyfield_elevation_deg(skyfield_ref, site, target, unix_s: np.ndarray) -> np.ndarray:
    """Apparent elevation without refraction, from skyfield."""
    from skyfield.api import Star

    moments = [datetime.fromtimestamp(float(t), UTC) for t in unix_s]
    at = skyfield_ref.observer(site.latitude_deg, site.longitude_deg, site.elevation_m).at(
        skyfield_ref.times(moments)
    )
    star = Star(ra_hours=target.ra_deg / 15.0, dec_degrees=target.dec_deg)
    alt, _, _ = at.observe(star).apparent().altaz()
    return np.asarray(alt.degrees)


def run(kind, facts, protocol, physics_context, **params):
    module = get_check(kind)
    view = build_candidate_view(protocol, facts, None, physics_context)
    return module.evaluate(facts, module.params_model(**params), view)


def far_site_facts(scenario):
    """The ALD scenario without its BRN scan, BRN with a 10 deg elevation limit."""
    facts = scenario.facts
    reference_site = facts.reference_observation.site
    far = next(o for o in facts.observations if o.on_source and o.site != reference_site)
    kept = tuple(o for o in facts.observations if o.id != far.id)
    return replace(facts, observations=kept), far


def brn():
    return replace(SITES["BRN"], min_elevation_deg=BRN_LIMIT_DEG)


def silent(scenario, unix_s, report_id, site=None, **fields):
    report = report_from(scenario, site or brn(), unix_s, detected=False, report_id=report_id)
    return replace(report, **fields)


def hidden_times(skyfield_ref, target, after_unix_s, count):
    """``count`` scan starts on different days when skyfield has the target below 0 deg at BRN
    for the whole scan (well under BRN's 10 deg limit)."""
    found = []
    day = after_unix_s
    while len(found) < count:
        grid = day + np.arange(0.0, 86_400.0, 1800.0)
        alt_start = skyfield_elevation_deg(skyfield_ref, SITES["BRN"], target, grid)
        alt_end = skyfield_elevation_deg(skyfield_ref, SITES["BRN"], target, grid + SCAN_S)
        low = np.flatnonzero((alt_start < -5.0) & (alt_end < -5.0))
        found.append(float(grid[low[len(low) // 2]]))
        day += 86_400.0
    return found


def test_looks_with_the_target_below_the_horizon_are_not_misses(
    injection_scenarios, default_protocol, physics_context, skyfield_ref
):
    scenario = injection_scenarios["sf-ald-dorado-0"]
    facts, far = far_site_facts(scenario)
    first, second = hidden_times(skyfield_ref, facts.target, far.start_unix_s, 2)
    reports = (silent(scenario, first, 1), silent(scenario, second, 2))
    result = run(
        "independent_site",
        replace(facts, reports=reports),
        default_protocol,
        physics_context,
        **SITE,
    )
    # Two silent looks on two nights would fail the check; with the target set, neither counts.
    assert result.outcome == "pending"
    assert result.details["missed"] == [] and result.details["missed_sessions"] == {}
    records = result.details["not_constraining"]
    assert [r["look"] for r in records] == ["report 1", "report 2"]
    for record, start in zip(records, (first, second), strict=True):
        assert record["reasons"][0].startswith("below_horizon")
        samples = start + np.linspace(0.0, SCAN_S, 31)
        truth = float(
            np.max(skyfield_elevation_deg(skyfield_ref, SITES["BRN"], facts.target, samples))
        )
        assert record["max_elevation_deg"] == pytest.approx(truth, abs=SAMPLING_ERROR_DEG)
        assert record["min_elevation_deg"] == BRN_LIMIT_DEG
    # The same two looks while the target is up (BRN's own scan time, chosen visible above 30
    # deg by the scenario) are two misses on two nights: the check fails.
    up = (
        silent(scenario, far.start_unix_s, 1),
        silent(scenario, far.start_unix_s + SIDEREAL_DAY_S, 2),
    )
    elevation = skyfield_elevation_deg(
        skyfield_ref, SITES["BRN"], facts.target, np.array([u.unix_s for u in up])
    )
    assert np.all(elevation > BRN_LIMIT_DEG)
    failed = run(
        "independent_site", replace(facts, reports=up), default_protocol, physics_context, **SITE
    )
    assert failed.outcome == "fail" and failed.measured == 2.0 and failed.unit == "sessions"
    assert failed.details["not_constraining"] == []


def test_looks_too_insensitive_for_the_signal_are_not_misses(
    injection_scenarios, default_protocol, physics_context
):
    scenario = injection_scenarios["sf-ald-dorado-0"]
    facts, far = far_site_facts(scenario)
    reference_sefd_jy = 20.0
    facts = replace(
        facts,
        reference_observation=replace(facts.reference_observation, sefd_jy=reference_sefd_jy),
    )
    snr0 = facts.reference.snr
    t0, b0 = facts.reference_observation.duration_s, facts.reference_observation.channel_width_hz
    # Radiometer equation: same flux F, n_pol the same: SNR_p / SNR_0 =
    # (SEFD_0 / SEFD_p) * sqrt((t_p / B_p) / (t_0 / B_0)); reports use the reference's B.
    duration_s = 4.0 * t0
    weak_sefd_jy = reference_sefd_jy * snr0 / 3.0  # expected SNR: 3 * sqrt(4) = 6
    expected = snr0 * (reference_sefd_jy / weak_sefd_jy) * math.sqrt((duration_s / b0) / (t0 / b0))
    assert expected == pytest.approx(6.0)
    common = {"duration_s": duration_s, "threshold_snr": 8.0}
    weak = (
        silent(scenario, far.start_unix_s, 1, sefd_jy=weak_sefd_jy, **common),
        silent(scenario, far.start_unix_s + SIDEREAL_DAY_S, 2, sefd_jy=weak_sefd_jy, **common),
    )
    result = run(
        "independent_site", replace(facts, reports=weak), default_protocol, physics_context, **SITE
    )
    assert result.outcome == "pending" and result.details["missed"] == []
    assert "2 where the expected SNR was below the look's threshold" in result.reason
    for record in result.details["not_constraining"]:
        assert record["reasons"][0].startswith("below_threshold")
        assert record["expected_snr"] == pytest.approx(expected, abs=0.01)
        assert record["threshold_snr"] == 8.0
    # The same looks with a threshold under the expected SNR are misses.
    able = tuple(replace(r, threshold_snr=5.0) for r in weak)
    failed = run(
        "independent_site", replace(facts, reports=able), default_protocol, physics_context, **SITE
    )
    assert failed.outcome == "fail" and failed.details["missed"] == ["report 1", "report 2"]
    assert all(
        m["expected_snr"] == pytest.approx(expected, abs=0.01) for m in failed.details["misses"]
    )
    # Without the reference's SEFD nothing shows the look was too weak: it counts, and says so.
    unknown = replace(
        facts, reference_observation=replace(facts.reference_observation, sefd_jy=None)
    )
    counted = run(
        "independent_site",
        replace(unknown, reports=weak),
        default_protocol,
        physics_context,
        **SITE,
    )
    assert counted.outcome == "fail"
    assert {m["sensitivity"] for m in counted.details["misses"]} == {"sensitivity not stated"}


def test_misses_count_once_per_site_and_night(
    injection_scenarios, default_protocol, physics_context
):
    scenario = injection_scenarios["sf-ald-dorado-0"]
    facts, far = far_site_facts(scenario)
    # Three silent looks within 20 minutes while the target is up (the scenario keeps it above
    # 30 deg for 40 minutes from far.start): one session.
    same_night = tuple(silent(scenario, far.start_unix_s + 600.0 * k, k + 1) for k in range(3))
    one = run(
        "independent_site",
        replace(facts, reports=same_night),
        default_protocol,
        physics_context,
        **SITE,
    )
    assert one.outcome == "pending"
    assert one.details["missed"] == ["report 1", "report 2", "report 3"]
    (session,) = one.details["missed_sessions"]
    assert session.startswith("BRN night of ")
    next_night = silent(scenario, far.start_unix_s + SIDEREAL_DAY_S, 4)
    two = run(
        "independent_site",
        replace(facts, reports=(*same_night, next_night)),
        default_protocol,
        physics_context,
        **SITE,
    )
    assert two.outcome == "fail" and two.measured == 2.0


def test_session_is_the_local_night_at_the_site():
    # BRN at 147.5 deg E: local mean time is UTC + 9 h 50 min (longitude / 15 deg per hour).
    site = SITES["BRN"]
    evening = datetime(2025, 3, 10, 9, 0, tzinfo=UTC).timestamp()  # 18:50 local, 10 March
    after_midnight = datetime(2025, 3, 10, 17, 0, tzinfo=UTC).timestamp()  # 02:50, 11 March
    next_evening = datetime(2025, 3, 11, 9, 0, tzinfo=UTC).timestamp()
    assert (
        session_of(site, evening) == session_of(site, after_midnight) == ("BRN night of 2025-03-10")
    )
    assert session_of(site, next_evening) == "BRN night of 2025-03-11"


def test_reobservation_counts_a_partner_report_without_its_scan(
    injection_scenarios, default_protocol, physics_context
):
    scenario = injection_scenarios["sf-ald-dorado-0"]
    facts = scenario.facts
    reference = facts.reference_observation
    later = [
        o
        for o in facts.observations
        if o.on_source and o.start_unix_s >= reference.start_unix_s + 12 * 3600
    ]
    facts = replace(facts, observations=tuple(o for o in facts.observations if o not in later))
    when = reference.start_unix_s + SIDEREAL_DAY_S
    alone = run("reobservation", facts, default_protocol, physics_context, **REOBS)
    assert alone.outcome == "pending"
    seen = report_from(scenario, reference.site, when, detected=True, report_id=5)
    passed = run(
        "reobservation", replace(facts, reports=(seen,)), default_protocol, physics_context, **REOBS
    )
    assert passed.outcome == "pass" and passed.details["present_report_ids"] == [5]
    # the gap runs from the reference hit's instant (scan start + offset) to the report's
    hit_instant = reference.start_unix_s + facts.reference.time_offset_s
    assert passed.details["gap_hours"] == pytest.approx((when - hit_instant) / 3600.0, abs=1e-6)
    assert passed.unit == "Hz" and abs(passed.measured) <= passed.tolerance
    quiet = (
        silent(scenario, when, 6, site=reference.site),
        silent(scenario, when + SIDEREAL_DAY_S, 7, site=reference.site),
    )
    failed = run(
        "reobservation", replace(facts, reports=quiet), default_protocol, physics_context, **REOBS
    )
    assert failed.outcome == "fail" and failed.details["missed_report_ids"] == [6, 7]


def test_looks_pointed_away_from_the_target_are_not_misses(
    injection_scenarios, default_protocol, physics_context
):
    from astropy import units as u
    from astropy.coordinates import SkyCoord

    scenario = injection_scenarios["sf-ald-dorado-0"]
    facts, far = far_site_facts(scenario)
    target = facts.target
    away = {"pointing_ra_deg": target.ra_deg + 2.0, "pointing_dec_deg": target.dec_deg - 1.0}
    looks = (
        silent(scenario, far.start_unix_s, 1, **away),
        silent(scenario, far.start_unix_s + SIDEREAL_DAY_S, 2, **away),
    )
    limited = run(
        "independent_site",
        replace(facts, reports=looks),
        default_protocol,
        physics_context,
        max_pointing_offset_deg=0.5,
        **SITE,
    )
    assert limited.outcome == "pending" and limited.details["missed"] == []
    # Reference: astropy's great-circle separation (Vincenty formula) of the two directions.
    separation = (
        SkyCoord(target.ra_deg * u.deg, target.dec_deg * u.deg)
        .separation(SkyCoord(away["pointing_ra_deg"] * u.deg, away["pointing_dec_deg"] * u.deg))
        .deg
    )
    for record in limited.details["not_constraining"]:
        assert record["reasons"][0].startswith("pointed_elsewhere")
        assert record["pointing_offset_deg"] == pytest.approx(separation, abs=1e-4)
    assert "2 pointed away from the target" in limited.reason
    # Without a limit in the protocol, pointing is recorded but not judged.
    unlimited = run(
        "independent_site", replace(facts, reports=looks), default_protocol, physics_context, **SITE
    )
    assert unlimited.outcome == "fail"
    assert unlimited.details["misses"][0]["pointing_offset_deg"] == pytest.approx(
        separation, abs=1e-4
    )
