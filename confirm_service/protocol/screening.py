"""Bulk screening of a cadence's hits: arrays in, one reason code per hit out.

Pure numpy (no database, no web framework). The service loads each scan's hits as arrays, asks
the physics engine for each scan's Doppler factor and Earth-drift rate toward the cadence's
target, and calls :func:`screen_cadence`; only the hits that survive become candidates.

Rules, in order; the first that applies is the hit's reason (``Reason``):

1. ``low_snr`` / ``drift_out_of_range``: below the protocol's intake thresholds;
2. ``interference_band``: the hit's sweep over its scan enters a listed band (when the protocol's
   intake excludes listed bands);
3. ``zero_drift``: ``|drift| <= k * resolution`` while Earth alone gives ``|earth drift| > k *
   resolution`` (``k`` from the protocol's ``nonzero_drift`` check; resolution = channel width /
   scan duration);
4. ``present_off_source``: a hit of a complete off-source scan of the cadence lies within the
   wide window (any drift) around the hit's track;
5. ``absent_on_source``: on the track (frequency and drift) in too small a fraction of the
   cadence's complete on-source scans that cover the track (counts from the protocol's
   ``on_off_cadence`` check);
6. ``occupied_elsewhere``: the same topocentric frequency and drift at the same site in scans of
   other targets within the protocol's occupancy span.

A hit none of these applies to ``survived``. Hits of off-source scans are ``off_source_scan``:
they are the evidence for rule 4, never candidates. A hit whose rule 4 or 5 cannot be decided
yet (too few complete or covering scans) stays pending (code 0): an open scan is never evidence
of absence, and a partly covering scan counts as neither presence nor absence.

The track of hit i (frequency ``f`` at its scan's start, drift ``d``) in scan k, for a
transmitter fixed on the sky at the target whose own drift is ``d - earth_drift``::

    p = f * D_k / D_i + (d - f * g_i) * (t_k - t_i)        D = 1 + v/c, g = (dv/dt) / (c + v)

(v: the site's barycentric radial velocity toward the target, astropy's
``radial_velocity_correction``). Narrow half-width ``max(floor, n_sigma * sigma_f) + margin
channels * width_k`` with ``sigma_f = hypot(u_f * width_i, u_d * resolution_i * |t_k - t_i|)``;
drift half-width ``n_sigma * u_d * hypot(resolution_i, resolution_k)``; wide half-width
``max_drift * (|t_k - t_i| + duration_k) + margin``. Every window is two ``searchsorted`` calls
on the scan's frequency-sorted hits; drifts are compared only for the few hits inside.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from dataclasses import dataclass, field
from enum import StrEnum

import numpy as np
from numpy.typing import NDArray

from confirm_service.protocol.bands import InterferenceBand
from confirm_service.protocol.schema import ProtocolModel

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]


class Reason(StrEnum):
    """Why a hit did or did not go on to become a candidate (stored per hit)."""

    LOW_SNR = "low_snr"
    DRIFT_OUT_OF_RANGE = "drift_out_of_range"
    INTERFERENCE_BAND = "interference_band"
    ZERO_DRIFT = "zero_drift"
    OFF_SOURCE_SCAN = "off_source_scan"
    NO_TARGET = "no_target"
    PRESENT_OFF_SOURCE = "present_off_source"
    ABSENT_ON_SOURCE = "absent_on_source"
    OCCUPIED_ELSEWHERE = "occupied_elsewhere"
    SURVIVED = "survived"
    FLAGGED = "flagged"
    LINKED = "linked"
    BEFORE_SCREENING = "before_screening"


PENDING = 0
CODES: tuple[Reason, ...] = tuple(Reason)
"""Reason of code c is ``CODES[c - 1]``; code 0 is pending."""
_CODE = {reason: index + 1 for index, reason in enumerate(CODES)}
DROPPED = frozenset(
    {
        Reason.LOW_SNR,
        Reason.DRIFT_OUT_OF_RANGE,
        Reason.INTERFERENCE_BAND,
        Reason.ZERO_DRIFT,
        Reason.OFF_SOURCE_SCAN,
        Reason.NO_TARGET,
        Reason.PRESENT_OFF_SOURCE,
        Reason.ABSENT_ON_SOURCE,
        Reason.OCCUPIED_ELSEWHERE,
    }
)
"""Reasons that keep a hit from becoming (part of) a candidate."""


def code_of(reason: Reason) -> int:
    """The small integer a reason is carried as in arrays (never 0)."""
    return _CODE[reason]


def reason_of(code: int) -> Reason | None:
    """The reason of an array code; None for pending."""
    return None if code == PENDING else CODES[code - 1]


@dataclass(frozen=True)
class ScreeningRules:
    """Everything screening reads from a protocol, in the units of its names."""

    min_snr: float
    max_abs_drift_hz_s: float
    exclude_bands: bool
    zero_drift_resolutions: float | None
    min_on_scans: int | None
    min_off_scans: int
    min_on_fraction: float
    frequency_floor_hz: float
    sigma_multiplier: float
    frequency_uncertainty_channels: float
    drift_uncertainty_resolutions: float
    margin_channels: float
    off_source_max_drift_hz_s: float
    off_source_margin_hz: float
    occupancy_span_s: float
    occupancy_drift_resolutions: float
    max_abs_drift_per_hz: float = 0.0
    off_source_drift_per_hz: float = 0.0

    def drift_limit_hz_s(self, frequency_hz: FloatArray) -> FloatArray:
        """The intake's |drift| limit at each frequency (Hz/s; a per-GHz limit scales)."""
        return self.max_abs_drift_hz_s + self.max_abs_drift_per_hz * frequency_hz

    def off_source_drift_hz_s(self, frequency_hz: FloatArray) -> FloatArray:
        """Largest plausible drift of a signal seen away from the target (Hz/s)."""
        return self.off_source_max_drift_hz_s + self.off_source_drift_per_hz * frequency_hz

    @classmethod
    def from_protocol(cls, model: ProtocolModel) -> ScreeningRules:
        """The rules of ``model``: its intake, matching, screening and first-found checks."""
        checks = {c.kind: c for stage in model.stages for c in reversed(stage.checks)}
        zero = checks.get("nonzero_drift")
        cadence = checks.get("on_off_cadence")
        intake, matching = model.intake, model.matching
        # a limit in Hz/s, or in nHz (Hz/s per GHz) that scales with the hit's frequency
        intake_drift = _limit_pair(intake.max_abs_drift_hz_s, intake.max_abs_drift_nhz)
        off_drift = _limit_pair(
            matching.off_source_max_abs_drift_hz_s, matching.off_source_max_abs_drift_nhz
        )
        if off_drift == (0.0, 0.0):
            off_drift = intake_drift
        return cls(
            min_snr=intake.min_snr,
            max_abs_drift_hz_s=intake_drift[0],
            max_abs_drift_per_hz=intake_drift[1],
            exclude_bands=(
                intake.exclude_interference_bands and model.interference_band_action == "reject"
            ),
            zero_drift_resolutions=getattr(zero, "resolution_multiplier", None),
            min_on_scans=getattr(cadence, "min_on_scans", None),
            min_off_scans=getattr(cadence, "min_off_scans", 0),
            min_on_fraction=getattr(cadence, "min_on_fraction", 1.0),
            frequency_floor_hz=matching.frequency_tolerance_floor_hz,
            sigma_multiplier=matching.sigma_multiplier,
            frequency_uncertainty_channels=matching.reference_frequency_uncertainty_channels,
            drift_uncertainty_resolutions=matching.reference_drift_uncertainty_resolutions,
            margin_channels=matching.scan_margin_channels,
            off_source_max_drift_hz_s=off_drift[0],
            off_source_drift_per_hz=off_drift[1],
            off_source_margin_hz=matching.off_source_margin_hz,
            occupancy_span_s=model.screening.occupancy_span_hours * 3600.0,
            occupancy_drift_resolutions=model.screening.occupancy_drift_resolutions,
        )


