"""The stage machine: from a protocol and a candidate's facts to its state, stage and actions.

Semantics (deterministic: "now" is ``facts.now_unix_s``; no clocks, no randomness):

* Checks of the current stage and of every earlier stage are evaluated every time, so new data
  can still reject a candidate that has moved on. Checks of later stages are evaluated only
  once the candidate enters them.
* A failing check with ``on_fail = "reject"`` (the first, in stage and check order) rejects the
  candidate with the check's ``reason_class``.
* A failing check with ``on_fail = "hold"`` holds the candidate for a person: it stays in its
  stage with ``held = True`` and the check's reason. An ``inconclusive`` check (its data exist
  but cannot decide: ambiguous links, partial coverage, a flagged interference band) holds the
  candidate whatever its ``on_fail``: an automatic decision never rests on such data. A person
  who reviewed it sets ``manual_hold_released``; released holds neither hold nor block
  advancement. A person with a required role whose latest sign-off for the stage is a refusal
  also holds the candidate. A check whose rejection a person overruled (the candidate was
  reopened, ``facts.overruled_checks``) holds instead of rejecting.
* The candidate leaves its stage when every check of the stage passed (or is not applicable,
  or is a released hold), it is not held, and each sign-off rule of ``protocol.signoffs`` is
  met. It then enters the next stage at ``now`` (its ``on_entry`` actions are emitted) and the
  loop continues there; leaving the last stage makes it ``passed_protocol``.
* When a stage cannot be left and ``now >= entered + deadline_hours``: ``escalate`` emits an
  escalate action to the stage's contacts (its idempotency key is fixed per stage entry, so it
  is recorded once), ``expire`` rejects with reason class ``expired``. Deadlines apply to held
  candidates too.
* ``rejected``, ``passed_protocol`` and ``withdrawn`` are final: checks are reported, nothing
  changes.
  ``withdrawn`` is only ever set by a person, never here.

``passed_protocol`` means the candidate passed every stage of this protocol. It is not a detection:
the people responsible examine it, and any public statement follows the institution's policy
and the internationally agreed post-detection principles.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from confirm_service.protocol.bands import BandSet, InterferenceBand, as_band_set
from confirm_service.protocol.checks import get_check
from confirm_service.protocol.facts import (
    STATE_OPEN,
    STATE_PASSED_PROTOCOL,
    STATE_REJECTED,
    TERMINAL_STATES,
    CandidateFacts,
    DetectionFact,
    ObservationFact,
    TargetFact,
)
from confirm_service.protocol.loader import model_of
from confirm_service.protocol.matching import CandidateView, build_candidate_views, is_target_scan
from confirm_service.protocol.reference import PhysicsContext, ReferenceSignal
from confirm_service.protocol.results import (
    ACTION_ESCALATE,
    FAIL,
    INCONCLUSIVE,
    NOT_APPLICABLE,
    PASS,
    REASON_CLASS_EXPIRED,
    Action,
    CheckResult,
    Evaluation,
    IntakeDecision,
    SignoffStatus,
    Transition,
)
from confirm_service.protocol.schema import ProtocolModel, StageModel
from confirm_service.protocol.screening import (
    Reason,
    ScreeningRules,
    code_of,
    intake_codes,
    swept_range_hz,
)
from confirm_service.protocol.signoffs import signoff_statuses, signoffs_met

EVALUATION_CHUNK = 64


def _model(protocol: Any) -> ProtocolModel:
    return model_of(protocol)


def _bands(protocol: Any, bands: BandSet | Sequence[InterferenceBand] | None) -> BandSet:
    if bands is None:
        if isinstance(protocol, ProtocolModel):
            return BandSet(())
        return getattr(protocol, "band_set", None) or BandSet(())
    return as_band_set(bands)


@dataclass
class _Run:
    """Mutable bookkeeping of one evaluation."""

    view: CandidateView
    model: ProtocolModel
    facts: CandidateFacts
    results: dict[tuple[int, int], CheckResult]

    def check_results(self, last_stage: int) -> list[CheckResult]:
        """Results of every check of stages 0..last_stage, computing each once."""
        out = []
        for stage_index in range(last_stage + 1):
            stage = self.model.stages[stage_index]
            for check_index, spec in enumerate(stage.checks):
                key = (stage_index, check_index)
                if key not in self.results:
                    self.results[key] = _run_check(stage, spec, self.facts, self.view)
                out.append(self.results[key])
        return out


def _run_check(
    stage: StageModel, spec: Any, facts: CandidateFacts, view: CandidateView
) -> CheckResult:
    result = get_check(spec.kind).evaluate(facts, spec, view)
    on_fail = spec.on_fail
    if on_fail == "reject" and spec.kind in facts.overruled_checks:
        on_fail = "hold"  # a person overruled this check's rejection: it holds for a person now
    return result.with_origin(stage.name, on_fail, spec.reason_class)


def evaluate(
    protocol: Any,
    facts: CandidateFacts,
    bands: BandSet | Sequence[InterferenceBand] | None = None,
    *,
    physics_context: PhysicsContext | None = None,
) -> Evaluation:
    """Evaluate a candidate: check results, new state and stage, transitions and actions.

    ``protocol`` is a LoadedProtocol or a ProtocolModel; ``bands`` defaults to the loaded
    protocol's bands. Raises ValueError when ``facts.stage`` is not a stage of the protocol.
    """
    return evaluate_many(protocol, [facts], bands, physics_context=physics_context)[0]


def evaluate_many(
    protocol: Any,
    facts_list: Sequence[CandidateFacts],
    bands: BandSet | Sequence[InterferenceBand] | None = None,
    *,
    physics_context: PhysicsContext | None = None,
    chunk_size: int = EVALUATION_CHUNK,
) -> list[Evaluation]:
    """``evaluate`` for many candidates; their physics is computed ``chunk_size`` at a time.

    Gives exactly the same evaluations as calling ``evaluate`` on each candidate.
    """
    model = _model(protocol)
    band_set = _bands(protocol, bands)
    evaluations: list[Evaluation] = []
    for begin in range(0, len(facts_list), max(chunk_size, 1)):
        chunk = facts_list[begin : begin + max(chunk_size, 1)]
        evaluations += _evaluate_chunk(model, chunk, band_set, physics_context)
    return evaluations


def _evaluate_chunk(
    model: ProtocolModel,
    chunk: Sequence[CandidateFacts],
    band_set: BandSet,
    physics_context: PhysicsContext | None,
) -> list[Evaluation]:
    stage_indices = []
    for facts in chunk:
        try:
            stage_indices.append(model.stage_index(facts.stage))
        except KeyError as error:
            raise ValueError(str(error.args[0])) from None
    views = build_candidate_views(model, chunk, band_set, physics_context)
    evaluations = []
    for facts, view, stage_index in zip(chunk, views, stage_indices, strict=True):
        run = _Run(view, model, facts, {})
        if facts.state in TERMINAL_STATES:
            evaluations.append(_final(run, stage_index))
        else:
            evaluations.append(_advance(run, stage_index))
    return evaluations


def _final(run: _Run, stage_index: int) -> Evaluation:
    facts = run.facts
    return Evaluation(
        results=tuple(run.check_results(stage_index)),
        state=facts.state,
        stage=facts.stage,
        transitions=(),
        actions=(),
        held=False,
        hold_reason=None,
        matched=run.view.matched(),
        reason_class=None,
        stage_entered_unix_s=facts.stage_entered_unix_s,
        deadline_unix_s=_deadline_unix_s(run.model.stages[stage_index], facts.stage_entered_unix_s),
        signoffs=signoff_statuses(
            run.model.stages[stage_index], facts.signoffs, facts.stage_entered_unix_s
        ),
    )


def _advance(run: _Run, stage_index: int) -> Evaluation:
    facts, model = run.facts, run.model
    now = facts.now_unix_s
    entered = facts.stage_entered_unix_s
    state, reason_class = STATE_OPEN, None
    transitions: list[Transition] = []
    actions: list[Action] = []
    held, hold_reason = False, None
    while True:
        stage = model.stages[stage_index]
        results = run.check_results(stage_index)
        rejecting = next((r for r in results if r.outcome == FAIL and r.on_fail == "reject"), None)
        if rejecting is not None:
            state, reason_class = STATE_REJECTED, rejecting.reason_class
            transitions.append(
                Transition(
                    stage.name,
                    stage.name,
                    STATE_OPEN,
                    STATE_REJECTED,
                    f"{rejecting.kind} failed: {rejecting.reason}",
                    reason_class,
                    now,
                )
            )
            held, hold_reason = False, None
            break
        statuses = signoff_statuses(stage, facts.signoffs, entered)
        held, hold_reason = _hold(results, statuses, facts.manual_hold_released)
        if not held and _stage_complete(results, stage.name, statuses, facts.manual_hold_released):
            if stage_index == len(model.stages) - 1:
                state = STATE_PASSED_PROTOCOL
                transitions.append(
                    Transition(
                        stage.name,
                        stage.name,
                        STATE_OPEN,
                        STATE_PASSED_PROTOCOL,
                        "passed every stage of the protocol",
                        None,
                        now,
                    )
                )
                break
            next_stage = model.stages[stage_index + 1]
            transitions.append(
                Transition(
                    stage.name,
                    next_stage.name,
                    STATE_OPEN,
                    STATE_OPEN,
                    f"left stage {stage.name!r}: checks passed and sign-offs complete",
                    None,
                    now,
                )
            )
            stage_index, entered = stage_index + 1, now
            actions += stage_entry_actions(
                model, next_stage.name, facts.candidate_id, now, run.view.reference
            )
            continue
        deadline = _deadline_unix_s(stage, entered)
        if deadline is not None and now >= deadline:
            if stage.on_deadline == "expire":
                state, reason_class = STATE_REJECTED, REASON_CLASS_EXPIRED
                transitions.append(
                    Transition(
                        stage.name,
                        stage.name,
                        STATE_OPEN,
                        STATE_REJECTED,
                        f"deadline of stage {stage.name!r} passed "
                        f"({stage.deadline_hours:g} h after entry)",
                        REASON_CLASS_EXPIRED,
                        now,
                    )
                )
                held, hold_reason = False, None
            else:
                actions.append(_escalation(stage, facts.candidate_id, entered, deadline, results))
        break
    stage = model.stages[stage_index]
    return Evaluation(
        results=tuple(run.check_results(stage_index)),
        state=state,
        stage=stage.name,
        transitions=tuple(transitions),
        actions=tuple(actions),
        held=held,
        hold_reason=hold_reason,
        matched=run.view.matched(),
        reason_class=reason_class,
        stage_entered_unix_s=entered,
        deadline_unix_s=_deadline_unix_s(stage, entered),
        signoffs=signoff_statuses(stage, facts.signoffs, entered),
    )


def _stage_complete(
    results: list[CheckResult], stage_name: str, statuses: tuple[SignoffStatus, ...], released: bool
) -> bool:
    for result in results:
        if result.stage != stage_name:
            continue
        if result.outcome in (PASS, NOT_APPLICABLE):
            continue
        if released and _holds(result):
            continue
        return False
    return signoffs_met(statuses)


def _holds(result: CheckResult) -> bool:
    """A result that holds the candidate for a person rather than deciding automatically."""
    return result.outcome == INCONCLUSIVE or (result.outcome == FAIL and result.on_fail == "hold")


def _hold(
    results: list[CheckResult], statuses: tuple[SignoffStatus, ...], released: bool
) -> tuple[bool, str | None]:
    if released:
        return False, None
    for result in results:
        if _holds(result):
            label = " (inconclusive)" if result.outcome == INCONCLUSIVE else ""
            return True, f"{result.kind}{label}: {result.reason}"
    for status in statuses:
        if status.declined_by:
            people = ", ".join(status.declined_by)
            return True, f"sign-off declined by {people} ({status.role})"
    return False, None


def _deadline_unix_s(stage: StageModel, entered_unix_s: float) -> float | None:
    if stage.deadline_hours is None:
        return None
    return entered_unix_s + stage.deadline_hours * 3600.0


def _escalation(
    stage: StageModel,
    candidate_id: int,
    entered_unix_s: float,
    deadline_unix_s: float,
    results: list[CheckResult],
) -> Action:
    waiting = [
        r.kind for r in results if r.stage == stage.name and r.outcome not in (PASS, NOT_APPLICABLE)
    ]
    return Action(
        kind=ACTION_ESCALATE,
        stage=stage.name,
        params={
            "contacts": list(stage.contacts),
            "deadline_unix_s": deadline_unix_s,
            "stage_entered_unix_s": entered_unix_s,
            "waiting_for": waiting,
        },
        key=_action_key(candidate_id, stage.name, entered_unix_s, ACTION_ESCALATE),
    )


def _action_key(candidate_id: int, stage: str, entered_unix_s: float, suffix: str) -> str:
    return f"candidate/{candidate_id}/stage/{stage}/entered/{entered_unix_s!r}/{suffix}"


def stage_entry_actions(
    protocol: Any,
    stage_name: str,
    candidate_id: int,
    entered_unix_s: float,
    reference: ReferenceSignal | None = None,
) -> tuple[Action, ...]:
    """The ``on_entry`` actions of a stage, as intents with idempotency keys.

    Call it for the first stage when a candidate is created; ``evaluate`` emits it for every
    stage entered later. With ``reference`` the parameters carry the candidate's barycentric
    frequency (Hz), residual drift (Hz/s) and reference time (unix s).
    """
    model = _model(protocol)
    stage = model.stages[model.stage_index(stage_name)]
    signal = {}
    if reference is not None:
        signal = {
            "barycentric_frequency_hz": reference.barycentric_frequency_hz,
            "residual_drift_hz_s": reference.residual_drift_hz_s,
            "reference_unix_s": reference.unix_s,
            "target_name": reference.target.name,
            "reference_site": reference.site.code,
        }
    actions = []
    for index, spec in enumerate(stage.on_entry):
        params = _action_params(spec) | signal
        key = _action_key(
            candidate_id, stage.name, entered_unix_s, f"on_entry/{index}/{spec.action}"
        )
        actions.append(Action(spec.action, stage.name, params, key))
    return tuple(actions)


ActionKey = tuple[str, tuple[tuple[str, Any], ...]]
_ACTION_PARAMS: dict[ActionKey, dict[str, Any]] = {}
_ACTION_PARAMS_LIMIT = 4096


def _frozen(value: Any) -> Any:
    return tuple(value) if isinstance(value, list) else value


def action_key(spec: Any) -> ActionKey:
    """A hashable key equal for equal on_entry actions (kind and every key's value)."""
    fields = type(spec).model_fields
    return (spec.action, tuple((name, _frozen(getattr(spec, name))) for name in sorted(fields)))


def _action_params(spec: Any) -> dict[str, Any]:
    """The protocol keys of an on_entry action, cached by the action's value."""
    key = action_key(spec)
    params = _ACTION_PARAMS.get(key)
    if params is None:
        if len(_ACTION_PARAMS) >= _ACTION_PARAMS_LIMIT:
            _ACTION_PARAMS.clear()
        params = _ACTION_PARAMS[key] = spec.model_dump(exclude={"action"})
    return {k: (list(v) if isinstance(v, list) else v) for k, v in params.items()}


def initial_stage(protocol: Any) -> str:
    """Name of the stage a new candidate enters."""
    return _model(protocol).first_stage().name


def intake_decision(
    protocol: Any,
    detection: DetectionFact,
    observation: ObservationFact,
    target: TargetFact | None,
    bands: BandSet | Sequence[InterferenceBand] | None = None,
) -> IntakeDecision:
    """Whether a pipeline detection becomes a candidate under the protocol's [intake] rule.

    Hits in listed bands are refused only when the protocol's band action is ``"reject"``;
    with ``"flag"`` they are promoted and the known_interference check holds them for review.
    """
    model = _model(protocol)
    rule = model.intake
    if target is None:
        return IntakeDecision(
            False, "The scan has no target, so the signal cannot be followed up.", "no_target"
        )
    if rule.require_on_source and not is_target_scan(observation, target):
        return IntakeDecision(
            False, "The detection is not from an on-source scan of the target.", "off_source"
        )
    if not observation.frequency_min_hz <= detection.frequency_hz <= observation.frequency_max_hz:
        return IntakeDecision(
            False, "The detection frequency lies outside the scan's band.", "outside_scan_band"
        )
    rules = ScreeningRules.from_protocol(model)
    f, drift = np.array([detection.frequency_hz]), np.array([detection.drift_hz_s])
    code = int(intake_codes(rules, np.array([detection.snr]), f, drift)[0])
    if code == code_of(Reason.LOW_SNR):
        return IntakeDecision(
            False,
            f"SNR {detection.snr:.1f} is below the intake minimum {rules.min_snr:g}.",
            "low_snr",
        )
    max_drift_hz_s = float(rules.drift_limit_hz_s(f)[0])
    if code == code_of(Reason.DRIFT_OUT_OF_RANGE):
        return IntakeDecision(
            False,
            f"|drift| {abs(detection.drift_hz_s):.4f} Hz/s exceeds the intake maximum "
            f"{max_drift_hz_s:.4g} Hz/s.",
            "drift_out_of_range",
        )
    if rules.exclude_bands:
        hit = _band_hit(detection, observation, _bands(protocol, bands))
        if hit is not None:
            return IntakeDecision(
                False,
                f"The detection sweeps into the listed band {hit.name!r} ({hit.source}).",
                "interference_band",
            )
    return IntakeDecision(
        True,
        f"SNR {detection.snr:.1f} >= {rules.min_snr:g}, |drift| <= {max_drift_hz_s:.4g} Hz/s"
        + (", outside listed bands." if rules.exclude_bands else "."),
    )


def _band_hit(
    detection: DetectionFact, observation: ObservationFact, bands: BandSet
) -> InterferenceBand | None:
    """The first listed band the hit sweeps into over its scan, if any."""
    start_hz = detection.frequency_hz - detection.drift_hz_s * detection.time_offset_s
    low, high = swept_range_hz(
        np.array([start_hz]), np.array([detection.drift_hz_s]), observation.duration_s
    )
    hits = bands.overlapping(float(low[0]), float(high[0]))
    return hits[0] if hits else None
