"""reobservation: seen again in a later on-source look at the predicted frequency.

A persistent transmitter on the sky is there again hours later, at the frequency the
sky-fixed hypothesis predicts for that site and time (common practice, no source). Later means
starting at least ``min_gap_hours`` after the reference detection; with ``same_site_only``
only looks from the reference site count. A look is a later on-source scan of the target or a
partner's report (a report carrying its scan counts once, through that scan; one without its
scan counts as itself), so a report feeds this check and ``independent_site`` alike.

Pending until such a look exists; fails once the signal was absent from looks that covered the
predicted window in ``max_misses`` observing sessions (a site and a night). A look that could not
have seen the signal (target below the site's horizon limit, or expected SNR below the look's
threshold) is recorded as not constraining and is no miss (``protocol.misses``).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from confirm_service.protocol.checks._base import (
    CheckParams,
    PositiveFloat,
    PositiveInt,
    format_hours,
)
from confirm_service.protocol.misses import judge_all, report_look, scan_look
from confirm_service.protocol.results import FAIL, PASS, PENDING, CheckResult

if TYPE_CHECKING:
    from confirm_service.protocol.facts import CandidateFacts, SiteFact
    from confirm_service.protocol.matching import CandidateView, ObservationView, ReportView

KIND = "reobservation"


class Params(CheckParams):
    """Keys of a reobservation check."""

    min_gap_hours: PositiveFloat
    max_misses: PositiveInt
    max_pointing_offset_deg: PositiveFloat | None = None
    """A look pointed farther than this from the target (deg) is not constraining; unset,
    pointing is recorded but not judged (the limit depends on the partners' beams)."""
    same_site_only: bool


def evaluate(facts: CandidateFacts, params: Params, context: CandidateView) -> CheckResult:
    """Look for the signal in later on-source scans and partner reports."""
    reference = context.reference
    earliest = reference.unix_s + params.min_gap_hours * 3600.0

    def _counts(site: SiteFact, start_unix_s: float) -> bool:
        same_site = not params.same_site_only or site == reference.site
        return start_unix_s >= earliest and same_site

    later = [
        v
        for v in context.target_scans()[1:]
        if _counts(v.observation.site, v.observation.start_unix_s)
    ]
    reports = [v for v in context.reports if _counts(v.report.site, v.report.unix_s)]
    present = [v for v in later if v.present]
    present_reports = [v for v in reports if v.present]
    width = context.reference_view.observation.channel_width_hz
    misses = judge_all(
        context,
        [scan_look(v) for v in later if v.covers and not v.present]
        + [report_look(v, width) for v in reports if v.covers and not v.present],
        params.max_pointing_offset_deg,
    )
    missed = set(misses.labels)
    details = misses.details() | {
        "later_scans": len(later),
        "later_reports": len(reports),
        "present_scan_ids": [v.observation.id for v in present],
        "present_report_ids": [v.report.id for v in present_reports],
        "missed_scan_ids": [
            v.observation.id for v in later if f"scan {v.observation.id}" in missed
        ],
        "missed_report_ids": [v.report.id for v in reports if f"report {v.report.id}" in missed],
    }
    sightings = _sightings(present, present_reports)
    if sightings:
        unix_s, site_code, offset_hz, tolerance_hz = min(sightings)
        gap_s = unix_s - reference.unix_s
        return CheckResult(
            KIND,
            PASS,
            f"Seen again at {site_code} {format_hours(gap_s)} after the reference, "
            f"{offset_hz:+.1f} Hz from the predicted frequency.",
            measured=offset_hz,
            expected=0.0,
            tolerance=tolerance_hz,
            unit="Hz",
            details=details
            | {
                "offset_hz": offset_hz,
                "gap_hours": gap_s / 3600.0,
                "min_gap_hours": params.min_gap_hours,
            },
        )
    sessions = len(misses.sessions)
    if sessions >= params.max_misses:
        return CheckResult(
            KIND,
            FAIL,
            f"Absent from on-source looks at least {params.min_gap_hours:g} h later that covered "
            f"the predicted frequency, in {sessions} observing session(s).{misses.summary()}",
            measured=float(sessions),
            expected=float(params.max_misses),
            unit="sessions",
            details=details,
        )
    return CheckResult(
        KIND,
        PENDING,
        f"Waiting for an on-source look at least {params.min_gap_hours:g} h after the "
        f"reference ({sessions} of {params.max_misses} allowed missed sessions so far)."
        f"{misses.summary()}",
        details=details,
    )


def _sightings(
    present: list[ObservationView], present_reports: list[ReportView]
) -> list[tuple[float, str, float, float]]:
    """(instant unix s, site code, observed minus predicted Hz, tolerance Hz) of each later
    sighting: the best link of each scan, and each report on the track."""
    return [
        (d.unix_s, d.observation.site.code, d.offset_hz, d.tolerance_hz)
        for v in present
        for d in v.linked[:1]
    ] + [
        (
            v.report.sighting_unix_s,
            v.report.site.code,
            (v.report.frequency_hz or 0.0) - v.predicted_frequency_hz,
            v.frequency_tolerance_hz,
        )
        for v in present_reports
    ]
