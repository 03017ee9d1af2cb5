"""Linking detections to a candidate: the predicted track, search windows, coverage.

For a scan with channel width w, the predicted track at time t has tolerance
``max(frequency_tolerance_floor_hz, sigma_multiplier * sigma_f(t)) + s(t)
+ scan_margin_channels * w`` (see ``schema.MatchingParams``; s(t) bounds the fast-gap shortcut,
see ``protocol.reference``). A detection lies on the track when its frequency is within the
tolerance of the prediction at the detection's own time. Linking uses frequency only: drift is
judged by the checks (nonzero_drift, doppler_consistency), so that a signal on the track with
the wrong drift is seen and rejected rather than silently left out.

The search window of a scan is the band the track plus tolerance sweeps during the scan; a scan
"covers" the prediction when it is complete and its recorded band contains the whole window, and
only a covering scan can count as "observed and absent" (an open scan may still receive the hit).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

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

    @property
    def offset_hz(self) -> float:
        """Observed minus predicted frequency, Hz."""
        return self.detection.frequency_hz - self.predicted_frequency_hz

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

    @property
    def present(self) -> bool:
        """True when at least one detection of the scan lies on the predicted track."""
        return bool(self.linked)


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

    @property
    def residual_drift_hz_s(self) -> float | None:
        """Reported drift minus Earth drift at mid-report, Hz/s (None without a drift)."""
        if not self.present or self.report.drift_hz_s is None:
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
    """A scan or report: where, when, which channel width, which detections."""

    site: SiteFact
    start_unix_s: float
    duration_s: float
    channel_width_hz: float
    detections: tuple[DetectionFact, ...]


@dataclass(frozen=True, slots=True)
class _Batch:
    """Windows of every item and predictions at every detection of many candidates.

    Item arrays are indexed by global item number, detection arrays by global detection
    number; candidate c owns items item_start[c]:item_start[c+1] and detections
    detection_start[item] : detection_start[item + 1] of each of its items.
    """

    references: list[ReferenceSignal]
    item_start: list[int]
    low_hz: list[float]
    high_hz: list[float]
    middle_frequency_hz: list[float]
    middle_earth_drift_hz_s: list[float]
    detection_start: list[int]
    on_track: list[bool]
    detection_unix_s: list[float]
    detection_frequency_hz: list[float]
    detection_tolerance_hz: list[float]
    detection_drift_hz_s: list[float]
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
    item_pair, item_owner, start, duration, width, n_detections = [], [], [], [], [], []
    detection_times, observed = [], []
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
            for d in item.detections:
                detection_times.append(item.start_unix_s + d.time_offset_s)
                observed.append(d.frequency_hz)
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
    middle = first + counts // 2
    detection_frequency = frequency[n_samples:]
    detection_tolerance = tolerance[n_samples:]
    return _Batch(
        references=signals,
        item_start=item_start,
        low_hz=low.tolist(),
        high_hz=high.tolist(),
        middle_frequency_hz=frequency[middle].tolist(),
        middle_earth_drift_hz_s=prediction.earth_drift_hz_s[middle].tolist(),
        detection_start=np.concatenate([[0], np.cumsum(detections)]).astype(np.int64).tolist(),
        on_track=(
            np.abs(np.array(observed, dtype=np.float64) - detection_frequency)
            <= detection_tolerance
        ).tolist(),
        detection_unix_s=prediction.unix_s[n_samples:].tolist(),
        detection_frequency_hz=detection_frequency.tolist(),
        detection_tolerance_hz=detection_tolerance.tolist(),
        detection_drift_hz_s=prediction.drift_hz_s[n_samples:].tolist(),
        detection_earth_drift_hz_s=prediction.earth_drift_hz_s[n_samples:].tolist(),
    )


def _linked(
    batch: _Batch, item: int, observation: ObservationFact, force_link_id: int | None
) -> tuple[DetectionView, ...]:
    begin, end = batch.detection_start[item], batch.detection_start[item + 1]
    if begin == end:
        return ()
    on_track = batch.on_track[begin:end]
    if force_link_id is None and True not in on_track:
        return ()
    resolution = drift_resolution_hz_s(observation)
    views = []
    for offset, detection in enumerate(observation.detections):
        if on_track[offset] or detection.id == force_link_id:
            k = begin + offset
            views.append(
                DetectionView(
                    detection=detection,
                    observation=observation,
                    unix_s=batch.detection_unix_s[k],
                    predicted_frequency_hz=batch.detection_frequency_hz[k],
                    tolerance_hz=batch.detection_tolerance_hz[k],
                    predicted_drift_hz_s=batch.detection_drift_hz_s[k],
                    earth_drift_hz_s=batch.detection_earth_drift_hz_s[k],
                    drift_resolution_hz_s=resolution,
                )
            )
    return tuple(views)


def _candidate_items(facts: CandidateFacts) -> list[_Item]:
    items = [
        _Item(o.site, o.start_unix_s, o.duration_s, o.channel_width_hz, o.detections)
        for o in facts.all_observations()
    ]
    width = facts.reference_observation.channel_width_hz
    items += [_Item(r.site, r.unix_s, r.duration_s, width, ()) for r in facts.reports]
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
        views.append(
            ObservationView(
                observation,
                low[k],
                high[k],
                covers,
                index == 0 or is_target_scan(observation, facts.target),
                _linked(batch, k, observation, facts.reference.id if index == 0 else None),
            )
        )
    reference = batch.references[candidate]
    reports = []
    for i, report in enumerate(facts.reports):
        k = base + len(observations) + i
        present = (
            report.detected
            and report.frequency_hz is not None
            and low[k] <= report.frequency_hz <= high[k]
        )
        reports.append(
            ReportView(
                report=report,
                predicted_frequency_hz=batch.middle_frequency_hz[k],
                window_low_hz=low[k],
                window_high_hz=high[k],
                covers=report.frequency_min_hz <= low[k] and high[k] <= report.frequency_max_hz,
                present=bool(present),
                earth_drift_hz_s=batch.middle_earth_drift_hz_s[k],
                drift_resolution_hz_s=reference.drift_resolution_hz_s,
            )
        )
    return CandidateView(facts, model, bands, context, reference, tuple(views), tuple(reports))


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
        _Item(o.site, o.start_unix_s, o.duration_s, o.channel_width_hz, ()) for o in observations
    ]
    batch = _predict_items(
        context,
        _protocol_model(protocol),
        [(reference_detection, reference_observation, target)],
        [items],
    )
    return {o.id: (batch.low_hz[i], batch.high_hz[i]) for i, o in enumerate(observations)}


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
    scan's channel width). The service fetches that scan's detections inside this band.
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
