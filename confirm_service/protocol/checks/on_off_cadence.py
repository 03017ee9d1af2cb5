"""on_off_cadence: present in the on-source scans of its cadence, absent from the off-source ones.

A signal from the target shows only while the telescope points at it; one that also shows while
it points elsewhere enters through sidelobes or the receiver itself (common practice, no source).

The cadence is the set of scans at the reference's site sharing the reference scan's ``cadence``
label. On-source scans are scans of the target; off-source scans are the others. A scan counts
when it covers its search window (or holds the signal). An off-source scan is searched over the
widened window at any drift (``matching``): a hit on the predicted track there is unambiguous;
a hit elsewhere in the window may be another signal, so one such scan alone makes the check
``inconclusive`` (held for a person) and two or more fail it. On-source scans need the signal
on the track in frequency and drift; a scan with only a hit whose drift disagrees is ambiguous.

Pending until ``min_on_scans`` on-source and ``min_off_scans`` off-source scans count;
inconclusive when scans that only partly cover the window are what keeps those numbers short,
or when the on-source fraction falls short only because of ambiguous scans; fails when the
signal is on the track in less than ``min_on_fraction`` of the on-source scans.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from confirm_service.protocol.checks._base import CheckParams, Fraction, PositiveInt
from confirm_service.protocol.results import (
    FAIL,
    INCONCLUSIVE,
    PASS,
    PENDING,
    CheckResult,
    Measurement,
)

if TYPE_CHECKING:
    from confirm_service.protocol.facts import CandidateFacts
    from confirm_service.protocol.matching import CandidateView, ObservationView

KIND = "on_off_cadence"


class Params(CheckParams):
    """Keys of an on_off_cadence check."""

    min_on_scans: PositiveInt
    min_off_scans: PositiveInt
    min_on_fraction: Fraction


def _counted(views: list[ObservationView], off_source: bool) -> list[ObservationView]:
    seen = [v.seen_at_any_drift if off_source else v.present for v in views]
    return [v for v, s in zip(views, seen, strict=True) if v.covers or s]


def _ids(views: list[ObservationView]) -> list[int]:
    return [v.observation.id for v in views]


def evaluate(facts: CandidateFacts, params: Params, context: CandidateView) -> CheckResult:
    """Judge the reference's cadence."""
    reference_scan = context.reference_view.observation
    label = reference_scan.cadence
    if label is None:
        return CheckResult(KIND, PENDING, "The reference scan belongs to no cadence yet.")
    members = [
        v
        for v in context.observations
        if v.observation.cadence == label and v.observation.site == reference_scan.site
    ]
    on_members = [v for v in members if v.is_target_scan]
    off_members = [v for v in members if not v.is_target_scan]
    on_scans = _counted(on_members, off_source=False)
    off_scans = _counted(off_members, off_source=True)
    on_present = [v for v in on_scans if v.present]
    on_ambiguous = [v for v in on_scans if not v.present and v.drift_mismatch is not None]
    off_on_track = [v for v in off_scans if v.present]
    off_nearby = [v for v in off_scans if not v.present and v.nearby is not None]
    details = {
        "cadence": label,
        "on_scans": len(on_scans),
        "on_scans_present": len(on_present),
        "on_scan_ids_drift_mismatch": _ids(on_ambiguous),
        "off_scans": len(off_scans),
        "off_scans_present": len(off_on_track) + len(off_nearby),
        "off_scan_ids_on_track": _ids(off_on_track),
        "off_scan_ids_nearby": _ids(off_nearby),
        "nearby_offsets_hz": [v.nearby.offset_hz for v in off_nearby if v.nearby is not None],
        "partial_scan_ids": _ids([v for v in members if v.partly_covers and v not in on_scans]),
    }
    off_result = _off_source_result(label, off_on_track, off_nearby, details)
    if off_result is not None:
        return off_result
    if len(on_scans) < params.min_on_scans or len(off_scans) < params.min_off_scans:
        return _short_cadence(label, params, members, on_scans, off_scans, details)
    fraction = len(on_present) / len(on_scans)
    common: Measurement = {
        "measured": fraction,
        "expected": params.min_on_fraction,
        "unit": "fraction of on-source scans",
        "details": details,
    }
    if fraction < params.min_on_fraction:
        hopeful = (len(on_present) + len(on_ambiguous)) / len(on_scans)
        outcome = INCONCLUSIVE if hopeful >= params.min_on_fraction else FAIL
        why = (
            f"; {len(on_ambiguous)} of them hold a hit on the frequency track whose drift "
            "disagrees, which may be the signal"
            if on_ambiguous
            else ""
        )
        return CheckResult(
            KIND,
            outcome,
            f"The signal is on the track in only {len(on_present)} of {len(on_scans)} "
            f"on-source scans of cadence {label!r}{why}.",
            **common,
        )
    return CheckResult(
        KIND,
        PASS,
        f"Present in {len(on_present)} of {len(on_scans)} on-source scans and absent from all "
        f"{len(off_scans)} off-source scans of cadence {label!r} (searched at any drift).",
        **common,
    )


def _off_source_result(
    label: str,
    on_track: list[ObservationView],
    nearby: list[ObservationView],
    details: dict[str, Any],
) -> CheckResult | None:
    """Fail on the track or in two off-source scans; inconclusive on one ambiguous scan."""
    seen = len(on_track) + len(nearby)
    if not seen:
        return None
    common: Measurement = {
        "measured": float(seen),
        "expected": 0.0,
        "tolerance": 0.0,
        "unit": "off-source scans",
        "details": details,
    }
    if on_track or len(nearby) >= 2:
        where = "on the predicted track" if on_track else "near the reference frequency"
        return CheckResult(
            KIND,
            FAIL,
            f"A signal shows {where} in {seen} off-source scan(s) of cadence {label!r}, so it "
            "does not come from the target direction alone.",
            **common,
        )
    offset = nearby[0].nearby.offset_hz if nearby[0].nearby is not None else 0.0
    return CheckResult(
        KIND,
        INCONCLUSIVE,
        f"One off-source scan of cadence {label!r} holds a hit {offset:+.1f} Hz off the "
        "predicted track, which may be this signal or another one; a person should look.",
        **common,
    )


def _short_cadence(
    label: str,
    params: Params,
    members: list[ObservationView],
    on_scans: list[ObservationView],
    off_scans: list[ObservationView],
    details: dict[str, Any],
) -> CheckResult:
    """Pending for more scans, or inconclusive when partly covering scans are the shortfall."""
    partial_on = [v for v in members if v.is_target_scan and v.partly_covers and v not in on_scans]
    partial_off = [
        v for v in members if not v.is_target_scan and v.partly_covers and v not in off_scans
    ]
    enough_with_partial = (
        len(on_scans) + len(partial_on) >= params.min_on_scans
        and len(off_scans) + len(partial_off) >= params.min_off_scans
    )
    sentence = (
        f"Cadence {label!r} has {len(on_scans)} of {params.min_on_scans} on-source and "
        f"{len(off_scans)} of {params.min_off_scans} off-source scans covering the search window"
    )
    if enough_with_partial and (partial_on or partial_off):
        return CheckResult(
            KIND,
            INCONCLUSIVE,
            f"{sentence}; {len(partial_on) + len(partial_off)} more only partly cover it, so "
            "the cadence cannot decide.",
            details=details,
        )
    return CheckResult(KIND, PENDING, f"{sentence}.", details=details)