def _limit_pair(limit_hz_s: float | None, limit_nhz: float | None) -> tuple[float, float]:
    """(Hz/s, Hz/s per Hz) of a drift limit given in Hz/s or in nHz (Hz/s per GHz)."""
    if limit_hz_s is not None:
        return float(limit_hz_s), 0.0
    if limit_nhz is not None:
        return 0.0, float(limit_nhz) * 1e-9
    return 0.0, 0.0


@dataclass(frozen=True)
class BandEdges:
    """Listed interference bands merged into disjoint sorted intervals (Hz)."""

    low_hz: FloatArray
    high_hz: FloatArray

    @classmethod
    def of(cls, bands: Sequence[InterferenceBand]) -> BandEdges:
        """Merge overlapping bands so that one ``searchsorted`` answers an overlap query."""
        spans = sorted((b.frequency_min_hz, b.frequency_max_hz) for b in bands)
        merged: list[list[float]] = []
        for low, high in spans:
            if merged and low <= merged[-1][1]:
                merged[-1][1] = max(merged[-1][1], high)
            else:
                merged.append([low, high])
        edges = np.array(merged, dtype=np.float64).reshape(-1, 2)
        return cls(edges[:, 0].copy(), edges[:, 1].copy())

    def overlaps(self, low_hz: FloatArray, high_hz: FloatArray) -> BoolArray:
        """True where [low_hz, high_hz] overlaps a band (edges included)."""
        if self.low_hz.size == 0:
            return np.zeros(low_hz.shape, dtype=bool)
        last = np.searchsorted(self.low_hz, high_hz, side="right") - 1
        inside = last >= 0
        reach = np.where(inside, self.high_hz[np.maximum(last, 0)], -np.inf)
        return inside & (reach >= low_hz)


