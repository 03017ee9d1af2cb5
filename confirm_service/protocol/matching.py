"""Linking detections to a candidate: the predicted track, search windows, coverage.

For a scan with channel width w, the predicted track at time t has tolerance
``max(frequency_tolerance_floor_hz, sigma_multiplier * sigma_f(t)) + s(t)
+ scan_margin_channels * w`` (see ``schema.MatchingParams``; s(t) bounds the fast-gap shortcut,
see ``protocol.reference``). A detection is linked when both its frequency and its drift agree
with the prediction at the detection's own instant (scan start + ``time_offset_s``): the
frequency within that tolerance, the drift within ``sigma_multiplier`` times the combined drift
uncertainty (the reference's, grown into the prediction, and one drift resolution of the scan).
In each scan only the best such hit is linked (smallest normalised distance); further hits that
also fit make the link ambiguous (``ObservationView.extra_matches``).

A hit in a target scan whose frequency is on the track but whose drift is not is kept as the
scan's ``drift_mismatch``: it may be the signal with a drift that does not follow the sky, or an
unrelated hit; checks weigh it as ambiguous evidence, never as a link.

Scans away from the target (off-source scans of a cadence, other beams) are searched over a
wider band: their own track window grown by ``(D + E) * dt + off_source_margin_hz`` either
side, with ``dt`` the longest time to the nearest anchor (a target scan, or the reference hit),
D the largest plausible drift (``ProtocolModel.off_source_max_abs_drift_hz_s``) and E the
largest drift Earth can give, since a signal that leaks in away from the target need not follow
the sky-fixed track. Any hit there, at any drift, is the scan's
``nearby`` hit when none is on the track.

Partner reports are matched the same way at their own instant (``ReportFact.unix_s +
ReportFact.time_offset_s``, the report's time stamp plus its offset).

The search window of a scan is the band the track plus tolerance sweeps during the scan
(widened as above away from the target); a scan "covers" the prediction when it is complete and its
recorded band contains the whole window, and only a covering scan can count as "observed and
absent" (an open scan may still receive the hit).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from confirm_service.physics import max_earth_drift_hz_s
from confirm_service.protocol.bands import BandSet, InterferenceBand, as_band_set
from confirm_service.protocol.facts import (
    CandidateFacts,
    DetectionFact,
    ObservationFact,
    ReportFact,
    SiteFact,
    TargetFact,
)
from confirm_service.protocol.loader import model_of
from confirm_service.protocol.reference import (
    PhysicsContext,
    ReferenceSignal,
    default_physics_context,
    drift_resolution_hz_s,
    predict_references,
)
from confirm_service.protocol.schema import MatchingParams, ProtocolModel

WINDOW_SAMPLE_SPACING_S = 60.0
MAX_WINDOW_SAMPLES = 65
MIN_WINDOW_SAMPLES = 3
_NO_TIMES = np.empty(0, dtype=np.float64)


@dataclass(frozen=True, slots=True)
class DetectionView:
    """A detection linked to the candidate, with its prediction (Hz, Hz/s, unix s)."""

    detection: DetectionFact
    observation: ObservationFact
    unix_s: float
    predicted_frequency_hz: float
    tolerance_hz: float
    predicted_drift_hz_s: float
    earth_drift_hz_s: float
    drift_resolution_hz_s: float
    drift_tolerance_hz_s: float = 0.0

    @property
    def offset_hz(self) -> float:
        """Observed minus predicted frequency, Hz."""
        return self.detection.frequency_hz - self.predicted_frequency_hz

    @property
    def drift_offset_hz_s(self) -> float:
        """Observed minus predicted drift, Hz/s."""
        return self.detection.drift_hz_s - self.predicted_drift_hz_s

    @property
    def residual_drift_hz_s(self) -> float:
        """Observed drift minus the Earth drift at this site and time, Hz/s."""
        return self.detection.drift_hz_s - self.earth_drift_hz_s


@dataclass(frozen=True, slots=True)
class ObservationView:
    """A scan seen from the candidate: its search window, coverage and linked detections."""

    observation: ObservationFact
    window_low_hz: float
    window_high_hz: float
    covers: bool
    is_target_scan: bool
    linked: tuple[DetectionView, ...]
    extra_matches: int = 0
    drift_mismatch: DetectionView | None = None
    nearby: DetectionView | None = None

    @property
    def present(self) -> bool:
        """True when a detection of the scan lies on the predicted track (frequency and drift)."""
        return bool(self.linked)

    @property
    def partly_covers(self) -> bool:
        """The scan's band overlaps the window without containing it."""
        scan = self.observation
        overlaps = scan.frequency_min_hz <= self.window_high_hz and (
            self.window_low_hz <= scan.frequency_max_hz
        )
        return overlaps and not self.covers

    @property
    def seen_at_any_drift(self) -> bool:
        """On the track, or (away from the target) anywhere in the widened window."""
        return self.present or self.nearby is not None

    @property
    def ambiguous(self) -> bool:
        """Evidence in this scan that could belong to another signal."""
        if self.present:
            return self.extra_matches > 0
        return self.drift_mismatch is not None or self.nearby is not None


