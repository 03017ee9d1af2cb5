"""Synthetic candidates for the protocol tests: invented sites, targets and signals.

Truth comes from the physics engine (``physics.predict_signal`` without a cache: direct astropy
and the exact barycentric gap), not from the protocol's own fast path. Measurements are
quantised the way a pipeline reports them: frequency within half a channel, drift within half
a drift resolution (uniform, fixed seeds).

Every name here is invented; the coordinates are arbitrary points on four continents.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from datetime import UTC, datetime

import numpy as np

from confirm_service import physics
from confirm_service.protocol.facts import (
    CandidateFacts,
    DetectionFact,
    ObservationFact,
    ReportFact,
    SiteFact,
    TargetFact,
)

SITES = {
    "ALD": SiteFact("ALD", 52.10, -1.30, 120.0),  # Aldermoor, Europe
    "ALN": SiteFact("ALN", 54.30, -1.55, 210.0),  # Aldermoor North, ~245 km from ALD
    "BRN": SiteFact("BRN", -31.20, 147.50, 300.0),  # Brindle Flats, Australia
    "CSK": SiteFact("CSK", 38.90, -106.20, 2400.0),  # Cask Valley, North America
    "DUN": SiteFact("DUN", -24.60, 16.80, 1300.0),  # Dune Ridge, southern Africa
}
TARGETS = {
    "ariadne": TargetFact("TGT-Ariadne", 84.20, -12.50),
    "borealis": TargetFact("TGT-Borealis", 210.70, 33.10),
    "cetra": TargetFact("TGT-Cetra", 330.40, -48.90),
    "dorado": TargetFact("TGT-Dovetail", 150.30, 8.40),
}

EPOCH = datetime(2025, 3, 10, tzinfo=UTC).timestamp()
SIDEREAL_DAY_S = 86_164.0905  # mean sidereal day (IERS conventions, from memory)
SCAN_S = 300.0
SLEW_S = 30.0
CHANNEL_HZ = 3.0
TIME_RESOLUTION_S = 10.0
BAND_HALF_WIDTH_HZ = 50.0e6
MIN_ELEVATION_DEG = 30.0

# true classes of the injection suite and the check expected to stop each
EXPECTED_OUTCOME = {
    "sky_fixed": "advanced",
    "off_source": "on_off_cadence",
    "zero_drift": "nonzero_drift",
    "drift_ignores_earth": "doppler_consistency",
    "in_band": "known_interference",
    "multi_beam": "multi_beam",
}


def drift_resolution_hz_s() -> float:
    """Drift resolution of every synthetic scan: channel / duration."""
    return CHANNEL_HZ / SCAN_S


@dataclass
class Builder:
    """Accumulates scans and detections of one synthetic candidate."""

    target: TargetFact
    seed: int
    observations: list[ObservationFact] = field(default_factory=list)
    next_observation_id: int = 1
    next_detection_id: int = 1

    def __post_init__(self) -> None:
        self.rng = np.random.default_rng(self.seed)

    def scan(
        self,
        site: SiteFact,
        start_unix_s: float,
        centre_hz: float,
        *,
        on_source: bool = True,
        cadence: str | None = None,
        beam: str | None = None,
        ra_offset_deg: float = 0.0,
    ) -> ObservationFact:
        observation = ObservationFact(
            id=self.next_observation_id,
            site=site,
            target_name=self.target.name if on_source else None,
            pointing_ra_deg=(self.target.ra_deg + ra_offset_deg) % 360.0,
            pointing_dec_deg=self.target.dec_deg,
            start_unix_s=start_unix_s,
            duration_s=SCAN_S,
            frequency_min_hz=centre_hz - BAND_HALF_WIDTH_HZ,
            frequency_max_hz=centre_hz + BAND_HALF_WIDTH_HZ,
            channel_width_hz=CHANNEL_HZ,
            time_resolution_s=TIME_RESOLUTION_S,
            on_source=on_source,
            beam=beam,
            cadence=cadence,
        )
        self.next_observation_id += 1
        self.observations.append(observation)
        return observation

    def detect(
        self, observation: ObservationFact, frequency_hz: float, drift_hz_s: float, offset_s: float
    ) -> DetectionFact:
        """A detection with pipeline quantisation noise added to the true values."""
        measured_f = frequency_hz + self.rng.uniform(-0.5, 0.5) * CHANNEL_HZ
        measured_drift = drift_hz_s + self.rng.uniform(-0.45, 0.45) * drift_resolution_hz_s()
        detection = DetectionFact(
            id=self.next_detection_id,
            observation_id=observation.id,
            frequency_hz=float(measured_f),
            drift_hz_s=float(measured_drift),
            snr=float(self.rng.uniform(15.0, 60.0)),
            time_offset_s=offset_s,
            beam=observation.beam,
        )
        self.next_detection_id += 1
        index = self.observations.index(observation)
        self.observations[index] = replace(
            observation, detections=(*observation.detections, detection)
        )
        return detection

    def observation(self, observation_id: int) -> ObservationFact:
        return next(o for o in self.observations if o.id == observation_id)


def elevation_deg(site: SiteFact, target: TargetFact, unix_s: np.ndarray) -> np.ndarray:
    """Elevation (deg) of a target from a site, through the physics engine."""
    location = physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m)
    coord = physics.target_coord(target.ra_deg, target.dec_deg)
    alt, _ = physics.altaz(location, coord, physics.time_from_unix_s(unix_s))
    return np.asarray(alt, dtype=np.float64)


def first_visible(
    site: SiteFact, target: TargetFact, after_unix_s: float, hold_s: float = 2400.0
) -> float:
    """First 10-min grid time after ``after_unix_s`` with the target above 30 deg for hold_s."""
    grid = after_unix_s + np.arange(0.0, 3.0 * 86_400.0, 600.0)
    alt = elevation_deg(site, target, grid)
    alt_end = elevation_deg(site, target, grid + hold_s)
    ok = np.flatnonzero((alt >= MIN_ELEVATION_DEG) & (alt_end >= MIN_ELEVATION_DEG))
    if not ok.size:
        raise ValueError(f"{target.name} not visible from {site.code} within 3 days")
    return float(grid[ok[0]])


@dataclass(frozen=True)
class Truth:
    """A sky-fixed transmitter defined by its true signal at the reference site and time."""

    site: SiteFact
    target: TargetFact
    unix_s: float
    frequency_hz: float
    drift_hz_s: float

    def at(self, site: SiteFact, unix_s: np.ndarray) -> physics.Prediction:
        """Exact physics prediction (no cache) of frequency and drift at a site and times."""
        location = physics.site_location(
            self.site.latitude_deg, self.site.longitude_deg, self.site.elevation_m
        )
        coord = physics.target_coord(self.target.ra_deg, self.target.dec_deg)
        to_location = physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m)
        measurement = physics.SignalMeasurement(
            location, self.unix_s, self.frequency_hz, self.drift_hz_s
        )
        return physics.predict_signal(measurement, coord, to_location, np.asarray(unix_s))


def sky_fixed_truth(
    site: SiteFact, target: TargetFact, unix_s: float, frequency_hz: float, residual_hz_s: float
) -> Truth:
    """Truth whose drift at the reference is Earth drift + ``residual_hz_s``."""
    location = physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m)
    coord = physics.target_coord(target.ra_deg, target.dec_deg)
    earth = float(
        physics.earth_drift_hz_s(location, coord, physics.time_from_unix_s(unix_s), frequency_hz)
    )
    return Truth(site, target, unix_s, frequency_hz, earth + residual_hz_s)


@dataclass
class Scenario:
    """One synthetic candidate and what it truly is."""

    name: str
    true_class: str
    facts: CandidateFacts
    truth: Truth
    residual_drift_hz_s: float
    earth_drift_span_hz_s: float = 0.0
    notes: dict[str, float] = field(default_factory=dict)


@dataclass(frozen=True)
class Layout:
    """Where and when: discovery site, far site, target, frequency, residual drift."""

    name: str
    true_class: str
    site: str
    far_site: str
    target: str
    frequency_hz: float
    residual_hz_s: float
    seed: int


def build(layout: Layout, stage: str = "screening") -> Scenario:
    """Build the candidate of a layout: ABACAD cadence, re-observation, far-site scan."""
    site, far = SITES[layout.site], SITES[layout.far_site]
    target = TARGETS[layout.target]
    builder = Builder(target, layout.seed)
    start = first_visible(site, target, EPOCH + 86_400.0 * (layout.seed % 5))
    cadence = f"cad-{layout.name}"
    centre = layout.frequency_hz
    scans = [
        builder.scan(
            site,
            start + i * (SCAN_S + SLEW_S),
            centre,
            on_source=i % 2 == 0,
            cadence=cadence,
            ra_offset_deg=0.0 if i % 2 == 0 else 0.5 + 0.1 * i,
        )
        for i in range(6)
    ]
    reobs_start = first_visible(site, target, start + SIDEREAL_DAY_S + 1800.0, hold_s=600.0)
    reobs = builder.scan(site, reobs_start, centre)
    far_start = first_visible(far, target, start + 3.0 * 3600.0, hold_s=600.0)
    far_scan = builder.scan(far, far_start, centre)
    offsets = builder.rng.uniform(0.0, 60.0, size=8)
    reference_offset = float(offsets[0])
    truth = sky_fixed_truth(
        site, target, start + reference_offset, layout.frequency_hz, layout.residual_hz_s
    )
    on_scans = [scans[0], scans[2], scans[4]]
    off_scans = [scans[1], scans[3], scans[5]]
    at_site = [*on_scans, reobs]
    site_times = np.array(
        [o.start_unix_s + float(offsets[i]) for i, o in enumerate(at_site)]
        + [o.start_unix_s + 30.0 for o in off_scans]
    )
    site_truth = truth.at(site, site_times)
    far_truth = truth.at(far, np.array([far_scan.start_unix_s + float(offsets[5])]))
    earth = np.concatenate([site_truth.earth_drift_hz_s[:4], far_truth.earth_drift_hz_s])
    injector = _INJECTORS[layout.true_class]
    injector(
        builder, layout, truth, on_scans, off_scans, reobs, far_scan, offsets, site_truth, far_truth
    )
    for observation in list(builder.observations):
        if observation.on_source and observation.detections:
            _add_decoy(builder, observation)
    observations = tuple(builder.observations)
    reference_scan = builder.observation(on_scans[0].id)
    reference = reference_scan.detections[0]
    last_end = max(o.end_unix_s for o in observations)
    facts = CandidateFacts(
        candidate_id=layout.seed,
        target=target,
        reference=reference,
        reference_observation=reference_scan,
        observations=tuple(o for o in observations if o.id != reference_scan.id),
        reports=(),
        signoffs=(),
        now_unix_s=last_end + 3600.0,
        stage=stage,
        state="open",
        stage_entered_unix_s=reference_scan.end_unix_s + 600.0,
    )
    return Scenario(
        layout.name,
        layout.true_class,
        facts,
        truth,
        layout.residual_hz_s,
        earth_drift_span_hz_s=float(np.max(earth) - np.min(earth)),
    )


def _add_decoy(builder: Builder, observation: ObservationFact) -> None:
    """An unrelated hit 40 kHz away, outside every track window (must never be linked)."""
    decoy_f = observation.detections[0].frequency_hz + 40_000.0
    builder.detect(observation, decoy_f, float(builder.rng.uniform(-1.0, 1.0)), 12.0)


def _inject_sky_fixed(
    builder, layout, truth, on_scans, off_scans, reobs, far_scan, offsets, site_truth, far_truth
) -> None:
    for i, observation in enumerate([*on_scans, reobs]):
        builder.detect(
            observation,
            float(site_truth.frequency_hz[i]),
            float(site_truth.drift_hz_s[i]),
            float(offsets[i]),
        )
    builder.detect(
        far_scan,
        float(far_truth.frequency_hz[0]),
        float(far_truth.drift_hz_s[0]),
        float(offsets[5]),
    )


def _inject_off_source(builder, layout, truth, on_scans, off_scans, *rest) -> None:
    _inject_sky_fixed(builder, layout, truth, on_scans, off_scans, *rest)
    site_truth = rest[3]
    for j, observation in enumerate(off_scans):
        builder.detect(
            observation,
            float(site_truth.frequency_hz[4 + j]),
            float(site_truth.drift_hz_s[4 + j]),
            30.0,
        )


def _inject_zero_drift(
    builder, layout, truth, on_scans, off_scans, reobs, far_scan, offsets, site_truth, far_truth
) -> None:
    """A transmitter at a fixed frequency with no drift, seen at the discovery site only."""
    for i, observation in enumerate([*on_scans, reobs]):
        builder.detect(observation, layout.frequency_hz, 0.0, float(offsets[i]))


def _inject_drift_ignores_earth(
    builder, layout, truth, on_scans, off_scans, reobs, far_scan, offsets, site_truth, far_truth
) -> None:
    """On the predicted frequency each time, but always the reference's drift."""
    constant = float(site_truth.drift_hz_s[0])
    for i, observation in enumerate([*on_scans, reobs]):
        builder.detect(observation, float(site_truth.frequency_hz[i]), constant, float(offsets[i]))
    builder.detect(far_scan, float(far_truth.frequency_hz[0]), constant, float(offsets[5]))