@dataclass(frozen=True)
class ScanHits:
    """One scan and its hits, sorted by ``frequency_hz`` (frequency at the scan's start).

    ``doppler_factor`` (1 + v/c) and ``earth_drift_per_hz`` ((dv/dt)/(c + v), 1/s) are toward
    the cadence's target at the scan's start; ``pending`` marks hits no run has judged yet.
    """

    observation_id: int
    start_unix_s: float
    duration_s: float
    channel_width_hz: float
    frequency_min_hz: float
    frequency_max_hz: float
    on_source: bool
    complete: bool
    doppler_factor: float
    earth_drift_per_hz: float
    hit_id: IntArray
    frequency_hz: FloatArray
    drift_hz_s: FloatArray
    snr: FloatArray
    pending: BoolArray

    @property
    def resolution_hz_s(self) -> float:
        """Drift resolution: channel width / duration (Hz/s)."""
        return self.channel_width_hz / self.duration_s

    @property
    def size(self) -> int:
        return int(self.hit_id.size)


@dataclass(frozen=True)
class OccupancyHits:
    """Hits of other targets' scans at the same site, sorted by start frequency (Hz, Hz/s)."""

    frequency_hz: FloatArray
    drift_hz_s: FloatArray
    resolution_hz_s: FloatArray
    channel_width_hz: FloatArray

    @classmethod
    def empty(cls) -> OccupancyHits:
        nothing = np.empty(0, dtype=np.float64)
        return cls(nothing, nothing, nothing, nothing)


