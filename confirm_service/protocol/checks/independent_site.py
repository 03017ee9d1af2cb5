"""independent_site: seen at a distant site at the frequency predicted for that site and time.

A local emitter cannot reach a receiver thousands of km away; a sky-fixed transmitter shows at
every site that looks, Doppler-shifted by that site's motion (common practice, no source).

A sighting is a linked detection in a target scan or a partner report on the track. The check
passes when a sighting is at a site at least ``min_distance_km`` (straight line) from the
reference site and from every site that saw the signal before it. It fails once scans or reports
from sites that far from every site that has seen it covered the predicted window and saw
nothing in ``max_misses`` observing sessions (a site and a night; counting looks ending after
the reference scan began); it is pending until then. A look that could not have seen the signal
(target below the site's horizon limit, or expected SNR below the look's threshold) is recorded
as not constraining and is no miss (``protocol.misses``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from confirm_service.protocol.checks._base import CheckParams, PositiveFloat, PositiveInt
from confirm_service.protocol.misses import Misses, judge_all, report_look, scan_look
from confirm_service.protocol.results import FAIL, PASS, PENDING, CheckResult

if TYPE_CHECKING:
    from confirm_service.protocol.facts import CandidateFacts, SiteFact
    from confirm_service.protocol.matching import CandidateView

KIND = "independent_site"


class Params(CheckParams):
    """Keys of an independent_site check."""

    min_distance_km: PositiveFloat
    max_misses: PositiveInt
    max_pointing_offset_deg: PositiveFloat | None = None
    """A look pointed farther than this from the target (deg) is not constraining; unset,
    pointing is recorded but not judged (the limit depends on the partners' beams)."""


@dataclass(frozen=True, slots=True)
class _Sighting:
    site: SiteFact
    unix_s: float
    label: str
    offset_hz: float
    tolerance_hz: float


def _sightings(context: CandidateView) -> list[_Sighting]:
    found = [
        _Sighting(
            d.observation.site,
            d.unix_s,
            f"detection {d.detection.id}",
            d.offset_hz,
            d.tolerance_hz,
        )
        for d in context.target_detections()
    ]
    for view in context.reports:
        if view.present and view.report.frequency_hz is not None:
            found.append(
                _Sighting(
                    view.report.site,
                    view.report.sighting_unix_s,
                    f"report {view.report.id}",
                    view.report.frequency_hz - view.predicted_frequency_hz,
                    view.frequency_tolerance_hz,
                )
            )
    return sorted(found, key=lambda s: (s.unix_s, s.label))


def _nearest_km(context: CandidateView, site: SiteFact, others: list[SiteFact]) -> float:
    return min(context.distance_km(site, other) for other in others)


def evaluate(facts: CandidateFacts, params: Params, context: CandidateView) -> CheckResult:
    """Look for a sighting at a site far from every site that saw the signal before."""
    reference_site = context.reference.site
    sightings = _sightings(context)
    seen_sites: list[SiteFact] = [reference_site]
    for sighting in sightings:
        earlier = [reference_site] + [s.site for s in sightings if s.unix_s < sighting.unix_s]
        distance = _nearest_km(context, sighting.site, earlier)
        if distance >= params.min_distance_km:
            return CheckResult(
                KIND,
                PASS,
                f"Seen at {sighting.site.code}, {distance:.0f} km from every site that saw it "
                f"before, {sighting.offset_hz:+.1f} Hz from the frequency predicted there.",
                measured=sighting.offset_hz,
                expected=0.0,
                tolerance=sighting.tolerance_hz,
                unit="Hz",
                details={
                    "sighting": sighting.label,
                    "site": sighting.site.code,
                    "offset_hz": sighting.offset_hz,
                    "distance_km": distance,
                    "min_distance_km": params.min_distance_km,
                },
            )
        if sighting.site not in seen_sites:
            seen_sites.append(sighting.site)
    misses = _misses(context, seen_sites, params.min_distance_km, params.max_pointing_offset_deg)
    sessions = len(misses.sessions)
    details = misses.details() | {"sites_seen": [s.code for s in seen_sites]}
    if sessions >= params.max_misses:
        return CheckResult(
            KIND,
            FAIL,
            f"Sites at least {params.min_distance_km:g} km from every site that saw the signal "
            f"covered the predicted frequency in {sessions} observing session(s) and saw "
            f"nothing.{misses.summary()}",
            measured=float(sessions),
            expected=float(params.max_misses),
            unit="sessions",
            details=details,
        )
    return CheckResult(
        KIND,
        PENDING,
        f"Waiting for a site at least {params.min_distance_km:g} km away to observe "
        f"({sessions} of {params.max_misses} allowed missed sessions so far).{misses.summary()}",
        details=details,
    )


def _misses(
    context: CandidateView,
    seen_sites: list[SiteFact],
    min_km: float,
    max_pointing_offset_deg: float | None,
) -> Misses:
    """Looks from far sites that covered the prediction and saw nothing, judged."""
    begin = context.reference_view.observation.start_unix_s

    def _far(context: CandidateView, site: SiteFact) -> bool:
        return _nearest_km(context, site, seen_sites) >= min_km

    looks = []
    for view in context.target_scans()[1:]:
        scan = view.observation
        ended_after = scan.end_unix_s >= begin
        if view.covers and not view.present and ended_after and _far(context, scan.site):
            looks.append(scan_look(view))
    width = context.reference_view.observation.channel_width_hz
    for report_view in context.reports:
        report = report_view.report
        ended_after = report.unix_s + report.duration_s >= begin
        if (
            report_view.covers
            and not report_view.present
            and ended_after
            and _far(context, report.site)
        ):
            looks.append(report_look(report_view, width))
    return judge_all(context, looks, max_pointing_offset_deg)
