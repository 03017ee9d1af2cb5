"""What the checks accept as evidence: power, links by frequency and drift, wide off-source
search, ambiguous hits, partial coverage, normalised drift limits.

Truth is the physics engine (exact ``physics.predict_signal``, itself compared with skyfield in
tests/physics); the scenario numbers (5-minute scans, 3 Hz channels) are our own.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from confirm_service.protocol import (
    ReportFact,
    build_candidate_view,
    evaluate,
    intake_decision,
    load_protocol_text,
    match_detections,
    search_window_hz,
    search_windows_hz,
)
from confirm_service.protocol.results import FAIL, INCONCLUSIVE, NOT_APPLICABLE, PASS, PENDING

from .scenarios import SITES
from .test_protocol_checks import replace_observation, run

DOPPLER = {
    "max_residual_drift_hz_s": 2.0,
    "tolerance_hz_s": 0.02,
    "resolution_multiplier": 3.0,
    "min_detections": 1,
    "min_earth_drift_span_tolerances": 2.0,
}
CADENCE = {"min_on_scans": 3, "min_off_scans": 3, "min_on_fraction": 1.0}


def only_reference(facts):
    return replace(facts, observations=(), reports=())


def cadence_scans(facts, on_source):
    label = facts.reference_observation.cadence
    return [o for o in facts.observations if o.cadence == label and o.on_source == on_source]


def later_on_scan(facts):
    reference = facts.reference_observation
    return next(
        o
        for o in facts.observations
        if o.on_source and o.site == reference.site and o.start_unix_s > reference.end_unix_s + 3600
    )


# --- doppler_consistency needs power ------------------------------------------------------------


def test_one_hit_gives_the_doppler_check_no_power(sky_fixed, default_protocol, physics_context):
    """With the reference alone (or 5-minute scans minutes apart) Earth's drift cannot change
    by several tolerances (0.04 Hz/s here), so the check cannot judge: not applicable, with
    the numbers. Common practice, no source: a test without power proves nothing."""
    result = run(
        "doppler_consistency",
        only_reference(sky_fixed.facts),
        default_protocol,
        physics_context,
        **DOPPLER,
    )
    assert result.outcome == NOT_APPLICABLE
    assert result.details["power_from"] == []
    assert result.measured == 0.0 and result.expected == pytest.approx(2 * 3 * 2**0.5 * 0.01)
    assert result.unit == "Hz/s"


def test_doppler_check_names_the_observations_that_gave_it_power(
    sky_fixed, default_protocol, physics_context
):
    """sf-dun-dorado-p: the distant site (CSK) sees an Earth drift 0.15 Hz/s away from the
    reference's (physics engine), more than 2 tolerances: only it gives the check power."""
    result = run(
        "doppler_consistency", sky_fixed.facts, default_protocol, physics_context, **DOPPLER
    )
    assert result.outcome == PASS
    assert [label.split(" at ")[1] for label in result.details["power_from"]] == ["CSK"]
    assert result.expected == pytest.approx(result.details["reference_residual_drift_hz_s"])


def test_one_ambiguous_sighting_holds_two_reject(
    injection_scenarios, strict_protocol, physics_context
):
    """A drift that ignores Earth's motion, seen at one distant site only, may be another
    signal: the strict protocol holds the candidate for a person. A second such sighting (a
    partner report ten minutes later, same constant drift) rejects it."""
    scenario = injection_scenarios["const-ald-borealis"]
    facts = scenario.facts
    held = evaluate(strict_protocol, facts, physics_context=physics_context)
    doppler = held.result_for("doppler_consistency")
    assert held.state == "open" and held.held
    assert doppler.outcome == INCONCLUSIVE
    far_scan = next(o for o in facts.observations if o.site.code == "CSK")
    when = far_scan.start_unix_s + 600.0
    truth = scenario.truth.at(SITES["CSK"], np.array([when]))
    report = ReportFact(
        id=1,
        site=SITES["CSK"],
        unix_s=when,
        detected=True,
        frequency_hz=float(truth.frequency_hz[0]),
        drift_hz_s=facts.reference.drift_hz_s,
        frequency_min_hz=float(truth.frequency_hz[0]) - 1e6,
        frequency_max_hz=float(truth.frequency_hz[0]) + 1e6,
        duration_s=300.0,
    )
    rejected = evaluate(
        strict_protocol, replace(facts, reports=(report,)), physics_context=physics_context
    )
    assert rejected.state == "rejected"
    assert rejected.reason_class == "drift_not_sky_fixed"
    assert len(rejected.result_for("doppler_consistency").details["mismatched"]) == 2


