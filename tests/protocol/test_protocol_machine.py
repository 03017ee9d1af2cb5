"""Stage machine: sign-offs, holds, deadlines (escalate / expire), confirmation, final states.

Semantics under test are the ones documented in confirm_service/protocol/machine.py; the
candidate data come from the injection scenarios (physics truth, complete data on two
continents).
"""

from __future__ import annotations

from dataclasses import replace

import pytest

from confirm_service.protocol import SignoffFact, evaluate, load_protocol_text, stage_entry_actions

HOUR_S = 3600.0


def at_stage(facts, stage, entered_unix_s, **changes):
    return replace(facts, stage=stage, stage_entered_unix_s=entered_unix_s, **changes)


def signoff(person, unix_s, *, role="coordinator", stage="review", approve=True):
    return SignoffFact(stage=stage, role=role, person=person, unix_s=unix_s, approve=approve)


@pytest.fixture
def review_facts(sky_fixed):
    facts = sky_fixed.facts
    return at_stage(facts, "review", facts.now_unix_s - HOUR_S)


def test_sky_fixed_candidate_enters_each_stage_and_emits_its_actions(
    default_protocol, sky_fixed, physics_context
):
    evaluation = evaluate(default_protocol, sky_fixed.facts, physics_context=physics_context)
    assert [(t.from_stage, t.to_stage) for t in evaluation.transitions] == [
        ("screening", "reobservation"),
        ("reobservation", "independent_site"),
        ("independent_site", "review"),
    ]
    assert [a.kind for a in evaluation.actions] == [
        "request_reobservation",
        "request_followup",
        "notify",
    ]
    followup = evaluation.actions[1]
    assert followup.params["min_distance_km"] == 1000.0
    assert followup.params["target_name"] == sky_fixed.facts.target.name
    assert followup.params["barycentric_frequency_hz"] == pytest.approx(8_712.4e6, abs=2e6)
    assert len({a.key for a in evaluation.actions}) == 3
    assert evaluation.stage_entered_unix_s == sky_fixed.facts.now_unix_s
    assert evaluation.signoffs[0].role == "coordinator" and evaluation.signoffs[0].needed == 2


def test_two_distinct_coordinators_confirm(default_protocol, review_facts, physics_context):
    entered = review_facts.stage_entered_unix_s
    facts = replace(
        review_facts, signoffs=(signoff("ana", entered + 60), signoff("bo", entered + 120))
    )
    evaluation = evaluate(default_protocol, facts, physics_context=physics_context)
    assert evaluation.state == "passed_protocol"
    assert evaluation.stage == "review"
    assert evaluation.transitions[-1].to_state == "passed_protocol"
    assert evaluation.signoffs[0].approved_by == ("ana", "bo")


@pytest.mark.parametrize(
    "signoffs",
    [
        pytest.param(("ana",), id="one-person"),
        pytest.param(("ana", "ana"), id="same-person-twice"),
        pytest.param(("ana", "viewer:bo"), id="wrong-role"),
        pytest.param(("ana", "stage:bo"), id="other-stage"),
        pytest.param(("ana", "early:bo"), id="before-entry"),
    ],
)
def test_insufficient_signoffs_keep_the_candidate_in_review(
    default_protocol, review_facts, physics_context, signoffs
):
    entered = review_facts.stage_entered_unix_s
    made = []
    for i, spec in enumerate(signoffs):
        kind, _, person = spec.rpartition(":")
        when = entered + 60 * (i + 1)
        if kind == "viewer":
            made.append(signoff(person, when, role="viewer"))
        elif kind == "stage":
            made.append(signoff(person, when, stage="independent_site"))
        elif kind == "early":
            made.append(signoff(person, entered - 60))
        else:
            made.append(signoff(person, when))
    evaluation = evaluate(
        default_protocol,
        replace(review_facts, signoffs=tuple(made)),
        physics_context=physics_context,
    )
    assert evaluation.state == "open" and evaluation.stage == "review"
    assert evaluation.signoffs[0].approved_by == ("ana",)
    assert not evaluation.signoffs[0].met
    assert evaluation.transitions == ()


def test_a_retracted_approval_holds_for_a_person(default_protocol, review_facts, physics_context):
    entered = review_facts.stage_entered_unix_s
    signoffs = (
        signoff("ana", entered + 60),
        signoff("bo", entered + 120),
        signoff("bo", entered + 180, approve=False),
    )
    facts = replace(review_facts, signoffs=signoffs)
    evaluation = evaluate(default_protocol, facts, physics_context=physics_context)
    assert evaluation.state == "open" and evaluation.held
    assert evaluation.hold_reason == "sign-off declined by bo (coordinator)"
    released = evaluate(
        default_protocol, replace(facts, manual_hold_released=True), physics_context=physics_context
    )
    assert not released.held and released.state == "open"  # still one approval short


def test_hold_stops_advance_until_a_person_releases_it(
    default_protocol, injection_scenarios, physics_context
):
    facts = injection_scenarios["beam-ald-borealis"].facts
    held = evaluate(default_protocol, facts, physics_context=physics_context)
    assert held.held and held.state == "open" and held.stage == "screening"
    assert held.transitions == () and held.actions == ()
    released = evaluate(
        default_protocol, replace(facts, manual_hold_released=True), physics_context=physics_context
    )
    assert not released.held
    assert released.stage == "review"
    assert released.result_for("multi_beam").outcome == "fail"  # still reported


