"""Invented cadences with realistic hit populations, posted the way a search pipeline posts them.

Used by the triage benchmark and the tests. Every scan of a cadence carries hits above the intake
threshold: persistent interferers (the same topocentric frequency and drift in every scan, on and
off source; some with zero drift), one-off hits (one scan only, random frequency and drift), and a
few sky-fixed signals present in the on-source scans only, generated with the physics engine for
a transmitter at the target (the hypothesis the checks test). The instrument settings are our own
invented ones.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime, timedelta
from typing import Any

import numpy as np

from confirm_service.demo import DemoSite, DemoTarget, Instrument
from confirm_service.demo import scan_body as demo_scan_body

SCAN_S = 240.0
GAP_S = 20.0
CHANNEL_HZ = 3.81
TIME_RESOLUTION_S = 12.5
BAND_HZ = (1.30e9, 1.80e9)
CLEAR_SPAN_HZ = (1.6300e9, 1.6400e9)
"""A stretch of the band kept free of interference, where the sky-fixed signals are placed."""
SKY_RESIDUAL_DRIFTS_HZ_S = (0.12, -0.09, 0.21, -0.17)
GUARD_HZ = 40_000.0
"""No other hit lies within this of a sky-fixed signal's frequency (wider than the off-source
search window of the shipped protocols: 10 Hz/s over a 26-minute cadence plus margins)."""


@dataclass
class Cadence:
    """Scans (bodies without hits), their hits (one list per scan) and the injected signals."""

    scans: list[dict[str, Any]]
    hits: list[list[dict[str, float]]]
    sky_frequencies_hz: list[float] = field(default_factory=list)

    @property
    def hit_count(self) -> int:
        return sum(len(h) for h in self.hits)


INSTRUMENT = Instrument(SCAN_S, BAND_HZ, CHANNEL_HZ, TIME_RESOLUTION_S)


def scan_body(
    site: str,
    target: str | None,
    start: datetime,
    on_source: bool,
    cadence: str,
    pointing: tuple[float, float] | None = None,
) -> dict[str, Any]:
    """An observation body as a pipeline registers it (no hits: they follow in batches)."""
    return demo_scan_body(
        site,
        start,
        on_source,
        cadence,
        target if on_source else None,
        pointing,
        f"synthetic-{cadence}",
        INSTRUMENT,
    )


def _clear_of(frequencies: np.ndarray, centres: list[float]) -> np.ndarray:
    """True where a frequency is at least GUARD_HZ from every centre."""
    keep = np.ones(frequencies.size, dtype=bool)
    for centre in centres:
        keep &= np.abs(frequencies - centre) > GUARD_HZ
    return keep


def _random_frequencies(rng: np.random.Generator, count: int, avoid: list[float]) -> np.ndarray:
    """Frequencies in the band outside the clear span and the signals' guard (Hz)."""
    found = np.empty(0)
    while found.size < count:
        draw = rng.uniform(BAND_HZ[0] + 1e5, BAND_HZ[1] - 1e5, 2 * count)
        outside = (draw < CLEAR_SPAN_HZ[0]) | (draw > CLEAR_SPAN_HZ[1])
        found = np.concatenate([found, draw[outside & _clear_of(draw, avoid)]])
    return found[:count]


def make_cadence(
    site: DemoSite,
    target: DemoTarget,
    start: datetime,
    hits_per_scan: int,
    seed: int = 1,
    scans: int = 6,
    sky_signals: int = 2,
    persistent_fraction: float = 0.8,
    zero_drift_fraction: float = 0.25,
    label: str | None = None,
) -> Cadence:
    """An on/off cadence (on, off, on, off...) of ``scans`` scans with ``hits_per_scan`` hits.

    Hits have SNR 12 to 60, above the shipped protocols' intake threshold (10).
    """
    from confirm_service.demo import SkyFixedSignal

    rng = np.random.default_rng(seed)
    label = label or f"{site['code']}-{start:%Y%m%dT%H%M}-{target['name']}"
    starts = [start + timedelta(seconds=k * (SCAN_S + GAP_S)) for k in range(scans)]
    sky = [
        float(
            CLEAR_SPAN_HZ[0] + (n + 1) * (CLEAR_SPAN_HZ[1] - CLEAR_SPAN_HZ[0]) / (sky_signals + 1)
        )
        for n in range(sky_signals)
    ]
    # own drifts of a few tenths of Hz/s, clearly apart from zero at this drift resolution
    signals = [
        SkyFixedSignal(site, target, starts[0], frequency_hz=f, residual_drift_hz_s=drift)
        for f, drift in zip(sky, SKY_RESIDUAL_DRIFTS_HZ_S, strict=False)
    ]
    n_persistent = int(round(persistent_fraction * hits_per_scan))
    persistent_f = _random_frequencies(rng, n_persistent, sky)
    persistent_d = rng.uniform(-3.0, 3.0, n_persistent)
    persistent_d[rng.random(n_persistent) < zero_drift_fraction] = 0.0
    bodies, hits = [], []
    for k, scan_start in enumerate(starts):
        on = k % 2 == 0
        pointing = None if on else (target["ra_deg"] + 0.7 * (k // 2 + 1), target["dec_deg"])
        bodies.append(scan_body(site["code"], target["name"], scan_start, on, label, pointing))
        n_once = hits_per_scan - n_persistent - (len(signals) if on else 0)
        once_f = _random_frequencies(rng, n_once, sky)
        frequency = np.concatenate([persistent_f, once_f])
        drift = np.concatenate([persistent_d, rng.uniform(-3.0, 3.0, n_once)])
        snr = rng.uniform(12.0, 60.0, frequency.size)
        offset = rng.uniform(0.0, SCAN_S, frequency.size)
        # a hit reports its frequency at its own time: the start frequency moved by its drift
        scan_hits = [
            {
                "frequency_hz": float(f + d * t),
                "drift_hz_s": float(d),
                "snr": float(s),
                "time_offset_s": float(t),
            }
            for f, d, s, t in zip(frequency, drift, snr, offset, strict=True)
        ]
        if on:
            for signal in signals:
                at = scan_start + timedelta(seconds=30.0)
                scan_hits.append({**signal.seen_at(site, at, 25.0), "time_offset_s": 30.0})
        order = rng.permutation(len(scan_hits))
        hits.append([scan_hits[i] for i in order])
    return Cadence(bodies, hits, sky)


def batches(hits: list[dict[str, float]], count: int) -> list[list[dict[str, float]]]:
    """The scan's hits in ``count`` batches, as a pipeline sends them while it searches."""
    size = max(1, -(-len(hits) // count))
    return [hits[i : i + size] for i in range(0, len(hits), size)]