@dataclass(frozen=True, slots=True)
class ReportView:
    """A partner report seen from the candidate (window over the report's duration)."""

    report: ReportFact
    predicted_frequency_hz: float
    window_low_hz: float
    window_high_hz: float
    covers: bool
    present: bool
    earth_drift_hz_s: float
    drift_resolution_hz_s: float
    predicted_drift_hz_s: float = 0.0
    frequency_tolerance_hz: float = 0.0
    drift_tolerance_hz_s: float = 0.0
    drift_mismatch: bool = False

    @property
    def residual_drift_hz_s(self) -> float | None:
        """Reported drift minus the Earth drift at the report's instant, Hz/s (None without)."""
        if not (self.present or self.drift_mismatch) or self.report.drift_hz_s is None:
            return None
        return self.report.drift_hz_s - self.earth_drift_hz_s


@dataclass(frozen=True)
class CandidateView:
    """Everything a check reads: facts, protocol, bands, reference, scans and reports."""

    facts: CandidateFacts
    protocol: ProtocolModel
    bands: BandSet
    physics: PhysicsContext
    reference: ReferenceSignal
    observations: tuple[ObservationView, ...]
    reports: tuple[ReportView, ...]

    @property
    def reference_view(self) -> ObservationView:
        """The reference scan (always first)."""
        return self.observations[0]

    def target_scans(self) -> tuple[ObservationView, ...]:
        """Scans of the candidate's target (on-source, same target name), reference first."""
        return self._target_scans

    def target_detections(self) -> tuple[DetectionView, ...]:
        """Linked detections in target scans, the reference scan's first."""
        return self._target_detections

    @cached_property
    def _target_scans(self) -> tuple[ObservationView, ...]:
        return tuple(v for v in self.observations if v.is_target_scan)

    @cached_property
    def _target_detections(self) -> tuple[DetectionView, ...]:
        return tuple(d for v in self._target_scans for d in v.linked)

    def matched(self) -> dict[int, tuple[int, ...]]:
        """observation id -> ids of its detections on the predicted track."""
        return {
            v.observation.id: tuple(d.detection.id for d in v.linked)
            for v in self.observations
            if v.linked
        }

    def distance_km(self, site_a: SiteFact, site_b: SiteFact) -> float:
        """Straight-line distance between two sites, km."""
        return self.physics.distance_km(site_a, site_b)

    def bands_overlapping(
        self, low_hz: float, high_hz: float, margin_hz: float = 0.0
    ) -> tuple[InterferenceBand, ...]:
        """Listed bands overlapping [low_hz, high_hz] (widened by margin_hz)."""
        return self.bands.overlapping(low_hz, high_hz, margin_hz)


def is_target_scan(observation: ObservationFact, target: TargetFact) -> bool:
    """An on-source scan of ``target`` (by target name)."""
    return observation.on_source and observation.target_name == target.name


def window_sample_times(start_unix_s: float, duration_s: float) -> np.ndarray:
    """Times (unix s) at which the track is sampled to find a scan's search window."""
    count = _sample_counts(np.array([duration_s]))[0]
    return np.linspace(start_unix_s, start_unix_s + max(duration_s, 0.0), count)


