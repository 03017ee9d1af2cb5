"""nonzero_drift: a signal with zero drift where Earth's motion gives a drift is local.

A transmitter fixed on the sky drifts at the site by the Earth drift (rotation and orbit) plus
its own residual drift; a transmitter moving with the observer shows no drift (common practice,
no source). Zero means within ``resolution_multiplier`` drift resolutions
(``channel_width_hz / duration_s``, see ``protocol.reference``) of zero.

Applicable detections are the candidate's linked detections in target scans where the Earth
drift itself is farther from zero than that; the check fails when every applicable detection
shows zero drift, and is not applicable when none is (the scans cannot tell).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from confirm_service.protocol.checks._base import CheckParams, PositiveFloat, format_hz_s
from confirm_service.protocol.results import FAIL, NOT_APPLICABLE, PASS, CheckResult, Measurement

if TYPE_CHECKING:
    from confirm_service.protocol.facts import CandidateFacts
    from confirm_service.protocol.matching import CandidateView

KIND = "nonzero_drift"


class Params(CheckParams):
    """Keys of a nonzero_drift check."""

    resolution_multiplier: PositiveFloat


def evaluate(facts: CandidateFacts, params: Params, context: CandidateView) -> CheckResult:
    """Judge whether the observed drift is distinguishable from zero where it should be."""
    k = params.resolution_multiplier
    detections = context.target_detections()
    applicable = [d for d in detections if abs(d.earth_drift_hz_s) > k * d.drift_resolution_hz_s]
    if not applicable:
        return CheckResult(
            KIND,
            NOT_APPLICABLE,
            f"Earth drift is within {k:g} drift resolution(s) of zero in every scan, so a zero "
            "drift cannot be told from a sky-fixed one.",
            details={"detections": len(detections)},
        )
    zero = [d for d in applicable if abs(d.detection.drift_hz_s) <= k * d.drift_resolution_hz_s]
    first = applicable[0]
    details = {
        "applicable": len(applicable),
        "zero_drift": len(zero),
        "earth_drift_hz_s": first.earth_drift_hz_s,
    }
    common: Measurement = {
        "measured": abs(first.detection.drift_hz_s),
        "expected": abs(first.earth_drift_hz_s),
        "tolerance": k * first.drift_resolution_hz_s,
        "unit": "Hz/s",
        "details": details,
    }
    if len(zero) == len(applicable):
        return CheckResult(
            KIND,
            FAIL,
            f"The drift is zero within {k:g} resolution(s) in all {len(applicable)} scan(s) "
            f"where Earth's motion alone gives {format_hz_s(first.earth_drift_hz_s)}, as for a "
            "transmitter moving with the observer.",
            **common,
        )
    return CheckResult(
        KIND,
        PASS,
        f"The drift differs from zero in {len(applicable) - len(zero)} of {len(applicable)} "
        "scan(s) where Earth's motion makes it drift.",
        **common,
    )