@dataclass(frozen=True)
class Decisions:
    """Hits and their reason codes, as parallel arrays (never one object per hit)."""

    ids: IntArray
    codes: IntArray

    @classmethod
    def empty(cls) -> Decisions:
        return cls(np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64))

    @classmethod
    def of(cls, ids: Sequence[int] | IntArray, reason: Reason) -> Decisions:
        """Every hit of ``ids`` with one reason."""
        hit_ids = np.asarray(ids, dtype=np.int64)
        return cls(hit_ids, np.full(hit_ids.size, code_of(reason), dtype=np.int64))

    def __add__(self, other: Decisions) -> Decisions:
        return Decisions(
            np.concatenate([self.ids, other.ids]), np.concatenate([self.codes, other.codes])
        )

    def __len__(self) -> int:
        return int(self.ids.size)

    def by_reason(self) -> dict[Reason, IntArray]:
        """Sorted hit ids per reason."""
        return {
            CODES[int(code) - 1]: np.sort(self.ids[self.codes == code])
            for code in np.unique(self.codes)
        }

    def counts(self) -> dict[str, int]:
        """Hits per reason name, sorted by name."""
        values, counts = np.unique(self.codes, return_counts=True)
        totals = {CODES[int(v) - 1].value: int(n) for v, n in zip(values, counts, strict=True)}
        return dict(sorted(totals.items()))

    def pairs(self) -> list[tuple[int, str]]:
        """(hit id, reason name) sorted by hit id."""
        order = np.argsort(self.ids, kind="stable")
        names = [reason.value for reason in CODES]
        return [
            (hit, names[code - 1])
            for hit, code in zip(self.ids[order].tolist(), self.codes[order].tolist(), strict=True)
        ]

    def digest(self) -> str:
        """SHA-256 over the sorted ``id:reason`` lines (see :func:`decided_digest`)."""
        return decided_digest(self.pairs())


@dataclass
class CadenceOutcome:
    """Codes per scan (aligned with each scan's arrays; only pending hits change) and the
    survivors grouped into signals, each group a list of (scan index, hit position)."""

    codes: list[IntArray]
    signals: list[list[tuple[int, int]]] = field(default_factory=list)

    def decided(self, scans: Sequence[ScanHits]) -> Decisions:
        """The hits this run decided, with their codes."""
        masks = [
            scan.pending & (codes != PENDING) for scan, codes in zip(scans, self.codes, strict=True)
        ]
        if not masks:
            return Decisions.empty()
        return Decisions(
            np.concatenate([scan.hit_id[m] for scan, m in zip(scans, masks, strict=True)]),
            np.concatenate([codes[m] for codes, m in zip(self.codes, masks, strict=True)]),
        )


def decided_digest(pairs: Sequence[tuple[int, str]]) -> str:
    """SHA-256 (hex) over the lines ``"<hit id>:<reason>\\n"`` sorted by hit id."""
    text = "".join(f"{hit_id}:{reason}\n" for hit_id, reason in sorted(pairs))
    return hashlib.sha256(text.encode("ascii")).hexdigest()


# --- rules that need only the hit and its own scan ---------------------------------------------


def intake_codes(
    rules: ScreeningRules, snr: FloatArray, frequency_hz: FloatArray, drift_hz_s: FloatArray
) -> IntArray:
    """The intake thresholds, the one place they are compared: ``low_snr`` or
    ``drift_out_of_range`` (the first that applies) per hit, 0 where the hit passes both."""
    codes = np.zeros(np.shape(snr), dtype=np.int64)
    _assign(codes, snr < rules.min_snr, Reason.LOW_SNR)
    too_fast = np.abs(drift_hz_s) > rules.drift_limit_hz_s(frequency_hz)
    _assign(codes, too_fast, Reason.DRIFT_OUT_OF_RANGE)
    return codes


def swept_range_hz(
    start_frequency_hz: FloatArray, drift_hz_s: FloatArray, duration_s: float | FloatArray
) -> tuple[FloatArray, FloatArray]:
    """(low, high) Hz a hit covers over its scan, from its frequency at the scan's start."""
    end = start_frequency_hz + drift_hz_s * duration_s
    return np.minimum(start_frequency_hz, end), np.maximum(start_frequency_hz, end)


