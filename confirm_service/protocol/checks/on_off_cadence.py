"""on_off_cadence: present in the on-source scans of its cadence, absent from the off-source ones.

A signal from the target shows only while the telescope points at it; one that also shows while
it points elsewhere enters through sidelobes or the receiver itself (common practice, no source).

The cadence is the set of scans at the reference's site sharing the reference scan's ``cadence``
label. On-source scans are scans of the target; off-source scans are the others. A scan counts
when it covers the predicted window (or holds a detection on the track). Any detection on the
track in an off-source scan fails at once; otherwise the check is pending until at least
``min_on_scans`` on-source and ``min_off_scans`` off-source scans count, then fails when the
signal is on the track in less than ``min_on_fraction`` of the on-source scans.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from confirm_service.protocol.checks._base import CheckParams, Fraction, PositiveInt
from confirm_service.protocol.results import FAIL, PASS, PENDING, CheckResult

if TYPE_CHECKING:
    from confirm_service.protocol.facts import CandidateFacts
    from confirm_service.protocol.matching import CandidateView, ObservationView

KIND = "on_off_cadence"


class Params(CheckParams):
    """Keys of an on_off_cadence check."""

    min_on_scans: PositiveInt
    min_off_scans: PositiveInt
    min_on_fraction: Fraction


def _counted(views: list[ObservationView]) -> list[ObservationView]:
    return [v for v in views if v.covers or v.present]


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
    on_scans = _counted([v for v in members if v.is_target_scan])
    off_scans = _counted([v for v in members if not v.is_target_scan])
    on_present = [v for v in on_scans if v.present]
    off_present = [v for v in off_scans if v.present]
    details = {
        "cadence": label,
        "on_scans": len(on_scans),
        "on_scans_present": len(on_present),
        "off_scans": len(off_scans),
        "off_scans_present": len(off_present),
        "off_scan_ids_present": [v.observation.id for v in off_present],
    }
    if off_present:
        return CheckResult(
            KIND,
            FAIL,
            f"The signal is on the predicted track in {len(off_present)} off-source scan(s) of "
            f"cadence {label!r}, so it does not come from the target direction alone.",
            measured=float(len(off_present)),
            expected=0.0,
            tolerance=0.0,
            unit="scans",
            details=details,
        )
    if len(on_scans) < params.min_on_scans or len(off_scans) < params.min_off_scans:
        return CheckResult(
            KIND,
            PENDING,
            f"Cadence {label!r} has {len(on_scans)} of {params.min_on_scans} on-source and "
            f"{len(off_scans)} of {params.min_off_scans} off-source scans covering the "
            "predicted frequency.",
            details=details,
        )
    fraction = len(on_present) / len(on_scans)
    if fraction < params.min_on_fraction:
        return CheckResult(
            KIND,
            FAIL,
            f"The signal is on the track in only {len(on_present)} of {len(on_scans)} "
            f"on-source scans of cadence {label!r}.",
            measured=fraction,
            expected=params.min_on_fraction,
            unit="fraction",
            details=details,
        )
    return CheckResult(
        KIND,
        PASS,
        f"Present in {len(on_present)} of {len(on_scans)} on-source scans and absent from all "
        f"{len(off_scans)} off-source scans of cadence {label!r}.",
        measured=0.0,
        expected=0.0,
        tolerance=0.0,
        unit="scans",
        details=details,
    )