def _without_followup_data(scenario):
    """The scenario's facts with only the discovery cadence (no later or distant scans)."""
    facts = scenario.facts
    cadence = facts.reference_observation.cadence
    kept = tuple(o for o in facts.observations if o.cadence == cadence)
    return replace(facts, observations=kept)


def test_deadline_escalates_once_per_stage_entry(default_protocol, sky_fixed, physics_context):
    facts = _without_followup_data(sky_fixed)
    entered = facts.now_unix_s - 100 * HOUR_S
    before = evaluate(
        default_protocol,
        at_stage(facts, "reobservation", entered, now_unix_s=entered + 719 * HOUR_S),
        physics_context=physics_context,
    )
    assert before.actions == () and before.state == "open"
    assert before.deadline_unix_s == entered + 720 * HOUR_S
    late = at_stage(facts, "reobservation", entered, now_unix_s=entered + 721 * HOUR_S)
    first = evaluate(default_protocol, late, physics_context=physics_context)
    again = evaluate(
        default_protocol,
        replace(late, now_unix_s=late.now_unix_s + 5 * HOUR_S),
        physics_context=physics_context,
    )
    assert [a.kind for a in first.actions] == ["escalate"]
    escalation = first.actions[0]
    assert escalation.params["contacts"] == ["coordinator-on-duty"]
    assert escalation.params["waiting_for"] == ["reobservation"]
    assert escalation.key == again.actions[0].key  # the service records it once
    assert first.state == "open" and first.stage == "reobservation"
    reentered = evaluate(
        default_protocol,
        at_stage(late, "reobservation", entered + 1.0),
        physics_context=physics_context,
    )
    assert reentered.actions[0].key != escalation.key


def test_deadline_expires_a_stage(default_protocol, sky_fixed, physics_context):
    facts = sky_fixed.facts
    cadence = facts.reference_observation.cadence
    # drop the off-source scans: the cadence check stays pending
    facts = replace(
        facts,
        observations=tuple(o for o in facts.observations if o.on_source or o.cadence != cadence),
    )
    entered = facts.stage_entered_unix_s
    pending = evaluate(
        default_protocol,
        replace(facts, now_unix_s=entered + 71 * HOUR_S),
        physics_context=physics_context,
    )
    assert pending.state == "open" and pending.result_for("on_off_cadence").outcome == "pending"
    expired = evaluate(
        default_protocol,
        replace(facts, now_unix_s=entered + 72 * HOUR_S),
        physics_context=physics_context,
    )
    assert expired.state == "rejected" and expired.reason_class == "expired"
    assert expired.transitions[-1].reason.startswith("deadline of stage 'screening' passed")


def test_new_data_still_rejects_a_candidate_in_a_later_stage(
    default_protocol, injection_scenarios, physics_context
):
    """A candidate seen in its off-source scans, placed in the last stage, is rejected by a
    stage-1 check."""
    facts = injection_scenarios["off-ald-dorado"].facts
    evaluation = evaluate(
        default_protocol,
        at_stage(facts, "review", facts.now_unix_s - HOUR_S),
        physics_context=physics_context,
    )
    assert evaluation.state == "rejected"
    assert evaluation.reason_class == "failed_cadence"
    assert evaluation.stage == "review"


@pytest.mark.parametrize("state", ["rejected", "withdrawn", "passed_protocol"])
def test_final_states_do_not_change(default_protocol, sky_fixed, physics_context, state):
    facts = replace(sky_fixed.facts, state=state)
    evaluation = evaluate(default_protocol, facts, physics_context=physics_context)
    assert evaluation.state == state
    assert evaluation.transitions == () and evaluation.actions == ()
    assert evaluation.results  # checks are still reported


def test_unknown_stage_is_refused(default_protocol, sky_fixed, physics_context):
    with pytest.raises(ValueError, match="no stage 'triage'"):
        evaluate(
            default_protocol,
            replace(sky_fixed.facts, stage="triage"),
            physics_context=physics_context,
        )


def test_stage_without_checks_and_signoffs_is_passed_at_once(
    protocol_dir, sky_fixed, physics_context
):
    text = """
name = "two-step"
version = "0.1"
description = "a first stage with one check, then an empty one"
[intake]
min_snr = 10.0
max_abs_drift_hz_s = 10.0
exclude_interference_bands = false
[matching]
frequency_tolerance_floor_hz = 10.0
sigma_multiplier = 3.0
reference_frequency_uncertainty_channels = 1.0
reference_drift_uncertainty_resolutions = 1.0
scan_margin_channels = 1.0
[[stages]]
name = "first"
description = "drift only"
[[stages.checks]]
kind = "nonzero_drift"
resolution_multiplier = 1.0
on_fail = "reject"
reason_class = "zero_drift"
[[stages]]
name = "last"
description = "nothing to do"
on_entry = [{ action = "notify", contacts = ["someone"] }]
"""
    protocol = load_protocol_text(text, protocol_dir)
    evaluation = evaluate(
        protocol, replace(sky_fixed.facts, stage="first"), physics_context=physics_context
    )
    assert evaluation.state == "passed_protocol" and evaluation.stage == "last"
    assert [a.kind for a in evaluation.actions] == ["notify"]
    assert stage_entry_actions(protocol, "first", 7, 0.0) == ()