def _sample_counts(duration_s: np.ndarray) -> np.ndarray:
    """Samples per scan: one per WINDOW_SAMPLE_SPACING_S plus the ends, within limits."""
    counts = np.ceil(np.maximum(duration_s, 0.0) / WINDOW_SAMPLE_SPACING_S).astype(np.int64) + 1
    return np.clip(counts, MIN_WINDOW_SAMPLES, MAX_WINDOW_SAMPLES)


def tolerance_hz(
    matching: MatchingParams,
    sigma_hz: np.ndarray | float,
    channel_width_hz: np.ndarray | float,
    systematic_hz: np.ndarray | float = 0.0,
) -> np.ndarray:
    """Track tolerance (Hz): statistical part, systematic bound, one scan channel margin."""
    widened = np.maximum(
        matching.frequency_tolerance_floor_hz, matching.sigma_multiplier * np.asarray(sigma_hz)
    )
    return widened + systematic_hz + matching.scan_margin_channels * np.asarray(channel_width_hz)


def _protocol_model(protocol: Any) -> ProtocolModel:
    return model_of(protocol)


@dataclass(frozen=True, slots=True)
class _Item:
    """A scan or report: where, when, which channel width, which detections, how wide to look.

    ``wide``: a scan away from the target, searched at any drift over the widened window.
    """

    site: SiteFact
    start_unix_s: float
    duration_s: float
    channel_width_hz: float
    detections: tuple[DetectionFact, ...]
    wide: bool = False


@dataclass(frozen=True, slots=True)
class _Batch:
    """Windows of every item and predictions at every detection of many candidates.

    Item lists are indexed by global item number, detection lists by global detection number;
    candidate c owns items item_start[c]:item_start[c+1] and detections
    detection_start[item] : detection_start[item + 1] of each of its items.
    """

    references: list[ReferenceSignal]
    item_start: list[int]
    low_hz: list[float]
    high_hz: list[float]
    detection_start: list[int]
    on_frequency: list[bool]
    on_drift: list[bool]
    in_window: list[bool]
    score: list[float]
    detection_unix_s: list[float]
    detection_frequency_hz: list[float]
    detection_tolerance_hz: list[float]
    detection_drift_hz_s: list[float]
    detection_drift_tolerance_hz_s: list[float]
    detection_earth_drift_hz_s: list[float]


