"""Injection-recovery: synthetic sky-fixed signals and interference through the shipped protocols.

Truth is the physics engine (exact ``physics.predict_signal``, no cache); see scenarios.py.
Every sky-fixed signal must pass every automatic check and reach the sign-off stage; every
interference case must be stopped by the check made for it. The confusion matrix (true class
against outcome) must be diagonal.
"""

from __future__ import annotations

import pytest

from confirm_service.protocol import Evaluation, evaluate, intake_decision
from confirm_service.protocol.results import FAIL, INCONCLUSIVE, NOT_APPLICABLE, PASS

from .scenarios import EXPECTED_OUTCOME, Scenario, drift_resolution_hz_s

CLASSES = list(EXPECTED_OUTCOME)
OUTCOMES = list(EXPECTED_OUTCOME.values())


def outcome_label(evaluation: Evaluation, expected: str = "") -> str:
    """'advanced' when open, not held and waiting only for people; else the stopping check
    (for a hold, the expected check when it is among the checks holding the candidate)."""
    if evaluation.state == "rejected":
        stopping = [r for r in evaluation.results if r.outcome == FAIL and r.on_fail == "reject"]
        return stopping[0].kind
    if evaluation.held:
        holding = [
            r.kind
            for r in evaluation.results
            if r.outcome == INCONCLUSIVE or (r.outcome == FAIL and r.on_fail == "hold")
        ]
        return expected if expected in holding else holding[0]
    automatic_done = all(r.outcome in (PASS, NOT_APPLICABLE) for r in evaluation.results)
    if evaluation.state in ("open", "passed_protocol") and automatic_done:
        return "advanced"
    return "stuck"


def confusion_matrix(labels: list[tuple[str, str]]) -> dict[str, dict[str, int]]:
    columns = [*OUTCOMES, "stuck"]
    matrix = {c: dict.fromkeys(columns, 0) for c in CLASSES}
    for true_class, outcome in labels:
        matrix[true_class][outcome if outcome in columns else "stuck"] += 1
    return matrix


def format_matrix(name: str, matrix: dict[str, dict[str, int]]) -> str:
    columns = list(next(iter(matrix.values())))
    width = max(len(c) for c in columns) + 1
    lines = [f"confusion matrix ({name}): rows = true class, columns = outcome"]
    lines.append(" " * 20 + "".join(c[:width].rjust(width) for c in columns))
    for row, counts in matrix.items():
        lines.append(row.ljust(20) + "".join(str(counts[c]).rjust(width) for c in columns))
    return "\n".join(lines)


@pytest.mark.parametrize("protocol_name", ["default_protocol", "strict_protocol"])
def test_confusion_matrix_is_diagonal(request, protocol_name, injection_scenarios, physics_context):
    protocol = request.getfixturevalue(protocol_name)
    labels = []
    for scenario in injection_scenarios.values():
        evaluation = evaluate(protocol, scenario.facts, physics_context=physics_context)
        expected = EXPECTED_OUTCOME[scenario.true_class]
        labels.append((scenario.true_class, outcome_label(evaluation, expected)))
    matrix = confusion_matrix(labels)
    text = format_matrix(protocol.name, matrix)
    print(text)
    for true_class, counts in matrix.items():
        expected = EXPECTED_OUTCOME[true_class]
        off_diagonal = {k: v for k, v in counts.items() if k != expected and v}
        assert not off_diagonal, text
        assert counts[expected] >= 2, text  # every class injected at least twice


def _sky_fixed(injection_scenarios) -> list[Scenario]:
    return [s for s in injection_scenarios.values() if s.true_class == "sky_fixed"]


def test_sky_fixed_signals_pass_every_automatic_check(
    default_protocol, injection_scenarios, physics_context
):
    for scenario in _sky_fixed(injection_scenarios):
        evaluation = evaluate(default_protocol, scenario.facts, physics_context=physics_context)
        assert evaluation.state == "open", scenario.name
        assert evaluation.stage == "review", scenario.name
        assert not evaluation.held
        kinds = {r.kind: r.outcome for r in evaluation.results}
        for kind in (
            "known_interference",
            "nonzero_drift",
            "on_off_cadence",
            "reobservation",
            "independent_site",
        ):
            assert kinds[kind] == PASS, (scenario.name, kind)
        # judged only where Earth's drift changed enough; then it passes, naming the source
        doppler = evaluation.result_for("doppler_consistency")
        assert doppler.outcome in (PASS, NOT_APPLICABLE), scenario.name
        assert (doppler.outcome == PASS) == bool(doppler.details["power_from"]), scenario.name
        # no simultaneous off-target beams were recorded for these
        assert kinds["multi_beam"] == NOT_APPLICABLE
        # the five true detections are linked, the 40 kHz decoys are not
        linked = sum(len(ids) for ids in evaluation.matched.values())
        assert linked == 5, scenario.name
        assert [t.to_stage for t in evaluation.transitions] == [
            "reobservation",
            "independent_site",
            "review",
        ]


