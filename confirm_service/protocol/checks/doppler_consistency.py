"""doppler_consistency: the residual drift is bounded and the same at every site and time.

For a transmitter fixed on the sky, observed drift = Earth drift (site, time) + residual drift,
and the residual stays constant while the Earth drift changes with site and hour (Doppler
effect of the observer's acceleration; Earth rotation gives up to omega^2 R = 0.034 m/s^2, the
orbit about 0.006 m/s^2 -- IERS/WGS84 constants, orbital value from memory). A signal whose
observed drift stays the same while the Earth drift changes follows the observer, not the sky.

Residual drift = observed drift - Earth drift at the detection. Fails when |reference residual|
exceeds ``max_residual_drift_hz_s`` or when another detection's residual differs from the
reference's by more than ``max(tolerance_hz_s, resolution_multiplier * sqrt(r_i^2 + r_0^2))``
(r = drift resolution of each scan; reports use the reference's resolution). Pending until
``min_detections`` detections (target scans and partner reports with a drift) exist.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from confirm_service.protocol.checks._base import (
    CheckParams,
    NonNegativeFloat,
    PositiveFloat,
    PositiveInt,
    format_hz_s,
)
from confirm_service.protocol.results import FAIL, PASS, PENDING, CheckResult

if TYPE_CHECKING:
    from confirm_service.protocol.facts import CandidateFacts
    from confirm_service.protocol.matching import CandidateView

KIND = "doppler_consistency"


class Params(CheckParams):
    """Keys of a doppler_consistency check."""

    max_residual_drift_hz_s: PositiveFloat
    tolerance_hz_s: PositiveFloat
    resolution_multiplier: NonNegativeFloat
    min_detections: PositiveInt


def _entries(context: CandidateView) -> list[tuple[str, float, float, float]]:
    """(label, residual drift, drift resolution, Earth drift) of every drift measurement."""
    entries = [
        (
            f"detection {d.detection.id} at {d.observation.site.code}",
            d.residual_drift_hz_s,
            d.drift_resolution_hz_s,
            d.earth_drift_hz_s,
        )
        for d in context.target_detections()
    ]
    for report in context.reports:
        residual = report.residual_drift_hz_s
        if residual is not None:
            entries.append(
                (
                    f"report {report.report.id} from {report.report.site.code}",
                    residual,
                    report.drift_resolution_hz_s,
                    report.earth_drift_hz_s,
                )
            )
    return entries


def evaluate(facts: CandidateFacts, params: Params, context: CandidateView) -> CheckResult:
    """Judge the residual drift against its bound and across all detections."""
    reference = context.reference
    r0 = reference.residual_drift_hz_s
    entries = _entries(context)
    earth = [e[3] for e in entries] or [reference.earth_drift_hz_s]
    observed = [e[1] + e[3] for e in entries] or [reference.observed_drift_hz_s]
    details = {
        "reference_residual_drift_hz_s": r0,
        "detections": len(entries),
        "earth_drift_span_hz_s": max(earth) - min(earth),
        "observed_drift_span_hz_s": max(observed) - min(observed),
    }
    if abs(r0) > params.max_residual_drift_hz_s:
        return CheckResult(
            KIND,
            FAIL,
            f"The residual drift {format_hz_s(r0)} exceeds the protocol's bound of "
            f"{params.max_residual_drift_hz_s:g} Hz/s.",
            measured=abs(r0),
            expected=0.0,
            tolerance=params.max_residual_drift_hz_s,
            unit="Hz/s",
            details=details,
        )
    worst_label, worst_residual, worst_tolerance, worst_ratio = "", r0, params.tolerance_hz_s, 0.0
    for label, residual, resolution, _ in entries:
        combined = math.hypot(resolution, reference.drift_resolution_hz_s)
        tolerance = max(params.tolerance_hz_s, params.resolution_multiplier * combined)
        ratio = abs(residual - r0) / tolerance
        if ratio > worst_ratio:
            worst_label, worst_residual, worst_tolerance, worst_ratio = (
                label,
                residual,
                tolerance,
                ratio,
            )
    details["worst"] = worst_label
    common = {
        "measured": worst_residual,
        "expected": r0,
        "tolerance": worst_tolerance,
        "unit": "Hz/s",
        "details": details,
    }
    if worst_ratio > 1.0:
        return CheckResult(
            KIND,
            FAIL,
            f"The residual drift of {worst_label} is {format_hz_s(worst_residual)} against "
            f"{format_hz_s(r0)} at the reference while the Earth drift spans "
            f"{details['earth_drift_span_hz_s']:.4f} Hz/s, so the drift does not follow "
            "Earth's motion.",
            **common,
        )
    if len(entries) < params.min_detections:
        return CheckResult(
            KIND,
            PENDING,
            f"{len(entries)} of {params.min_detections} drift measurements so far; the residual "
            f"drift {format_hz_s(r0)} is within the bound.",
            **common,
        )
    return CheckResult(
        KIND,
        PASS,
        f"The residual drift stays at {format_hz_s(r0)} within {worst_tolerance:.4f} Hz/s over "
        f"{len(entries)} detection(s) while the Earth drift spans "
        f"{details['earth_drift_span_hz_s']:.4f} Hz/s.",
        **common,
    )