def _predict_items(
    context: PhysicsContext,
    protocol: ProtocolModel,
    references: Sequence[tuple[DetectionFact, ObservationFact, TargetFact]],
    items_per_candidate: Sequence[Sequence[_Item]],
) -> _Batch:
    """Sample every item's span and every detection time; predict all with one call."""
    pairs: list[tuple[SiteFact, TargetFact]] = []
    numbers: dict[tuple[SiteFact, TargetFact], int] = {}
    item_pair, item_owner, start, duration, width, n_detections, wide = [], [], [], [], [], [], []
    detection_times, observed, observed_drift = [], [], []
    item_start = [0]
    for owner, ((_, _, target), items) in enumerate(
        zip(references, items_per_candidate, strict=True)
    ):
        for item in items:
            key = (item.site, target)
            number = numbers.get(key)
            if number is None:
                number = numbers[key] = len(pairs)
                pairs.append(key)
            item_pair.append(number)
            item_owner.append(owner)
            start.append(item.start_unix_s)
            duration.append(item.duration_s)
            width.append(item.channel_width_hz)
            n_detections.append(len(item.detections))
            wide.append(item.wide)
            for d in item.detections:
                detection_times.append(item.start_unix_s + d.time_offset_s)
                observed.append(d.frequency_hz)
                observed_drift.append(d.drift_hz_s)
        item_start.append(item_start[-1] + len(items))
    starts = np.array(start, dtype=np.float64)
    spans = np.maximum(np.array(duration, dtype=np.float64), 0.0)
    widths = np.array(width, dtype=np.float64)
    counts = _sample_counts(spans)
    detections = np.array(n_detections, dtype=np.int64)
    pair_of_item = np.array(item_pair, dtype=np.int64)
    owner_of_item = np.array(item_owner, dtype=np.int64)
    first = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.int64)
    position = np.arange(int(counts.sum())) - np.repeat(first, counts)
    fraction = position / np.repeat(counts - 1, counts)
    sample_times = np.repeat(starts, counts) + fraction * np.repeat(spans, counts)
    times = np.concatenate([sample_times, np.array(detection_times, dtype=np.float64)])
    signals, prediction = predict_references(
        context,
        references,
        pairs,
        np.concatenate([np.repeat(pair_of_item, counts), np.repeat(pair_of_item, detections)]),
        np.concatenate([np.repeat(owner_of_item, counts), np.repeat(owner_of_item, detections)]),
        times,
        protocol,
    )
    n_samples = len(sample_times)
    tolerance = tolerance_hz(
        protocol.matching,
        prediction.frequency_uncertainty_hz,
        np.concatenate([np.repeat(widths, counts), np.repeat(widths, detections)]),
        prediction.systematic_hz,
    )
    frequency = prediction.frequency_hz
    low = np.minimum.reduceat(frequency[:n_samples] - tolerance[:n_samples], first)
    high = np.maximum.reduceat(frequency[:n_samples] + tolerance[:n_samples], first)
    low, high = _widened_away_from_target(
        protocol, signals, owner_of_item, np.array(wide, dtype=bool), starts, spans, low, high
    )
    detection_owner = np.repeat(owner_of_item, detections)
    detection_resolution = np.repeat(widths / np.where(spans > 0, spans, np.inf), detections)
    reference_sigma = np.array([r.drift_uncertainty_hz_s for r in signals], dtype=np.float64)
    drift_tolerance = protocol.matching.sigma_multiplier * np.hypot(
        reference_sigma[detection_owner],
        protocol.matching.reference_drift_uncertainty_resolutions * detection_resolution,
    )
    detection_frequency = frequency[n_samples:]
    detection_tolerance = tolerance[n_samples:]
    detection_drift = prediction.drift_hz_s[n_samples:]
    frequency_offset = np.array(observed, dtype=np.float64) - detection_frequency
    drift_offset = np.array(observed_drift, dtype=np.float64) - detection_drift
    detection_low = np.repeat(low, detections)
    detection_high = np.repeat(high, detections)
    observed_f = np.array(observed, dtype=np.float64)
    return _Batch(
        references=signals,
        item_start=item_start,
        low_hz=low.tolist(),
        high_hz=high.tolist(),
        detection_start=np.concatenate([[0], np.cumsum(detections)]).astype(np.int64).tolist(),
        on_frequency=(np.abs(frequency_offset) <= detection_tolerance).tolist(),
        on_drift=(np.abs(drift_offset) <= drift_tolerance).tolist(),
        in_window=((observed_f >= detection_low) & (observed_f <= detection_high)).tolist(),
        score=(
            (frequency_offset / detection_tolerance) ** 2 + (drift_offset / drift_tolerance) ** 2
        ).tolist(),
        detection_unix_s=prediction.unix_s[n_samples:].tolist(),
        detection_frequency_hz=detection_frequency.tolist(),
        detection_tolerance_hz=detection_tolerance.tolist(),
        detection_drift_hz_s=detection_drift.tolist(),
        detection_drift_tolerance_hz_s=drift_tolerance.tolist(),
        detection_earth_drift_hz_s=prediction.earth_drift_hz_s[n_samples:].tolist(),
    )