def immediate_codes(scan: ScanHits, rules: ScreeningRules, bands: BandEdges) -> IntArray:
    """Rules 1-3 for every hit of an on-source scan (0 where none applies)."""
    codes = intake_codes(rules, scan.snr, scan.frequency_hz, scan.drift_hz_s)
    if rules.exclude_bands:
        swept = bands.overlaps(*swept_range_hz(scan.frequency_hz, scan.drift_hz_s, scan.duration_s))
        _assign(codes, swept, Reason.INTERFERENCE_BAND)
    if rules.zero_drift_resolutions is not None:
        limit = rules.zero_drift_resolutions * scan.resolution_hz_s
        earth = np.abs(scan.frequency_hz * scan.earth_drift_per_hz)
        _assign(codes, (np.abs(scan.drift_hz_s) <= limit) & (earth > limit), Reason.ZERO_DRIFT)
    return codes


def _assign(codes: IntArray, where: BoolArray, reason: Reason) -> None:
    """Give ``reason`` to hits that have none yet (the first rule that applies wins)."""
    codes[(codes == PENDING) & where] = code_of(reason)


# --- windows ----------------------------------------------------------------------------------


def predicted_frequency_hz(source: ScanHits, rows: IntArray, other: ScanHits) -> FloatArray:
    """Where hits ``rows`` of ``source`` would be at ``other``'s start if sky-fixed (Hz)."""
    f = source.frequency_hz[rows]
    own_drift = source.drift_hz_s[rows] - f * source.earth_drift_per_hz
    gap_s = other.start_unix_s - source.start_unix_s
    return f * (other.doppler_factor / source.doppler_factor) + own_drift * gap_s


def predicted_drift_hz_s(source: ScanHits, rows: IntArray, other: ScanHits) -> FloatArray:
    """The hits' drift at ``other``: own drift plus Earth's drift there (Hz/s)."""
    f = source.frequency_hz[rows]
    return source.drift_hz_s[rows] + f * (other.earth_drift_per_hz - source.earth_drift_per_hz)


def narrow_half_width_hz(rules: ScreeningRules, source: ScanHits, other: ScanHits) -> float:
    """Half-width of the predicted track in ``other`` (Hz), as the protocol's matching has it."""
    gap_s = abs(other.start_unix_s - source.start_unix_s)
    sigma_hz = float(
        np.hypot(
            rules.frequency_uncertainty_channels * source.channel_width_hz,
            rules.drift_uncertainty_resolutions * source.resolution_hz_s * gap_s,
        )
    )
    widened = max(rules.frequency_floor_hz, rules.sigma_multiplier * sigma_hz)
    return widened + rules.margin_channels * other.channel_width_hz


def drift_half_width_hz_s(rules: ScreeningRules, source: ScanHits, other: ScanHits) -> float:
    """How far a drift may stray from the prediction and still be the same signal (Hz/s)."""
    return (
        rules.sigma_multiplier
        * rules.drift_uncertainty_resolutions
        * float(np.hypot(source.resolution_hz_s, other.resolution_hz_s))
    )


def wide_half_width_hz(
    rules: ScreeningRules, source: ScanHits, rows: IntArray, other: ScanHits
) -> FloatArray:
    """Half-width searched in off-source scans: any drift up to the limit over the span (Hz)."""
    span_s = abs(other.start_unix_s - source.start_unix_s) + other.duration_s
    return (
        rules.off_source_drift_hz_s(source.frequency_hz[rows]) * span_s
        + rules.off_source_margin_hz
        + rules.margin_channels * other.channel_width_hz
    )


def window_counts(
    sorted_hz: FloatArray, centre_hz: FloatArray, half_width_hz: float | FloatArray
) -> tuple[IntArray, IntArray]:
    """First index and count of sorted values inside each [centre - w, centre + w]."""
    low = np.searchsorted(sorted_hz, centre_hz - half_width_hz, side="left")
    high = np.searchsorted(sorted_hz, centre_hz + half_width_hz, side="right")
    return low, high - low


def window_pairs(
    sorted_hz: FloatArray, centre_hz: FloatArray, half_width_hz: float | FloatArray
) -> tuple[IntArray, IntArray]:
    """Every (query index, sorted position) with the value inside the query's window."""
    low, count = window_counts(sorted_hz, centre_hz, half_width_hz)
    query = np.repeat(np.arange(centre_hz.size, dtype=np.int64), count)
    if query.size == 0:
        return query, query
    first_of_query = np.repeat(np.cumsum(count) - count, count)
    position = np.repeat(low, count) + (np.arange(query.size) - first_of_query)
    return query, position.astype(np.int64)


