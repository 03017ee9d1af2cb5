"""Single checks on edited scenarios: pending, misses, distances, margins, windows.

Truth is the physics engine (exact ``physics.predict_signal``); distances are checked against
the WGS84 ellipsoid (NIMA TR8350.2: a = 6378137 m, 1/f = 298.257223563) computed here.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from confirm_service.protocol import (
    BandSet,
    InterferenceBand,
    build_candidate_view,
    match_detections,
    search_window_hz,
)
from confirm_service.protocol.checks import get_check

from .scenarios import SCAN_S, SIDEREAL_DAY_S, SITES, report_from

WGS84_A_M = 6_378_137.0
WGS84_F = 1.0 / 298.257223563


def ecef_m(site):
    lat, lon = math.radians(site.latitude_deg), math.radians(site.longitude_deg)
    e2 = WGS84_F * (2.0 - WGS84_F)
    n = WGS84_A_M / math.sqrt(1.0 - e2 * math.sin(lat) ** 2)
    return np.array(
        [
            (n + site.elevation_m) * math.cos(lat) * math.cos(lon),
            (n + site.elevation_m) * math.cos(lat) * math.sin(lon),
            (n * (1.0 - e2) + site.elevation_m) * math.sin(lat),
        ]
    )


def chord_km(a, b):
    return float(np.linalg.norm(ecef_m(a) - ecef_m(b)) / 1000.0)


def run(kind, facts, protocol, physics_context, bands=None, **params):
    module = get_check(kind)
    view = build_candidate_view(protocol, facts, bands, physics_context)
    return module.evaluate(facts, module.params_model(**params), view)


def later_scans(facts):
    return [
        o
        for o in facts.observations
        if o.on_source and o.start_unix_s > facts.reference_observation.start_unix_s + 12 * 3600
    ]


def replace_observation(facts, old, new):
    return replace(
        facts, observations=tuple(new if o.id == old.id else o for o in facts.observations)
    )


def without(facts, *drop):
    ids = {o.id for o in drop}
    return replace(facts, observations=tuple(o for o in facts.observations if o.id not in ids))


REOBS = {"min_gap_hours": 12.0, "max_misses": 2, "same_site_only": True}


def test_reobservation_passes_pending_and_fails_after_misses(
    sky_fixed, default_protocol, physics_context
):
    facts = sky_fixed.facts
    reobs = next(o for o in later_scans(facts) if o.site == facts.reference_observation.site)
    passed = run("reobservation", facts, default_protocol, physics_context, **REOBS)
    assert passed.outcome == "pass" and passed.measured >= 12.0
    absent = replace(reobs, detections=())
    one_miss = run(
        "reobservation",
        replace_observation(facts, reobs, absent),
        default_protocol,
        physics_context,
        **REOBS,
    )
    assert one_miss.outcome == "pending" and one_miss.details["missed_scan_ids"] == [reobs.id]
    second = replace(absent, id=777, start_unix_s=absent.start_unix_s + SIDEREAL_DAY_S)
    two = replace(
        replace_observation(facts, reobs, absent),
        observations=(*replace_observation(facts, reobs, absent).observations, second),
    )
    failed = run("reobservation", two, default_protocol, physics_context, **REOBS)
    assert failed.outcome == "fail" and failed.measured == 2.0


def test_reobservation_ignores_scans_too_early_or_not_covering(
    sky_fixed, default_protocol, physics_context
):
    facts = sky_fixed.facts
    reobs = next(o for o in later_scans(facts) if o.site == facts.reference_observation.site)
    too_early = replace(
        reobs, detections=(), start_unix_s=facts.reference_observation.start_unix_s + 6 * 3600
    )
    elsewhere = replace(
        reobs,
        id=778,
        detections=(),
        frequency_min_hz=reobs.frequency_min_hz + 2e8,
        frequency_max_hz=reobs.frequency_max_hz + 2e8,
    )
    edited = replace(
        replace_observation(facts, reobs, too_early),
        observations=(*replace_observation(facts, reobs, too_early).observations, elsewhere),
    )
    result = run("reobservation", edited, default_protocol, physics_context, **REOBS)
    assert result.outcome == "pending" and result.details["missed_scan_ids"] == []


def _far_scan(facts):
    reference_site = facts.reference_observation.site
    return next(o for o in facts.observations if o.on_source and o.site != reference_site)


SITE = {"min_distance_km": 1000.0, "max_misses": 2}


def test_independent_site_pass_uses_the_distance_from_every_site(
    injection_scenarios, default_protocol, physics_context
):
    scenario = injection_scenarios["sf-ald-dorado-0"]
    facts = scenario.facts
    result = run("independent_site", facts, default_protocol, physics_context, **SITE)
    assert result.outcome == "pass"
    expected_km = chord_km(SITES["ALD"], SITES["BRN"])
    assert result.details["distance_km"] == pytest.approx(expected_km, abs=0.01)  # WGS84 chord
    # what an observer reads: observed minus predicted frequency there, within the band
    assert result.unit == "Hz" and result.expected == 0.0
    assert result.measured == result.details["offset_hz"]
    assert result.tolerance > 0.0 and abs(result.measured) <= result.tolerance
    raised = run(
        "independent_site",
        facts,
        default_protocol,
        physics_context,
        min_distance_km=expected_km + 1.0,
        max_misses=2,
    )
    assert raised.outcome == "pending"


def test_independent_site_pending_until_data_then_report_counts(
    injection_scenarios, default_protocol, physics_context
):
    scenario = injection_scenarios["sf-ald-dorado-0"]
    far = _far_scan(scenario.facts)
    facts = without(scenario.facts, far)
    assert (
        run("independent_site", facts, default_protocol, physics_context, **SITE).outcome
        == "pending"
    )
    report = report_from(scenario, SITES["BRN"], far.start_unix_s, detected=True)
    with_report = replace(facts, reports=(report,))
    result = run("independent_site", with_report, default_protocol, physics_context, **SITE)
    assert result.outcome == "pass" and result.details["sighting"] == f"report {report.id}"


def test_nearby_site_is_not_independent(injection_scenarios, default_protocol, physics_context):
    """ALN is ~245 km from ALD (WGS84 chord): its sighting does not count for 1000 km."""
    scenario = injection_scenarios["sf-ald-dorado-0"]
    facts = without(scenario.facts, _far_scan(scenario.facts))
    assert 200.0 < chord_km(SITES["ALD"], SITES["ALN"]) < 300.0
    when = facts.reference_observation.start_unix_s + 4 * 3600
    near = report_from(scenario, SITES["ALN"], when, detected=True)
    result = run(
        "independent_site",
        replace(facts, reports=(near,)),
        default_protocol,
        physics_context,
        **SITE,
    )
    assert result.outcome == "pending"
    # and once ALN has seen it, a far site must be 1000 km from ALN too
    assert result.details["sites_seen"] == ["ALD", "ALN"]


def test_independent_site_fails_after_covering_misses(
    injection_scenarios, default_protocol, physics_context
):
    scenario = injection_scenarios["sf-ald-dorado-0"]
    far = _far_scan(scenario.facts)
    facts = without(scenario.facts, far)
    silent = report_from(scenario, SITES["BRN"], far.start_unix_s, detected=False, report_id=1)
    wrong = report_from(
        scenario,
        SITES["CSK"],
        far.start_unix_s + 3600,
        detected=True,
        report_id=2,
        offset_hz=5_000.0,
    )
    one = run(
        "independent_site",
        replace(facts, reports=(silent,)),
        default_protocol,
        physics_context,
        **SITE,
    )
    assert one.outcome == "pending" and one.details["missed"] == ["report 1"]
    two = run(
        "independent_site",
        replace(facts, reports=(silent, wrong)),
        default_protocol,
        physics_context,
        **SITE,
    )
    assert two.outcome == "fail" and two.details["missed"] == ["report 1", "report 2"]
    narrow = replace(silent, frequency_min_hz=silent.frequency_max_hz - 10.0)
    not_covering = run(
        "independent_site",
        replace(facts, reports=(narrow, wrong)),
        default_protocol,
        physics_context,
        **SITE,
    )
    assert not_covering.outcome == "pending"


CADENCE = {"min_on_scans": 3, "min_off_scans": 3, "min_on_fraction": 1.0}


def test_cadence_pending_then_fails_on_a_missing_on_scan(
    sky_fixed, default_protocol, physics_context
):
    facts = sky_fixed.facts
    cadence = facts.reference_observation.cadence
    off_scans = [o for o in facts.observations if o.cadence == cadence and not o.on_source]
    on_scans = [o for o in facts.observations if o.cadence == cadence and o.on_source]
    assert (
        run("on_off_cadence", facts, default_protocol, physics_context, **CADENCE).outcome == "pass"
    )
    short = without(facts, off_scans[-1])
    assert (
        run("on_off_cadence", short, default_protocol, physics_context, **CADENCE).outcome
        == "pending"
    )
    missing = replace_observation(facts, on_scans[-1], replace(on_scans[-1], detections=()))
    failed = run("on_off_cadence", missing, default_protocol, physics_context, **CADENCE)
    assert failed.outcome == "fail" and failed.measured == pytest.approx(2.0 / 3.0)
    relaxed = run(
        "on_off_cadence",
        missing,
        default_protocol,
        physics_context,
        min_on_scans=3,
        min_off_scans=3,
        min_on_fraction=0.6,
    )
    assert relaxed.outcome == "pass"
    no_cadence = replace(
        facts, reference_observation=replace(facts.reference_observation, cadence=None)
    )
    assert (
        run("on_off_cadence", no_cadence, default_protocol, physics_context, **CADENCE).outcome
        == "pending"
    )


def test_known_interference_margin(sky_fixed, default_protocol, physics_context):
    """A band 1 kHz above the signal: no overlap without margin, overlap with 5 kHz margin."""
    f = sky_fixed.facts.reference.frequency_hz
    bands = BandSet(
        [InterferenceBand("test band", f + 1.0e3, f + 2.0e3, "common practice, no source")]
    )
    assert (
        run(
            "known_interference",
            sky_fixed.facts,
            default_protocol,
            physics_context,
            bands,
            margin_hz=0.0,
        ).outcome
        == "pass"
    )
    hit = run(
        "known_interference",
        sky_fixed.facts,
        default_protocol,
        physics_context,
        bands,
        margin_hz=5.0e3,
    )
    # default.toml flags band hits for a person (interference_band_action = "flag")
    assert hit.outcome == "inconclusive" and hit.details["band"] == "test band"


def test_known_interference_sweeps_the_whole_scan(sky_fixed, default_protocol, physics_context):
    """Drift d over a scan of 300 s moves |d| * 300 Hz; a band just beyond the reported
    frequency but inside the swept range fails."""
    facts = sky_fixed.facts
    drift = facts.reference.drift_hz_s
    f_end = facts.reference.frequency_hz + drift * (SCAN_S - facts.reference.time_offset_s)
    low, high = sorted((facts.reference.frequency_hz, f_end))
    inside = BandSet(
        [InterferenceBand("swept", high - 1.0, high + 10.0, "common practice, no source")]
    )
    assert abs(drift) * SCAN_S > 20.0
    assert (
        run(
            "known_interference", facts, default_protocol, physics_context, inside, margin_hz=0.0
        ).outcome
        == "inconclusive"
    )


def test_nonzero_drift_not_applicable_when_earth_drift_is_within_resolution(
    sky_fixed, default_protocol, physics_context
):
    """With 'zero' widened to 1000 resolutions (10 Hz/s) Earth's drift is never
    distinguishable: the check cannot judge."""
    result = run(
        "nonzero_drift",
        sky_fixed.facts,
        default_protocol,
        physics_context,
        resolution_multiplier=1000.0,
    )
    assert result.outcome == "not_applicable"


def test_doppler_consistency_bound_and_pending(sky_fixed, default_protocol, physics_context):
    facts = sky_fixed.facts  # injected residual +0.35 Hz/s
    base = {"tolerance_hz_s": 0.02, "resolution_multiplier": 3.0}
    too_big = run(
        "doppler_consistency",
        facts,
        default_protocol,
        physics_context,
        max_residual_drift_hz_s=0.3,
        min_detections=1,
        **base,
    )
    assert too_big.outcome == "fail" and too_big.tolerance == 0.3
    waiting = run(
        "doppler_consistency",
        facts,
        default_protocol,
        physics_context,
        max_residual_drift_hz_s=1.0,
        min_detections=6,
        **base,
    )
    assert waiting.outcome == "pending"
    enough = run(
        "doppler_consistency",
        facts,
        default_protocol,
        physics_context,
        max_residual_drift_hz_s=1.0,
        min_detections=5,
        **base,
    )
    assert enough.outcome == "pass"


def test_search_window_holds_the_truth_and_widens_with_the_gap(
    sky_fixed, default_protocol, physics_context
):
    facts = sky_fixed.facts
    matched = match_detections(default_protocol, facts, physics_context)
    assert sum(len(v) for v in matched.values()) == 5
    widths = {}
    for observation in facts.observations:
        low, high = search_window_hz(
            default_protocol,
            facts.reference,
            facts.reference_observation,
            facts.target,
            observation,
            physics_context,
        )
        truth = sky_fixed.truth.at(
            observation.site, np.array([observation.start_unix_s, observation.end_unix_s])
        )
        if observation.on_source:
            assert low < truth.frequency_hz.min() and truth.frequency_hz.max() < high
        for detection in observation.detections:
            if detection.id in matched.get(observation.id, ()):
                assert low <= detection.frequency_hz <= high
        gap_h = (observation.start_unix_s - facts.reference_observation.start_unix_s) / 3600.0
        if observation.on_source:
            widths[round(gap_h)] = high - low
    # a day later the window is wider by ~2 x 3 x (86400 s x 0.01 Hz/s) + the swept band
    assert widths[max(widths)] > 10.0 * widths[0]


def test_intake_rule(sky_fixed, default_protocol):
    """The [intake] rule of default.toml: SNR >= 10, |drift| <= 10 Hz/s, on-source scans of a
    target, outside listed bands."""
    from confirm_service.protocol import intake_decision

    facts = sky_fixed.facts
    detection, scan, target = facts.reference, facts.reference_observation, facts.target
    assert intake_decision(default_protocol, detection, scan, target).promote
    cases = {
        "low_snr": (replace(detection, snr=9.99), scan, target),
        "drift_out_of_range": (replace(detection, drift_hz_s=-10.01), scan, target),
        "off_source": (detection, replace(scan, on_source=False), target),
        "no_target": (detection, scan, None),
        "outside_scan_band": (
            replace(detection, frequency_hz=scan.frequency_max_hz + 1.0),
            scan,
            target,
        ),
    }
    for reason_class, (d, o, t) in cases.items():
        decision = intake_decision(default_protocol, d, o, t)
        assert not decision.promote and decision.reason_class == reason_class, reason_class
    assert intake_decision(default_protocol, replace(detection, snr=10.0), scan, target).promote