def _widened_away_from_target(
    protocol: ProtocolModel,
    signals: Sequence[ReferenceSignal],
    owner_of_item: np.ndarray,
    wide: np.ndarray,
    starts: np.ndarray,
    spans: np.ndarray,
    low: np.ndarray,
    high: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Windows (Hz) of scans away from the target, widened from the nearest anchor in time.

    A scan's anchors are its candidate's target scans (any site) and the reference hit itself;
    ``dt`` is the longest time between an instant of the nearest anchor and one of the scan.
    Wherever the signal was in that anchor, a drift of at most D carries it at most ``D * dt``
    away, and the scan's own track (its site's Doppler shift included) moves at most
    ``E * dt`` over the same time, E being the largest drift Earth can give
    (:func:`~confirm_service.physics.max_earth_drift_hz_s`). So the scan's own track window
    grows by ``(D + E) * dt + off_source_margin_hz`` either side. Measuring from the nearest
    anchor rather than from the reference keeps a scan days later from spreading over
    megahertz.
    """
    if not wide.any():
        return low, high
    low, high = low.copy(), high.copy()
    ends = starts + spans
    for owner in np.unique(owner_of_item[wide]):
        signal = signals[int(owner)]
        f0 = signal.observed_frequency_hz
        limit = protocol.off_source_max_abs_drift_hz_s(f0) + float(max_earth_drift_hz_s(f0))
        mine = owner_of_item == owner
        scans = np.flatnonzero(mine & wide)
        anchors = np.flatnonzero(mine & ~wide)
        anchor_start = np.append(starts[anchors], signal.unix_s)
        anchor_end = np.append(ends[anchors], signal.unix_s)
        gap_s = np.maximum(  # scans x anchors: the longest time from one to the other
            np.abs(ends[scans, None] - anchor_start[None, :]),
            np.abs(anchor_end[None, :] - starts[scans, None]),
        ).min(axis=1)
        reach_hz = limit * gap_s + protocol.matching.off_source_margin_hz
        low[scans] -= reach_hz
        high[scans] += reach_hz
    return low, high


def _view_of(
    batch: _Batch, k: int, detection: DetectionFact, observation: ObservationFact
) -> DetectionView:
    return DetectionView(
        detection=detection,
        observation=observation,
        unix_s=batch.detection_unix_s[k],
        predicted_frequency_hz=batch.detection_frequency_hz[k],
        tolerance_hz=batch.detection_tolerance_hz[k],
        predicted_drift_hz_s=batch.detection_drift_hz_s[k],
        earth_drift_hz_s=batch.detection_earth_drift_hz_s[k],
        drift_resolution_hz_s=drift_resolution_hz_s(observation),
        drift_tolerance_hz_s=batch.detection_drift_tolerance_hz_s[k],
    )


@dataclass(frozen=True, slots=True)
class _ScanMatch:
    """What a scan holds for the candidate (see ObservationView)."""

    linked: tuple[DetectionView, ...] = ()
    extra_matches: int = 0
    drift_mismatch: DetectionView | None = None
    nearby: DetectionView | None = None


_NO_MATCH = _ScanMatch()


def _scan_match(
    batch: _Batch,
    item: int,
    observation: ObservationFact,
    force_link_id: int | None,
    wide: bool,
) -> _ScanMatch:
    """The best link of a scan, how many other hits also fit, and the ambiguous leftovers."""
    begin, end = batch.detection_start[item], batch.detection_start[item + 1]
    if begin == end:
        return _NO_MATCH
    detections = observation.detections
    if force_link_id is not None:
        for offset, detection in enumerate(detections):
            if detection.id == force_link_id:
                return _ScanMatch(linked=(_view_of(batch, begin + offset, detection, observation),))
    on_f = batch.on_frequency[begin:end]
    if True not in on_f and not (wide and True in batch.in_window[begin:end]):
        return _NO_MATCH
    on_d = batch.on_drift[begin:end]
    score = batch.score[begin:end]
    full = [i for i in range(end - begin) if on_f[i] and on_d[i]]
    if full:
        best = min(full, key=lambda i: (score[i], detections[i].id))
        view = _view_of(batch, begin + best, detections[best], observation)
        return _ScanMatch(linked=(view,), extra_matches=len(full) - 1)
    frequency_only = [i for i in range(end - begin) if on_f[i]]
    mismatch = None
    if frequency_only:
        best = min(frequency_only, key=lambda i: (score[i], detections[i].id))
        mismatch = _view_of(batch, begin + best, detections[best], observation)
    nearby = None
    if wide:
        inside = [i for i in range(end - begin) if batch.in_window[begin + i]]
        if inside:
            best = min(inside, key=lambda i: (score[i], detections[i].id))
            nearby = _view_of(batch, begin + best, detections[best], observation)
    return _ScanMatch(drift_mismatch=None if wide else mismatch, nearby=nearby)


def _report_detection(report: ReportFact) -> tuple[DetectionFact, ...]:
    """A partner's sighting as a pseudo-detection at the report's own instant: its time stamp
    plus ``time_offset_s``, as a hit's instant is its scan start plus its offset."""
    if not report.detected or report.frequency_hz is None:
        return ()
    drift = 0.0 if report.drift_hz_s is None else report.drift_hz_s
    return (
        DetectionFact(
            -report.id, -report.id, report.frequency_hz, drift, 0.0, report.time_offset_s
        ),
    )