def test_an_inconclusive_hold_can_be_released(
    injection_scenarios, default_protocol, physics_context
):
    facts = injection_scenarios["const-ald-borealis"].facts
    held = evaluate(default_protocol, facts, physics_context=physics_context)
    assert held.held and held.hold_reason.startswith("doppler_consistency (inconclusive)")
    released = evaluate(
        default_protocol, replace(facts, manual_hold_released=True), physics_context=physics_context
    )
    assert not released.held and released.stage != "screening"


# --- links by frequency and drift, best per scan ---


def test_links_need_frequency_and_drift_and_take_the_best_per_scan(
    sky_fixed, default_protocol, physics_context
):
    """In the re-observation scan: a hit on the frequency track with a drift 1 Hz/s off is not
    linked (it is kept as a drift mismatch); with a true hit beside it, only the true one is
    linked; a second hit that also fits makes the link ambiguous."""
    facts = sky_fixed.facts
    scan = later_on_scan(facts)
    true_hit = scan.detections[0]
    wrong_drift = replace(true_hit, id=991, drift_hz_s=true_hit.drift_hz_s + 1.0)
    alone = replace_observation(facts, scan, replace(scan, detections=(wrong_drift,)))
    view = build_candidate_view(default_protocol, alone, None, physics_context)
    scan_view = next(v for v in view.observations if v.observation.id == scan.id)
    assert not scan_view.present and scan_view.drift_mismatch.detection.id == 991
    assert scan.id not in match_detections(default_protocol, alone, physics_context)
    both = replace_observation(facts, scan, replace(scan, detections=(wrong_drift, true_hit)))
    assert match_detections(default_protocol, both, physics_context)[scan.id] == (true_hit.id,)
    twin = replace(true_hit, id=992, frequency_hz=true_hit.frequency_hz + 1.0)
    crowded = replace_observation(facts, scan, replace(scan, detections=(true_hit, twin)))
    view = build_candidate_view(default_protocol, crowded, None, physics_context)
    scan_view = next(v for v in view.observations if v.observation.id == scan.id)
    assert len(scan_view.linked) == 1 and scan_view.extra_matches == 1 and scan_view.ambiguous


# --- off-source scans searched wide, at any drift ---


def _sixty_hz_off(facts, scans):
    """The reference signal continued at its own drift, 60 Hz off, in each given scan."""
    reference = facts.reference
    t0 = facts.reference_observation.start_unix_s + reference.time_offset_s
    edited = facts
    for index, scan in enumerate(scans):
        offset_s = 60.0
        f = reference.frequency_hz + reference.drift_hz_s * (scan.start_unix_s + offset_s - t0)
        hit = replace(
            reference,
            id=900 + index,
            observation_id=scan.id,
            frequency_hz=f + 60.0,
            time_offset_s=offset_s,
        )
        edited = replace_observation(edited, scan, replace(scan, detections=(hit,)))
    return edited


def test_off_source_scans_are_searched_wide_at_any_drift(
    sky_fixed, default_protocol, physics_context
):
    """The same signal 60 Hz off the track in every off-source scan is not absent: the window
    there spans +- (largest plausible drift x time from the nearest on-source scan + margin)
    (default.toml: the intake limit, 10 Hz/s)."""
    facts = sky_fixed.facts
    off_scans = cadence_scans(facts, on_source=False)
    on_scans = [facts.reference_observation, *cadence_scans(facts, on_source=True)]
    for scan in off_scans:
        gap_s = min(
            max(abs(scan.end_unix_s - on.start_unix_s), abs(on.end_unix_s - scan.start_unix_s))
            for on in on_scans
        )
        low, high = search_window_hz(
            default_protocol,
            facts.reference,
            facts.reference_observation,
            facts.target,
            scan,
            physics_context,
        )
        assert 0.5 * (high - low) >= 10.0 * gap_s
    everywhere = run(
        "on_off_cadence",
        _sixty_hz_off(facts, off_scans),
        default_protocol,
        physics_context,
        **CADENCE,
    )
    assert everywhere.outcome == FAIL
    assert len(everywhere.details["off_scan_ids_nearby"]) == 3
    once = run(
        "on_off_cadence",
        _sixty_hz_off(facts, off_scans[:1]),
        default_protocol,
        physics_context,
        **CADENCE,
    )
    assert once.outcome == INCONCLUSIVE
    assert once.details["nearby_offsets_hz"][0] == pytest.approx(60.0, abs=10.0)


def _off_window_hz(facts, protocol, scan, physics_context) -> float:
    low, high = search_windows_hz(
        protocol,
        facts.reference,
        facts.reference_observation,
        facts.target,
        [facts.reference_observation, *facts.observations],
        physics_context,
    )[scan.id]
    return high - low