def _inject_multi_beam(
    builder, layout, truth, on_scans, off_scans, reobs, far_scan, offsets, site_truth, far_truth
) -> None:
    """Sky-fixed-looking signal that also fills two simultaneous beams pointing elsewhere."""
    _inject_sky_fixed(
        builder, layout, truth, on_scans, off_scans, reobs, far_scan, offsets, site_truth, far_truth
    )
    for i, observation in enumerate(on_scans):
        for beam, offset_deg in (("B2", 0.35), ("B3", -0.35)):
            side = builder.scan(
                observation.site,
                observation.start_unix_s,
                layout.frequency_hz,
                on_source=False,
                beam=beam,
                ra_offset_deg=offset_deg,
            )
            builder.detect(
                side,
                float(site_truth.frequency_hz[i]),
                float(site_truth.drift_hz_s[i]),
                float(offsets[i]),
            )


_INJECTORS = {
    "sky_fixed": _inject_sky_fixed,
    "in_band": _inject_sky_fixed,
    "off_source": _inject_off_source,
    "zero_drift": _inject_zero_drift,
    "drift_ignores_earth": _inject_drift_ignores_earth,
    "multi_beam": _inject_multi_beam,
}

INJECTION_LAYOUTS = (
    Layout("sf-ald-dorado-0", "sky_fixed", "ALD", "BRN", "dorado", 6_667.3e6, 0.0, 101),
    Layout("sf-dun-dorado-p", "sky_fixed", "DUN", "CSK", "dorado", 8_712.4e6, 0.35, 102),
    Layout("sf-brn-cetra-n", "sky_fixed", "BRN", "DUN", "cetra", 4_871.2e6, -0.8, 103),
    Layout("sf-csk-borealis-p", "sky_fixed", "CSK", "ALD", "borealis", 1_430.5e6, 0.12, 104),
    Layout("off-ald-dorado", "off_source", "ALD", "DUN", "dorado", 6_667.3e6, 0.2, 201),
    Layout("off-brn-ariadne", "off_source", "BRN", "CSK", "ariadne", 3_221.7e6, 0.0, 202),
    Layout("zero-csk-ariadne", "zero_drift", "CSK", "BRN", "ariadne", 8_712.4e6, 0.0, 301),
    Layout("zero-dun-dorado", "zero_drift", "DUN", "ALD", "dorado", 6_667.3e6, 0.0, 302),
    Layout(
        "const-ald-borealis", "drift_ignores_earth", "ALD", "CSK", "borealis", 8_712.4e6, 0.1, 401
    ),
    Layout("const-brn-dorado", "drift_ignores_earth", "BRN", "CSK", "dorado", 6_667.3e6, -0.3, 402),
    Layout("band-dun-dorado", "in_band", "DUN", "CSK", "dorado", 1_576.1e6, 0.0, 501),
    Layout("band-csk-ariadne", "in_band", "CSK", "DUN", "ariadne", 2_452.7e6, 0.05, 502),
    Layout("beam-ald-borealis", "multi_beam", "ALD", "CSK", "borealis", 4_871.2e6, 0.0, 601),
    Layout("beam-brn-ariadne", "multi_beam", "BRN", "DUN", "ariadne", 8_712.4e6, 0.25, 602),
)


def report_from(
    scenario: Scenario,
    site: SiteFact,
    unix_s: float,
    *,
    detected: bool,
    report_id: int = 9001,
    offset_hz: float = 0.0,
) -> ReportFact:
    """A partner report at ``site``: the truth frequency (plus offset) if detected."""
    truth = scenario.truth.at(site, np.array([unix_s]))
    frequency = float(truth.frequency_hz[0]) + offset_hz
    return ReportFact(
        id=report_id,
        site=site,
        unix_s=unix_s,
        detected=detected,
        frequency_hz=frequency if detected else None,
        drift_hz_s=float(truth.drift_hz_s[0]) if detected else None,
        frequency_min_hz=frequency - 1.0e6,
        frequency_max_hz=frequency + 1.0e6,
        duration_s=SCAN_S,
    )