def _candidate_items(facts: CandidateFacts) -> list[_Item]:
    observations = facts.all_observations()
    items = [
        _Item(
            o.site,
            o.start_unix_s,
            o.duration_s,
            o.channel_width_hz,
            o.detections,
            wide=index > 0 and not is_target_scan(o, facts.target),
        )
        for index, o in enumerate(observations)
    ]
    width = facts.reference_observation.channel_width_hz
    items += [
        _Item(r.site, r.unix_s, r.duration_s, width, _report_detection(r)) for r in facts.reports
    ]
    return items


def _candidate_view(
    model: ProtocolModel,
    facts: CandidateFacts,
    bands: BandSet,
    context: PhysicsContext,
    batch: _Batch,
    candidate: int,
) -> CandidateView:
    base = batch.item_start[candidate]
    low, high = batch.low_hz, batch.high_hz
    observations = facts.all_observations()
    views = []
    for index, observation in enumerate(observations):
        k = base + index
        covers = (
            observation.complete
            and observation.frequency_min_hz <= low[k]
            and high[k] <= observation.frequency_max_hz
        )
        target_scan = index == 0 or is_target_scan(observation, facts.target)
        match = _scan_match(
            batch,
            k,
            observation,
            facts.reference.id if index == 0 else None,
            wide=not target_scan,
        )
        views.append(
            ObservationView(
                observation=observation,
                window_low_hz=low[k],
                window_high_hz=high[k],
                covers=covers,
                is_target_scan=target_scan,
                linked=match.linked,
                extra_matches=match.extra_matches,
                drift_mismatch=match.drift_mismatch,
                nearby=match.nearby,
            )
        )
    reference = batch.references[candidate]
    reports = [
        _report_view(batch, base + len(observations) + i, report, reference)
        for i, report in enumerate(facts.reports)
    ]
    return CandidateView(facts, model, bands, context, reference, tuple(views), tuple(reports))


def _report_view(
    batch: _Batch, k: int, report: ReportFact, reference: ReferenceSignal
) -> ReportView:
    """A report judged at its own instant: on the track in frequency, and in drift if given."""
    begin, end = batch.detection_start[k], batch.detection_start[k + 1]
    covers = report.frequency_min_hz <= batch.low_hz[k] and (
        batch.high_hz[k] <= report.frequency_max_hz
    )
    common = {
        "report": report,
        "window_low_hz": batch.low_hz[k],
        "window_high_hz": batch.high_hz[k],
        "covers": covers,
        "drift_resolution_hz_s": reference.drift_resolution_hz_s,
    }
    if begin == end:
        middle = _report_middle(batch, k)
        return ReportView(present=False, **middle, **common)
    on_frequency = batch.on_frequency[begin]
    drift_agrees = report.drift_hz_s is None or batch.on_drift[begin]
    return ReportView(
        predicted_frequency_hz=batch.detection_frequency_hz[begin],
        present=on_frequency and drift_agrees,
        earth_drift_hz_s=batch.detection_earth_drift_hz_s[begin],
        predicted_drift_hz_s=batch.detection_drift_hz_s[begin],
        frequency_tolerance_hz=batch.detection_tolerance_hz[begin],
        drift_tolerance_hz_s=batch.detection_drift_tolerance_hz_s[begin],
        drift_mismatch=on_frequency and not drift_agrees,
        **common,
    )


def _report_middle(batch: _Batch, k: int) -> dict[str, float]:
    """Prediction values of a report without a sighting: the window's centre."""
    return {
        "predicted_frequency_hz": 0.5 * (batch.low_hz[k] + batch.high_hz[k]),
        "earth_drift_hz_s": 0.0,
    }