def matches_with_drift(
    source: ScanHits, rows: IntArray, other: ScanHits, rules: ScreeningRules
) -> tuple[IntArray, IntArray]:
    """(index into rows, hit position in ``other``) pairs on the track in frequency and drift."""
    centre = predicted_frequency_hz(source, rows, other)
    query, position = window_pairs(
        other.frequency_hz, centre, narrow_half_width_hz(rules, source, other)
    )
    expected = predicted_drift_hz_s(source, rows, other)[query]
    agree = np.abs(other.drift_hz_s[position] - expected) <= drift_half_width_hz_s(
        rules, source, other
    )
    return query[agree], position[agree]


def covered(scan: ScanHits, centre_hz: FloatArray, half_width_hz: float | FloatArray) -> BoolArray:
    """True where the scan's recorded band contains the whole window."""
    return (centre_hz - half_width_hz >= scan.frequency_min_hz) & (
        centre_hz + half_width_hz <= scan.frequency_max_hz
    )


# --- the cadence --------------------------------------------------------------------------------


def screen_cadence(
    scans: Sequence[ScanHits],
    rules: ScreeningRules,
    bands: BandEdges,
    occupancy: OccupancyHits | None = None,
    in_cadence: bool = True,
) -> CadenceOutcome:
    """Judge the pending hits of every complete scan against the cadence's complete scans.

    ``scans`` are the cadence's scans at one site (open ones are ignored: never evidence).
    ``in_cadence`` False (a scan without a cadence label) skips rules 4 and 5.
    """
    codes = [np.zeros(scan.size, dtype=np.int64) for scan in scans]
    complete = [k for k, scan in enumerate(scans) if scan.complete]
    on_scans = [k for k in complete if scans[k].on_source]
    off_scans = [k for k in complete if not scans[k].on_source]
    cadence_rules = in_cadence and rules.min_on_scans is not None
    for r in complete:
        scan = scans[r]
        if not scan.pending.any():
            continue
        if not scan.on_source:
            _assign(codes[r], scan.pending, Reason.OFF_SOURCE_SCAN)
            continue
        codes[r][:] = immediate_codes(scan, rules, bands)
        open_rows = np.nonzero(scan.pending & (codes[r] == PENDING))[0]
        if cadence_rules:
            open_rows = _off_source_rule(scans, r, open_rows, off_scans, rules, codes[r])
            open_rows = _on_source_rule(scans, r, open_rows, on_scans, rules, codes[r])
        if occupancy is not None and occupancy.frequency_hz.size and rules.occupancy_span_s > 0:
            busy = occupied(scan, open_rows, occupancy, rules)
            codes[r][open_rows[busy]] = code_of(Reason.OCCUPIED_ELSEWHERE)
            open_rows = open_rows[~busy]
        codes[r][open_rows] = code_of(Reason.SURVIVED)
        codes[r][~scan.pending] = PENDING
    outcome = CadenceOutcome(codes)
    outcome.signals = group_survivors(scans, codes, rules)
    return outcome


def _off_source_rule(
    scans: Sequence[ScanHits],
    r: int,
    rows: IntArray,
    off_scans: Sequence[int],
    rules: ScreeningRules,
    codes: IntArray,
) -> IntArray:
    """Rule 4: drop hits present in an off-source scan; hold those with too few off scans.

    Returns the rows still open after rule 4 (decided absent off-source).
    """
    source = scans[r]
    present = np.zeros(rows.size, dtype=bool)
    counted = np.zeros(rows.size, dtype=np.int64)
    for k in off_scans:
        other = scans[k]
        centre = predicted_frequency_hz(source, rows, other)
        width = wide_half_width_hz(rules, source, rows, other)
        _, inside = window_counts(other.frequency_hz, centre, width)
        present |= inside > 0
        counted += covered(other, centre, width)
    codes[rows[present]] = code_of(Reason.PRESENT_OFF_SOURCE)
    enough = counted >= rules.min_off_scans
    return rows[~present & enough]


