"""doppler_consistency: the residual drift is bounded and the same at every site and time.

For a transmitter fixed on the sky, observed drift = Earth drift (site, time) + residual drift,
and the residual stays constant while the Earth drift changes with site and hour (Doppler
effect of the observer's acceleration; Earth rotation gives up to omega^2 R = 0.034 m/s^2, the
orbit about 0.006 m/s^2 -- IERS/WGS84 constants, orbital value from memory). A signal whose
observed drift stays the same while the Earth drift changes follows the observer, not the sky.

Residual drift = observed drift - Earth drift at the detection's instant. Fails when
|reference residual| exceeds ``max_residual_drift_hz_s`` (or ``max_residual_drift_nhz``, Hz/s
per GHz). The comparison has power only where the Earth drift differs from the reference's by
at least ``min_earth_drift_span_tolerances`` tolerances (tolerance = max(``tolerance_hz_s``,
``resolution_multiplier * sqrt(r_i^2 + r_0^2)``), r = drift resolution of each scan; reports use
the reference's; the rule's one home is ``protocol.drift_power``, which follow-up requests use
to pick windows with power): with scans minutes apart at one site Earth's drift barely
changes, so any drift would agree, and the check is ``not_applicable`` until such an
observation exists. The observations that gave it power are listed in ``details["power_from"]``.

With power, the check fails when a measurement's residual differs from the reference's by more
than its tolerance. Measurements come from linked detections and partner sightings, and from
hits on the frequency track whose drift disagrees (``drift_mismatch``), which may belong to
another signal: one such hit alone makes the check ``inconclusive``, two or more fail it.
Pending until ``min_detections`` drift measurements (target scans and reports) exist.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from pydantic import model_validator

from confirm_service.protocol.checks._base import (
    CheckParams,
    NonNegativeFloat,
    PositiveFloat,
    PositiveInt,
    drift_limit_hz_s,
    exactly_one_drift_limit,
    format_hz_s,
)
from confirm_service.protocol.drift_power import DEFAULT_RULE, rule_of
from confirm_service.protocol.results import (
    FAIL,
    INCONCLUSIVE,
    NOT_APPLICABLE,
    PASS,
    PENDING,
    CheckResult,
)

if TYPE_CHECKING:
    from confirm_service.protocol.facts import CandidateFacts
    from confirm_service.protocol.matching import CandidateView

KIND = "doppler_consistency"
DEFAULT_SPAN_TOLERANCES = DEFAULT_RULE.power_tolerances


class Params(CheckParams):
    """Keys of a doppler_consistency check."""

    max_residual_drift_hz_s: PositiveFloat | None = None
    max_residual_drift_nhz: PositiveFloat | None = None
    tolerance_hz_s: PositiveFloat
    resolution_multiplier: NonNegativeFloat
    min_detections: PositiveInt
    min_earth_drift_span_tolerances: PositiveFloat = DEFAULT_SPAN_TOLERANCES

    @model_validator(mode="after")
    def _one_bound(self) -> Params:
        exactly_one_drift_limit(self, "max_residual_drift")
        return self


@dataclass(frozen=True, slots=True)
class _Entry:
    """One drift measurement: residual, resolution and Earth drift (Hz/s), and its standing."""

    label: str
    residual_hz_s: float
    resolution_hz_s: float
    earth_drift_hz_s: float
    ambiguous: bool


def _entries(context: CandidateView) -> list[_Entry]:
    """Every drift measurement other than the reference, target scans first, then reports."""
    entries = []
    reference_id = context.facts.reference.id
    for view in context.target_scans():
        for d, ambiguous in [(x, view.extra_matches > 0) for x in view.linked] + (
            [(view.drift_mismatch, True)] if view.drift_mismatch is not None else []
        ):
            if d.detection.id == reference_id:
                continue
            entries.append(
                _Entry(
                    f"detection {d.detection.id} at {d.observation.site.code}",
                    d.residual_drift_hz_s,
                    d.drift_resolution_hz_s,
                    d.earth_drift_hz_s,
                    ambiguous,
                )
            )
    for report in context.reports:
        residual = report.residual_drift_hz_s
        if residual is not None:
            entries.append(
                _Entry(
                    f"report {report.report.id} from {report.report.site.code}",
                    residual,
                    report.drift_resolution_hz_s,
                    report.earth_drift_hz_s,
                    report.drift_mismatch,
                )
            )
    return entries


def evaluate(facts: CandidateFacts, params: Params, context: CandidateView) -> CheckResult:
    """Judge the residual drift against its bound and, where Earth's drift changed, across
    every measurement."""
    reference = context.reference
    r0 = reference.residual_drift_hz_s
    bound = drift_limit_hz_s(
        params.max_residual_drift_hz_s,
        params.max_residual_drift_nhz,
        reference.observed_frequency_hz,
    )
    entries = _entries(context)
    earth = [reference.earth_drift_hz_s, *(e.earth_drift_hz_s for e in entries)]
    details: dict[str, Any] = {
        "reference_residual_drift_hz_s": r0,
        "reference_earth_drift_hz_s": reference.earth_drift_hz_s,
        "detections": 1 + len(entries),
        "earth_drift_span_hz_s": max(earth) - min(earth),
        "bound_hz_s": bound,
    }
    if abs(r0) > bound:
        return CheckResult(
            KIND,
            FAIL,
            f"The residual drift {format_hz_s(r0)} exceeds the protocol's bound of "
            f"{bound:.4g} Hz/s.",
            measured=r0,
            expected=0.0,
            tolerance=bound,
            unit="Hz/s",
            details=details,
        )
    rule = rule_of(params)
    r_ref = reference.drift_resolution_hz_s
    tolerance = {e.label: rule.tolerance(e.resolution_hz_s, r_ref) for e in entries}
    own_tolerance = rule.tolerance(r_ref, r_ref)
    needed = rule.power_tolerances
    powered = [
        e
        for e in entries
        if rule.has_power(e.earth_drift_hz_s - reference.earth_drift_hz_s, tolerance[e.label])
    ]
    details["power_from"] = [e.label for e in powered]
    details["power_threshold_hz_s"] = needed * own_tolerance
    if not powered:
        largest = max(
            (abs(e.earth_drift_hz_s - reference.earth_drift_hz_s) for e in entries), default=0.0
        )
        return _without_power(r0, len(entries), largest, needed * own_tolerance, details)
    mismatched = [e for e in powered if abs(e.residual_hz_s - r0) > tolerance[e.label]]
    details["mismatched"] = [e.label for e in mismatched]
    worst = max(powered, key=lambda e: abs(e.residual_hz_s - r0) / tolerance[e.label])
    details["worst"] = worst.label
    common = {
        "measured": worst.residual_hz_s,
        "expected": r0,
        "tolerance": tolerance[worst.label],
        "unit": "Hz/s",
        "details": details,
    }
    if mismatched:
        decided = len(mismatched) >= 2 or any(not e.ambiguous for e in mismatched)
        shown = max(mismatched, key=lambda e: abs(e.residual_hz_s - r0) / tolerance[e.label])
        common |= {"measured": shown.residual_hz_s, "tolerance": tolerance[shown.label]}
        tail = (
            ", so the drift does not follow Earth's motion."
            if decided
            else "; that one hit may belong to another signal, so a person should look."
        )
        return CheckResult(
            KIND,
            FAIL if decided else INCONCLUSIVE,
            f"The residual drift of {shown.label} is {format_hz_s(shown.residual_hz_s)} against "
            f"{format_hz_s(r0)} at the reference while the Earth drift there differs by "
            f"{format_hz_s(shown.earth_drift_hz_s - reference.earth_drift_hz_s)}{tail}",
            **common,
        )
    count = 1 + len(entries)
    if count < params.min_detections:
        return CheckResult(
            KIND,
            PENDING,
            f"{count} of {params.min_detections} drift measurements so far; the residual "
            f"drift {format_hz_s(r0)} agrees wherever Earth's drift changed.",
            **common,
        )
    return CheckResult(
        KIND,
        PASS,
        f"The residual drift stays at {format_hz_s(r0)} within {tolerance[worst.label]:.4f} "
        f"Hz/s over {count} measurement(s) while the Earth drift spans "
        f"{details['earth_drift_span_hz_s']:.4f} Hz/s ({len(powered)} observation(s) with a "
        "different Earth drift).",
        **common,
    )


def _without_power(
    r0: float, others: int, largest_hz_s: float, threshold_hz_s: float, details: dict
) -> CheckResult:
    return CheckResult(
        KIND,
        NOT_APPLICABLE,
        f"Earth's drift at the {others} other measurement(s) differs from the reference's by at "
        f"most {largest_hz_s:.4f} Hz/s, less than the {threshold_hz_s:.4f} Hz/s needed to tell "
        f"a drift that ignores Earth's motion from one that follows it (residual "
        f"{format_hz_s(r0)}); an observation at another hour or a distant site can decide.",
        measured=largest_hz_s,
        expected=threshold_hz_s,
        unit="Hz/s",
        details=details,
    )
