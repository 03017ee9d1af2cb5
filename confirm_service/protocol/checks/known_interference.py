"""known_interference: the band a detection sweeps during its scan lies in a listed band.

Listed bands hold known human-made emitters (satellite navigation, radar, ISM...; each band's
source is in the band file). A detection drifting at d Hz/s from f at time t sweeps
f + d * (t' - t) for t' over its scan; any overlap with a listed band, widened by ``margin_hz``,
counts. Partner reports on the track sweep f + d * [0, duration].

What a hit in a listed band means is the protocol's ``interference_band_action``: ``"reject"``
fails the check; ``"flag"`` makes it ``inconclusive``, so the candidate waits for a person (a
band is a reason for suspicion, not proof: allocations are regional and not every channel of a
band is in use at every site).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from confirm_service.protocol.checks._base import CheckParams, NonNegativeFloat, format_mhz
from confirm_service.protocol.results import FAIL, INCONCLUSIVE, PASS, CheckResult

if TYPE_CHECKING:
    from confirm_service.protocol.bands import InterferenceBand
    from confirm_service.protocol.facts import CandidateFacts
    from confirm_service.protocol.matching import CandidateView

KIND = "known_interference"


class Params(CheckParams):
    """Keys of a known_interference check."""

    margin_hz: NonNegativeFloat


def _swept_ranges(context: CandidateView) -> list[tuple[str, float, float, float]]:
    """(label, low Hz, high Hz, frequency Hz) swept by each detection and report on the track."""
    ranges = []
    for d in context.target_detections():
        scan = d.observation
        f, drift = d.detection.frequency_hz, d.detection.drift_hz_s
        a = f + drift * (scan.start_unix_s - d.unix_s)
        b = f + drift * (scan.end_unix_s - d.unix_s)
        ranges.append((f"detection {d.detection.id}", min(a, b), max(a, b), f))
    for view in context.reports:
        report = view.report
        if view.present and report.frequency_hz is not None:
            drift = report.drift_hz_s or 0.0
            a, b = report.frequency_hz, report.frequency_hz + drift * report.duration_s
            ranges.append((f"report {report.id}", min(a, b), max(a, b), report.frequency_hz))
    return ranges


def evaluate(facts: CandidateFacts, params: Params, context: CandidateView) -> CheckResult:
    """Fail when any detection of the candidate sweeps into a listed band."""
    ranges = _swept_ranges(context)
    for swept in ranges:
        hits = context.bands_overlapping(swept[1], swept[2], params.margin_hz)
        if hits:
            flag = context.protocol.interference_band_action == "flag"
            return _inside(swept, list(hits), params, flag)
    return CheckResult(
        KIND,
        PASS,
        f"None of {len(ranges)} detection(s) sweeps into any of the {len(context.bands)} listed "
        "bands.",
        measured=context.reference.observed_frequency_hz,
        tolerance=params.margin_hz,
        unit="Hz",
        details={"bands_listed": len(context.bands)},
    )


def _inside(
    swept: tuple[str, float, float, float],
    hits: list[InterferenceBand],
    params: Params,
    flag: bool,
) -> CheckResult:
    label, low, high, frequency = swept
    band = hits[0]
    review = " Flagged for a person to judge." if flag else ""
    return CheckResult(
        KIND,
        INCONCLUSIVE if flag else FAIL,
        f"{label.capitalize()} sweeps {format_mhz(low)} to {format_mhz(high)}, inside "
        f"the listed band {band.name!r} ({format_mhz(band.frequency_min_hz)} to "
        f"{format_mhz(band.frequency_max_hz)}; source: {band.source}).{review}",
        measured=frequency,
        tolerance=params.margin_hz,
        unit="Hz",
        details={
            "band": band.name,
            "band_action": "flag" if flag else "reject",
            "band_source": band.source,
            "bands_hit": [b.name for b in hits],
            "swept_low_hz": low,
            "swept_high_hz": high,
        },
    )