def test_an_off_source_scan_is_searched_from_the_nearest_on_source_scan(
    sky_fixed, default_protocol, physics_context
):
    """An off-source scan five days after the last on-source scan is searched over what a
    drift of at most 10 Hz/s (default.toml's limit) could cover since the nearest on-source
    scan: five days of drift (megahertz) while that scan is the nearest, a quarter of an hour's
    once the target was observed again just before. Measuring from the reference alone gave
    megahertz both times, and pulled a whole band of unrelated hits into every evaluation."""
    facts = sky_fixed.facts
    days_s = 5 * 86_400.0
    last_on = max((o for o in facts.observations if o.on_source), key=lambda o: o.start_unix_s)
    late_off = replace(
        cadence_scans(facts, on_source=False)[-1],
        id=801,
        start_unix_s=last_on.start_unix_s + days_s,
    )
    alone = replace(facts, observations=(*facts.observations, late_off))
    wide_hz = _off_window_hz(alone, default_protocol, late_off, physics_context)
    assert wide_hz >= 2 * 10.0 * days_s
    again_on = replace(last_on, id=802, start_unix_s=late_off.start_unix_s - 600.0)
    observed_again = replace(alone, observations=(*alone.observations, again_on))
    narrow_hz = _off_window_hz(
        observed_again, default_protocol, physics_context=physics_context, scan=late_off
    )
    gap_s = late_off.end_unix_s - again_on.start_unix_s
    track_hz = _off_window_hz(observed_again, default_protocol, again_on, physics_context)
    # D + E: 10 Hz/s and Earth's largest drift, 1.2 Hz/s at 8.7 GHz
    assert 2 * 10.0 * gap_s <= narrow_hz - track_hz < 2 * 12.0 * gap_s + 1_000.0
    assert narrow_hz < wide_hz / 50


def test_partly_covering_scans_make_the_cadence_inconclusive(
    sky_fixed, default_protocol, physics_context
):
    """An off-source scan whose band stops inside its search window can neither show the
    signal absent nor be ignored as missing: the cadence cannot decide."""
    facts = sky_fixed.facts
    last = cadence_scans(facts, on_source=False)[-1]
    low, high = search_window_hz(
        default_protocol,
        facts.reference,
        facts.reference_observation,
        facts.target,
        last,
        physics_context,
    )
    cut = replace(last, frequency_max_hz=0.5 * (low + high))
    result = run(
        "on_off_cadence",
        replace_observation(facts, last, cut),
        default_protocol,
        physics_context,
        **CADENCE,
    )
    assert result.outcome == INCONCLUSIVE and result.details["partial_scan_ids"] == [last.id]
    dropped = replace(facts, observations=tuple(o for o in facts.observations if o.id != last.id))
    assert (
        run("on_off_cadence", dropped, default_protocol, physics_context, **CADENCE).outcome
        == PENDING
    )


# --- drift limits normalised by frequency --------------------------------------------------------


def test_drift_limits_in_hz_s_per_ghz(sky_fixed, protocol_dir):
    """1 nHz = 1e-9 s^-1 = 1 Hz/s per GHz (definition; common practice, no source): at the
    reference's 8.7124 GHz a 1 nHz limit is 8.7124 Hz/s."""
    text = (protocol_dir / "default.toml").read_text(encoding="utf-8")
    text = text.replace("max_abs_drift_hz_s = 10.0", "max_abs_drift_nhz = 1.0", 1)
    protocol = load_protocol_text(text, protocol_dir)
    facts = sky_fixed.facts
    assert protocol.model.intake.max_abs_drift_at_hz_s(8.7124e9) == pytest.approx(8.7124)
    parts = (facts.reference_observation, facts.target)
    inside = replace(facts.reference, drift_hz_s=8.70)
    outside = replace(facts.reference, drift_hz_s=8.72)
    assert intake_decision(protocol, inside, *parts).promote
    refused = intake_decision(protocol, outside, *parts)
    assert refused.reason_class == "drift_out_of_range" and "8.712 Hz/s" in refused.reason


def test_a_drift_limit_is_given_one_way(protocol_dir, tmp_path):
    from confirm_service.protocol import validate_protocol_text

    text = (protocol_dir / "default.toml").read_text(encoding="utf-8")
    both = text.replace(
        "max_abs_drift_hz_s = 10.0", "max_abs_drift_hz_s = 10.0\nmax_abs_drift_nhz = 1.0", 1
    )
    neither = text.replace("max_abs_drift_hz_s = 10.0", "", 1)
    messages = [str(p) for p in validate_protocol_text(both, protocol_dir)]
    assert messages == [
        "intake: give max_abs_drift_hz_s (Hz/s) or max_abs_drift_nhz (Hz/s per GHz), not both"
    ]
    messages = [str(p) for p in validate_protocol_text(neither, protocol_dir)]
    assert messages == [
        "intake: give max_abs_drift_hz_s (Hz/s) or max_abs_drift_nhz (Hz/s per GHz)"
    ]