def test_recovered_residual_drift_matches_the_injected_one(
    default_protocol, injection_scenarios, physics_context
):
    """Recovered residual drift equals the injected one within the drift quantisation.

    Injected drift noise is uniform within +-0.45 drift resolutions (scenarios.py), and the
    protocol's Earth drift agrees with the exact physics to < 1e-9 Hz/s; so 0.5 resolutions.
    """
    tolerance = 0.5 * drift_resolution_hz_s()
    for scenario in _sky_fixed(injection_scenarios):
        evaluation = evaluate(default_protocol, scenario.facts, physics_context=physics_context)
        result = evaluation.result_for("doppler_consistency")
        recovered = result.details["reference_residual_drift_hz_s"]
        assert abs(recovered - scenario.residual_drift_hz_s) <= tolerance, scenario.name


@pytest.mark.parametrize(
    "true_class,reason_class",
    [
        ("off_source", "failed_cadence"),
        ("zero_drift", "zero_drift"),
        ("in_band", "interference_band"),
        ("multi_beam", "multi_beam"),
    ],
)
def test_interference_is_rejected_by_the_strict_protocol_with_its_reason(
    true_class, reason_class, strict_protocol, injection_scenarios, physics_context
):
    for scenario in injection_scenarios.values():
        if scenario.true_class != true_class:
            continue
        evaluation = evaluate(strict_protocol, scenario.facts, physics_context=physics_context)
        assert evaluation.state == "rejected", scenario.name
        assert evaluation.reason_class == reason_class, scenario.name
        assert evaluation.transitions[-1].to_state == "rejected"


def test_multi_beam_is_held_for_a_person_by_the_default_protocol(
    default_protocol, injection_scenarios, physics_context
):
    for scenario in injection_scenarios.values():
        if scenario.true_class != "multi_beam":
            continue
        evaluation = evaluate(default_protocol, scenario.facts, physics_context=physics_context)
        assert evaluation.state == "open" and evaluation.held
        assert evaluation.hold_reason.startswith("multi_beam:")
        result = evaluation.result_for("multi_beam")
        assert result.measured == 6.0  # two beams beside each of three on-source scans


def test_drift_ignoring_earth_is_distinguishable_in_these_scenarios(injection_scenarios):
    """The constant-drift cases are only meaningful if Earth drift changes by more than the
    default tolerance, 3 x sqrt(2) drift resolutions (0.042 Hz/s), with a factor 3 margin."""
    tolerance = 3.0 * 2**0.5 * drift_resolution_hz_s()
    for scenario in injection_scenarios.values():
        if scenario.true_class == "drift_ignores_earth":
            assert scenario.earth_drift_span_hz_s > 3.0 * tolerance, scenario.name


def test_intake_refuses_listed_bands_only_when_the_protocol_rejects_them(
    default_protocol, strict_protocol, injection_scenarios
):
    """default.toml flags band hits (promoted, then held by known_interference); strict.toml
    rejects them (intake refuses them)."""
    for scenario in injection_scenarios.values():
        facts = scenario.facts
        parts = (facts.reference, facts.reference_observation, facts.target)
        flagged = intake_decision(default_protocol, *parts)
        refused = intake_decision(strict_protocol, *parts)
        assert flagged.promote, (scenario.name, flagged.reason)
        if scenario.true_class == "in_band":
            assert not refused.promote
            assert refused.reason_class == "interference_band"
        else:
            assert refused.promote, (scenario.name, refused.reason)


def test_band_hits_are_held_for_a_person_by_the_default_protocol(
    default_protocol, injection_scenarios, physics_context
):
    for scenario in injection_scenarios.values():
        if scenario.true_class != "in_band":
            continue
        evaluation = evaluate(default_protocol, scenario.facts, physics_context=physics_context)
        assert evaluation.state == "open" and evaluation.held, scenario.name
        result = evaluation.result_for("known_interference")
        assert result.outcome == INCONCLUSIVE and result.details["band_action"] == "flag"
        assert evaluation.hold_reason.startswith("known_interference (inconclusive):")
