"""reobservation: seen again in a later on-source scan at the predicted frequency.

A persistent transmitter on the sky is there again hours later, at the frequency the
sky-fixed hypothesis predicts for that site and time (common practice, no source). Later means
starting at least ``min_gap_hours`` after the reference detection; with ``same_site_only``
only scans of the reference site count. Pending until such a scan exists; fails once
``max_misses`` later on-source scans covered the predicted window and the signal was absent.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from confirm_service.protocol.checks._base import (
    CheckParams,
    PositiveFloat,
    PositiveInt,
    format_hours,
)
from confirm_service.protocol.results import FAIL, PASS, PENDING, CheckResult

if TYPE_CHECKING:
    from confirm_service.protocol.facts import CandidateFacts
    from confirm_service.protocol.matching import CandidateView

KIND = "reobservation"


class Params(CheckParams):
    """Keys of a reobservation check."""

    min_gap_hours: PositiveFloat
    max_misses: PositiveInt
    same_site_only: bool


def evaluate(facts: CandidateFacts, params: Params, context: CandidateView) -> CheckResult:
    """Look for the signal in later on-source scans."""
    reference = context.reference
    earliest = reference.unix_s + params.min_gap_hours * 3600.0
    later = [
        v
        for v in context.target_scans()[1:]
        if v.observation.start_unix_s >= earliest
        and (not params.same_site_only or v.observation.site == reference.site)
    ]
    present = [v for v in later if v.present]
    misses = [v for v in later if v.covers and not v.present]
    details = {
        "later_scans": len(later),
        "present_scan_ids": [v.observation.id for v in present],
        "missed_scan_ids": [v.observation.id for v in misses],
    }
    if present:
        first = present[0]
        gap_s = first.linked[0].unix_s - reference.unix_s
        return CheckResult(
            KIND,
            PASS,
            f"Seen again at {first.observation.site.code} {format_hours(gap_s)} after the "
            f"reference, {first.linked[0].offset_hz:+.1f} Hz from the predicted frequency.",
            measured=gap_s / 3600.0,
            expected=params.min_gap_hours,
            unit="h",
            details=details | {"offset_hz": first.linked[0].offset_hz},
        )
    if len(misses) >= params.max_misses:
        return CheckResult(
            KIND,
            FAIL,
            f"Absent from {len(misses)} on-source scan(s) at least {params.min_gap_hours:g} h "
            "later that covered the predicted frequency.",
            measured=float(len(misses)),
            expected=float(params.max_misses),
            unit="scans",
            details=details,
        )
    return CheckResult(
        KIND,
        PENDING,
        f"Waiting for an on-source scan at least {params.min_gap_hours:g} h after the "
        f"reference ({len(misses)} of {params.max_misses} allowed misses so far).",
        details=details,
    )
