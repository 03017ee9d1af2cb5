"""Determinism: the same facts give identical results; tightening one tolerance changes
exactly the candidates whose true values lie between the old and the new limit."""

from __future__ import annotations

import json
from dataclasses import replace

import numpy as np
import pytest

from confirm_service.protocol import PhysicsContext, evaluate, load_protocol_text

from .test_protocol_checks import chord_km
from .test_protocol_reference import C_M_S, skyfield_earth_drift_hz_s


def as_json(evaluation) -> str:
    return json.dumps(evaluation.as_dict(), sort_keys=True)


def test_same_facts_give_identical_evaluations(
    default_protocol, injection_scenarios, physics_context
):
    for scenario in injection_scenarios.values():
        first = evaluate(default_protocol, scenario.facts, physics_context=physics_context)
        second = evaluate(default_protocol, scenario.facts, physics_context=physics_context)
        assert first == second, scenario.name
        assert as_json(first) == as_json(second)


def test_repeated_results_are_also_right_against_skyfield(
    default_protocol, injection_scenarios, physics_context
):
    """Identical output could be identically wrong. Independent check of what is repeated: the
    Doppler check's reference residual drift equals the observed drift minus the Earth drift
    that skyfield with skyfield-data's JPL DE421 gives (tolerance as in
    test_protocol_reference: 3e-7 m/s^2 of line-of-sight acceleration)."""
    checked = 0
    for scenario in injection_scenarios.values():
        evaluation = evaluate(default_protocol, scenario.facts, physics_context=physics_context)
        doppler = next(r for r in evaluation.results if r.kind == "doppler_consistency")
        if doppler.expected is None:
            continue
        facts = scenario.facts
        reference, scan = facts.reference, facts.reference_observation
        at = np.array([scan.start_unix_s + reference.time_offset_s])
        earth = skyfield_earth_drift_hz_s(scan.site, facts.target, at, reference.frequency_hz)
        tolerance = reference.frequency_hz * 3e-7 / C_M_S
        assert doppler.expected == pytest.approx(reference.drift_hz_s - earth, abs=tolerance)
        checked += 1
    assert checked >= 5


def test_results_do_not_depend_on_cache_history(
    default_protocol, injection_scenarios, physics_context
):
    """A fresh context (cold TrackCache) gives byte-identical output to a warm one."""
    scenario = injection_scenarios["sf-brn-cetra-n"]
    warm = evaluate(default_protocol, scenario.facts, physics_context=physics_context)
    cold = evaluate(default_protocol, scenario.facts, physics_context=PhysicsContext())
    assert as_json(warm) == as_json(cold)


def test_time_passing_without_new_data_changes_nothing_before_a_deadline(
    default_protocol, sky_fixed, physics_context
):
    first = evaluate(default_protocol, sky_fixed.facts, physics_context=physics_context)
    later = evaluate(
        default_protocol,
        replace(sky_fixed.facts, now_unix_s=sky_fixed.facts.now_unix_s + 60.0),
        physics_context=physics_context,
    )
    assert [r.outcome for r in first.results] == [r.outcome for r in later.results]
    assert first.state == later.state and first.stage == later.stage


def _variant(protocol_dir, old: str, new: str):
    text = (protocol_dir / "default.toml").read_text(encoding="utf-8")
    assert text.count(old) == 1
    return load_protocol_text(text.replace(old, new), protocol_dir)


def _outcomes(protocol, scenarios, physics_context):
    out = {}
    for name, scenario in scenarios.items():
        evaluation = evaluate(protocol, scenario.facts, physics_context=physics_context)
        out[name] = (evaluation.state, evaluation.stage, evaluation.reason_class, evaluation.held)
    return out


def test_tighter_residual_drift_bound_rejects_exactly_the_fast_drifters(
    protocol_dir, default_protocol, injection_scenarios, physics_context
):
    """Bound 2.0 -> 0.5 Hz/s: only the sky-fixed candidates injected with |residual| > 0.5
    Hz/s (the -0.8 Hz/s one) change, to rejected 'drift_not_sky_fixed'."""
    tight = _variant(protocol_dir, "max_residual_drift_hz_s = 2.0", "max_residual_drift_hz_s = 0.5")
    before = _outcomes(default_protocol, injection_scenarios, physics_context)
    after = _outcomes(tight, injection_scenarios, physics_context)
    changed = {name for name in before if before[name] != after[name]}
    expected = {
        name
        for name, s in injection_scenarios.items()
        if s.true_class == "sky_fixed" and abs(s.residual_drift_hz_s) > 0.5
    }
    assert expected == {"sf-brn-cetra-n"}
    assert changed == expected
    for name in changed:
        assert after[name][0] == "rejected" and after[name][2] == "drift_not_sky_fixed"


def test_longer_independent_site_distance_stops_exactly_the_closer_pairs(
    protocol_dir, default_protocol, injection_scenarios, physics_context
):
    """min_distance_km 1000 -> 12000: sky-fixed candidates whose two sites are closer than
    12000 km (WGS84 chord, computed independently) stay in stage independent_site."""
    tight = _variant(
        protocol_dir,
        "min_distance_km = 1000.0                           # straight-line",
        "min_distance_km = 12000.0 # straight-line",
    )
    before = _outcomes(default_protocol, injection_scenarios, physics_context)
    after = _outcomes(tight, injection_scenarios, physics_context)
    changed = {name for name in before if before[name] != after[name]}
    expected = set()
    for name, scenario in injection_scenarios.items():
        if scenario.true_class != "sky_fixed":
            continue
        sites = {o.site for o in scenario.facts.all_observations() if o.detections}
        reference_site = scenario.facts.reference_observation.site
        if max(chord_km(reference_site, s) for s in sites) < 12000.0:
            expected.add(name)
    assert expected and expected != {
        s for s, v in injection_scenarios.items() if v.true_class == "sky_fixed"
    }
    assert changed == expected
    for name in changed:
        assert after[name][:2] == ("open", "independent_site")


def test_batched_and_streamed_evaluation_equal_one_at_a_time(
    default_protocol, injection_scenarios, physics_context
):
    import gc

    from confirm_service.protocol import evaluate_many, iter_evaluations

    facts = [s.facts for s in injection_scenarios.values()] * 3
    one_by_one = [evaluate(default_protocol, f, physics_context=physics_context) for f in facts]
    assert (
        evaluate_many(default_protocol, facts, physics_context=physics_context, chunk_size=5)
        == one_by_one
    )
    streamed = list(
        iter_evaluations(
            default_protocol, iter(facts), physics_context=physics_context, chunk_size=4
        )
    )
    assert streamed == one_by_one
    assert gc.isenabled()
    paused = evaluate_many(default_protocol, facts, physics_context=physics_context, pause_gc=True)
    assert paused == one_by_one and gc.isenabled()