def _on_source_rule(
    scans: Sequence[ScanHits],
    r: int,
    rows: IntArray,
    on_scans: Sequence[int],
    rules: ScreeningRules,
    codes: IntArray,
) -> IntArray:
    """Rule 5: drop hits on the track in too few covering on-source scans; hold undecided.

    The hit's own scan counts as covering and present. Returns the rows still open.
    """
    source = scans[r]
    counted = np.ones(rows.size, dtype=np.int64)
    present = np.ones(rows.size, dtype=np.int64)
    for k in on_scans:
        if k == r:
            continue
        other = scans[k]
        centre = predicted_frequency_hz(source, rows, other)
        covers = covered(other, centre, narrow_half_width_hz(rules, source, other))
        query, _ = matches_with_drift(source, rows, other, rules)
        seen = np.zeros(rows.size, dtype=bool)
        seen[query] = True
        counted += covers
        present += covers & seen
    assert rules.min_on_scans is not None
    enough = counted >= rules.min_on_scans
    absent = enough & (present < rules.min_on_fraction * counted - 1e-9)
    codes[rows[absent]] = code_of(Reason.ABSENT_ON_SOURCE)
    return rows[enough & ~absent]


def occupied(
    scan: ScanHits, rows: IntArray, occupancy: OccupancyHits, rules: ScreeningRules
) -> BoolArray:
    """Rule 6: same topocentric frequency and drift in other targets' scans at the site."""
    width = rules.frequency_floor_hz + rules.margin_channels * (
        scan.channel_width_hz + float(np.max(occupancy.channel_width_hz))
    )
    query, position = window_pairs(occupancy.frequency_hz, scan.frequency_hz[rows], width)
    tolerance = rules.occupancy_drift_resolutions * np.hypot(
        scan.resolution_hz_s, occupancy.resolution_hz_s[position]
    )
    agree = np.abs(occupancy.drift_hz_s[position] - scan.drift_hz_s[rows][query]) <= tolerance
    busy = np.zeros(rows.size, dtype=bool)
    busy[query[agree]] = True
    return busy


def group_survivors(
    scans: Sequence[ScanHits], codes: Sequence[IntArray], rules: ScreeningRules
) -> list[list[tuple[int, int]]]:
    """Survivors that are one signal (on each other's track, across and within scans).

    Survivors are few (what is left after screening), so grouping them by union-find is cheap.
    Groups are ordered by their earliest scan, members by (scan index, position).
    """
    survivor = code_of(Reason.SURVIVED)
    members = [
        (k, int(p)) for k, c in enumerate(codes) for p in np.nonzero(c == survivor)[0].tolist()
    ]
    if not members:
        return []
    index = {member: n for n, member in enumerate(members)}
    parent = list(range(len(members)))

    def root(n: int) -> int:
        while parent[n] != n:
            parent[n] = parent[parent[n]]
            n = parent[n]
        return n

    by_scan: dict[int, IntArray] = {}
    for k, p in members:
        by_scan.setdefault(k, np.empty(0, dtype=np.int64))
        by_scan[k] = np.append(by_scan[k], p)
    for r, rows in by_scan.items():
        for k, positions in by_scan.items():
            if k < r:
                continue
            query, position = matches_with_drift(scans[r], rows, scans[k], rules)
            wanted = np.isin(position, positions)
            for q, p in zip(query[wanted].tolist(), position[wanted].tolist(), strict=True):
                parent[root(index[(r, int(rows[q]))])] = root(index[(k, p)])
    groups: dict[int, list[tuple[int, int]]] = {}
    for n, member in enumerate(members):
        groups.setdefault(root(n), []).append(member)
    return sorted((sorted(g) for g in groups.values()), key=lambda g: g[0])
