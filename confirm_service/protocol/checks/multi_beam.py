"""multi_beam: seen at the same time in beams or pointings away from the target.

A signal from the target direction enters one beam; one that shows at the same time in beams
or pointings away from the target enters through sidelobes or the receiver (common practice,
no source). Simultaneous means overlapping by at least ``min_overlap_s`` with an on-source scan
in which the candidate is on the track; with ``same_site_only`` only scans of the same site
count. A scan away from the target counts when it covers the predicted window or holds a
detection on the track. Not applicable when no such simultaneous scan was recorded.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from confirm_service.protocol.checks._base import CheckParams, NonNegativeFloat
from confirm_service.protocol.results import FAIL, NOT_APPLICABLE, PASS, CheckResult

if TYPE_CHECKING:
    from confirm_service.protocol.facts import CandidateFacts, ObservationFact
    from confirm_service.protocol.matching import CandidateView

KIND = "multi_beam"


class Params(CheckParams):
    """Keys of a multi_beam check."""

    same_site_only: bool
    min_overlap_s: NonNegativeFloat


def _simultaneous(scan: ObservationFact, on_scan: ObservationFact, params: Params) -> bool:
    """True when the scans overlap by at least min_overlap_s (> 0), at the same site if asked."""
    if params.same_site_only and scan.site != on_scan.site:
        return False
    overlap = min(scan.end_unix_s, on_scan.end_unix_s) - max(
        scan.start_unix_s, on_scan.start_unix_s
    )
    return overlap > 0.0 and overlap >= params.min_overlap_s


def evaluate(facts: CandidateFacts, params: Params, context: CandidateView) -> CheckResult:
    """Fail when a simultaneous scan away from the target has the signal on the track."""
    seen_in = [v.observation for v in context.target_scans() if v.present]
    simultaneous = [
        view
        for view in context.observations
        if not view.is_target_scan
        and (view.covers or view.present)
        and any(_simultaneous(view.observation, on_scan, params) for on_scan in seen_in)
    ]
    if not simultaneous:
        return CheckResult(
            KIND,
            NOT_APPLICABLE,
            "No beam or pointing away from the target covering the predicted frequency was "
            "recorded at the same time.",
        )
    present = [v for v in simultaneous if v.present]
    details = {
        "simultaneous_scans": len(simultaneous),
        "scan_ids_present": [v.observation.id for v in present],
        "beams_present": sorted({v.observation.beam or "" for v in present}),
    }
    if present:
        first = present[0].observation
        where = f"beam {first.beam!r}" if first.beam else f"scan {first.id}"
        return CheckResult(
            KIND,
            FAIL,
            f"The signal is on the track at the same time in {len(present)} beam(s) or "
            f"pointing(s) away from the target (first: {where} at {first.site.code}).",
            measured=float(len(present)),
            expected=0.0,
            tolerance=0.0,
            unit="scans",
            details=details,
        )
    return CheckResult(
        KIND,
        PASS,
        f"Absent from all {len(simultaneous)} simultaneous beam(s) or pointing(s) away from the "
        "target.",
        measured=0.0,
        expected=0.0,
        tolerance=0.0,
        unit="scans",
        details=details,
    )