def build_candidate_views(
    protocol: Any,
    facts_list: Sequence[CandidateFacts],
    bands: BandSet | Sequence[InterferenceBand] | None = None,
    physics_context: PhysicsContext | None = None,
) -> list[CandidateView]:
    """Views of many candidates, their physics computed together (one TrackCache call)."""
    if not facts_list:
        return []
    model = _protocol_model(protocol)
    context = physics_context or default_physics_context()
    band_set = as_band_set(bands)
    batch = _predict_items(
        context,
        model,
        [(f.reference, f.reference_observation, f.target) for f in facts_list],
        [_candidate_items(f) for f in facts_list],
    )
    return [
        _candidate_view(model, facts, band_set, context, batch, i)
        for i, facts in enumerate(facts_list)
    ]


def build_candidate_view(
    protocol: Any,
    facts: CandidateFacts,
    bands: BandSet | Sequence[InterferenceBand] | None = None,
    physics_context: PhysicsContext | None = None,
) -> CandidateView:
    """Predict the track for every scan and report of a candidate and link its detections."""
    return build_candidate_views(protocol, [facts], bands, physics_context)[0]


def match_detections(
    protocol: Any,
    facts: CandidateFacts,
    physics_context: PhysicsContext | None = None,
) -> dict[int, tuple[int, ...]]:
    """observation id -> ids of the detections of that scan lying on the predicted track."""
    return build_candidate_view(protocol, facts, None, physics_context).matched()


def search_windows_hz(
    protocol: Any,
    reference_detection: DetectionFact,
    reference_observation: ObservationFact,
    target: TargetFact,
    observations: Sequence[ObservationFact],
    physics_context: PhysicsContext | None = None,
) -> dict[int, tuple[float, float]]:
    """observation id -> (low_hz, high_hz) band the predicted track can lie in during the scan."""
    if not observations:
        return {}
    context = physics_context or default_physics_context()
    items = [
        _Item(
            o.site,
            o.start_unix_s,
            o.duration_s,
            o.channel_width_hz,
            (),
            wide=o.id != reference_observation.id and not is_target_scan(o, target),
        )
        for o in observations
    ]
    batch = _predict_items(
        context,
        _protocol_model(protocol),
        [(reference_detection, reference_observation, target)],
        [items],
    )
    return {o.id: (batch.low_hz[i], batch.high_hz[i]) for i, o in enumerate(observations)}


def report_views(
    protocol: Any,
    reference_detection: DetectionFact,
    reference_observation: ObservationFact,
    target: TargetFact,
    reports: Sequence[ReportFact],
    physics_context: PhysicsContext | None = None,
) -> list[ReportView]:
    """Reports judged against the candidate's track, each at its own instant (time stamp plus
    offset), as the checks judge them; for a report on its own, e.g. on receipt."""
    if not reports:
        return []
    context = physics_context or default_physics_context()
    width = reference_observation.channel_width_hz
    items = [_Item(r.site, r.unix_s, r.duration_s, width, _report_detection(r)) for r in reports]
    batch = _predict_items(
        context,
        _protocol_model(protocol),
        [(reference_detection, reference_observation, target)],
        [items],
    )
    reference = batch.references[0]
    return [_report_view(batch, i, r, reference) for i, r in enumerate(reports)]


def search_window_hz(
    protocol: Any,
    reference_detection: DetectionFact,
    reference_observation: ObservationFact,
    target: TargetFact,
    other_observation: ObservationFact,
    physics_context: PhysicsContext | None = None,
) -> tuple[float, float]:
    """(low_hz, high_hz): where the predicted track can lie during ``other_observation``.

    The track sampled over the scan, widened by the matching tolerance (uncertainty and the
    scan's channel width), and for scans away from the target by the largest plausible drift
    over the time since the reference. The service fetches that scan's detections inside it.
    """
    windows = search_windows_hz(
        protocol,
        reference_detection,
        reference_observation,
        target,
        [other_observation],
        physics_context,
    )
    return windows[other_observation.id]
