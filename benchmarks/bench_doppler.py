"""Throughput and accuracy of Earth-drift evaluation: cached tracks vs. direct astropy.

100,000 invented detections spread over 50 (site, target) pairs and one day. Prints:
* amortised drift evaluations per second with cached tracks, track building included;
* the naive path (one scalar astropy call per detection plus two more for a central-difference
  drift), timed on a sample and scaled, and the ratio of the two;
* the largest deviation from vectorised direct astropy over all points, in drift (Hz/s) and
  frequency (Hz) at 1.42 GHz.

Run: python benchmarks/bench_doppler.py [--detections N] [--pairs P] [--naive-sample S]
     [--reference-points R]   (the full reference takes minutes: astropy at 5 x N points)
"""

from __future__ import annotations

import argparse
import time
from datetime import UTC, datetime

import numpy as np

from confirm_service.physics import (
    SPEED_OF_LIGHT_M_S,
    TrackCache,
    TrackRequest,
    drift_from_acceleration_hz_s,
    radial_velocity_and_acceleration,
    site_location,
    target_coord,
    time_from_unix_s,
)

FREQUENCY_HZ = 1.42e9
NAIVE_STEP_S = 20.0  # central difference of three scalar calls
GOAL_RATE = 1_000_000.0
GOAL_RATIO = 1000.0
GOAL_DRIFT_HZ_S = 1e-5
GOAL_FREQUENCY_HZ = 0.01


def invented_pairs(pairs: int, rng: np.random.Generator):
    """Invented sites (10 or fewer) and targets, combined into ``pairs`` pairs."""
    sites_count = min(10, pairs)
    sites = [
        site_location(float(lat), float(lon), float(h))
        for lat, lon, h in zip(
            rng.uniform(-75, 75, sites_count),
            rng.uniform(-180, 180, sites_count),
            rng.uniform(0, 3000, sites_count),
            strict=True,
        )
    ]
    targets_count = -(-pairs // sites_count)
    targets = [
        target_coord(float(ra), float(np.degrees(np.arcsin(s))))
        for ra, s in zip(
            rng.uniform(0, 360, targets_count), rng.uniform(-1, 1, targets_count), strict=True
        )
    ]
    return [(s, t, sites[s], targets[t]) for s in range(sites_count) for t in range(targets_count)][
        :pairs
    ]


def fast_path(pairs, pair_index, unix_s, frequency_hz):
    """Fresh cache: build all tracks, then evaluate drift and barycentric frequency."""
    cache = TrackCache()
    requests = [TrackRequest(loc, tgt, site_key=s, target_key=t) for s, t, loc, tgt in pairs]
    velocity, acceleration = cache.kinematics(requests, pair_index, unix_s)
    drift = drift_from_acceleration_hz_s(frequency_hz, velocity, acceleration)
    return velocity, drift


def naive_seconds_per_detection(pairs, pair_index, unix_s, sample: int) -> float:
    """One scalar astropy call per detection plus two for a central-difference drift."""
    import astropy.units as u

    start = time.perf_counter()
    for i in range(sample):
        _, _, location, target = pairs[pair_index[i]]
        times = [time_from_unix_s(unix_s[i] + d) for d in (0.0, -NAIVE_STEP_S, NAIVE_STEP_S)]
        rv = [
            target.radial_velocity_correction(
                kind="barycentric", obstime=t, location=location
            ).to_value(u.m / u.s)
            for t in times
        ]
        _ = FREQUENCY_HZ * (rv[2] - rv[1]) / (2 * NAIVE_STEP_S) / (SPEED_OF_LIGHT_M_S + rv[0])
    return (time.perf_counter() - start) / sample


def reference(pairs, pair_index, unix_s, frequency_hz):
    """Vectorised direct astropy at every point (one call per pair)."""
    velocity = np.empty_like(unix_s)
    drift = np.empty_like(unix_s)
    for p, (_, _, location, target) in enumerate(pairs):
        mine = np.flatnonzero(pair_index == p)
        if mine.size == 0:
            continue
        rv, acc = radial_velocity_and_acceleration(location, target, time_from_unix_s(unix_s[mine]))
        velocity[mine] = rv
        drift[mine] = drift_from_acceleration_hz_s(frequency_hz[mine], rv, acc)
    return velocity, drift


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--detections", type=int, default=100_000)
    parser.add_argument("--pairs", type=int, default=50)
    parser.add_argument("--naive-sample", type=int, default=100)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument(
        "--reference-points",
        type=int,
        default=0,
        help="check deviations on this many random points only (default 0: all points)",
    )
    args = parser.parse_args()

    rng = np.random.default_rng(20240601)
    pairs = invented_pairs(args.pairs, rng)
    day = datetime(2025, 6, 1, tzinfo=UTC).timestamp()
    pair_index = rng.integers(0, len(pairs), args.detections)
    unix_s = day + rng.uniform(0.0, 86_400.0, args.detections)
    frequency_hz = FREQUENCY_HZ + rng.uniform(-5e5, 5e5, args.detections)

    fast_path(pairs[:2], pair_index[:10] % 2, unix_s[:10], frequency_hz[:10])  # warm imports
    timings = []
    for _ in range(args.repeats):
        start = time.perf_counter()
        velocity, drift = fast_path(pairs, pair_index, unix_s, frequency_hz)
        timings.append(time.perf_counter() - start)
    fast_s = min(timings)
    fast_rate = args.detections / fast_s
    median_rate = args.detections / float(np.median(timings))

    naive_s = naive_seconds_per_detection(pairs, pair_index, unix_s, args.naive_sample)
    naive_rate = 1.0 / naive_s

    checked = np.arange(args.detections)
    if 0 < args.reference_points < args.detections:
        checked = np.sort(rng.choice(args.detections, args.reference_points, replace=False))
    start = time.perf_counter()
    ref_velocity, ref_drift = reference(
        pairs, pair_index[checked], unix_s[checked], frequency_hz[checked]
    )
    reference_s = time.perf_counter() - start
    at_1420 = FREQUENCY_HZ / frequency_hz[checked]  # deviations scaled to 1.42 GHz
    drift_dev = float(np.max(np.abs(drift[checked] - ref_drift) * at_1420))
    frequency_dev = float(
        np.max(np.abs(velocity[checked] - ref_velocity)) * FREQUENCY_HZ / SPEED_OF_LIGHT_M_S
    )

    print(f"detections: {args.detections}, pairs: {len(pairs)}, span: 1 day")
    print(
        f"cached tracks (fresh cache: build + evaluate): best {fast_s * 1e3:.1f} ms, "
        f"runs {', '.join(f'{t * 1e3:.1f}' for t in timings)} ms"
    )
    print(
        f"  amortised drift evaluations/s: {fast_rate:,.0f} (median run {median_rate:,.0f})"
        f"   goal >= {GOAL_RATE:,.0f}"
    )
    print(
        f"naive scalar astropy: {naive_s * 1e3:.2f} ms/detection on {args.naive_sample}, "
        f"{naive_rate:,.1f}/s, {args.detections * naive_s:.0f} s for all (scaled)"
    )
    print(f"  ratio cached/naive: {fast_rate / naive_rate:,.0f}x   goal >= {GOAL_RATIO:,.0f}x")
    print(f"direct vectorised astropy reference on {checked.size} points: {reference_s:.1f} s")
    print(
        f"  max drift deviation at 1.42 GHz: {drift_dev:.2e} Hz/s   goal <= {GOAL_DRIFT_HZ_S:.0e}"
    )
    print(
        f"  max frequency deviation at 1.42 GHz: {frequency_dev:.2e} Hz   "
        f"goal <= {GOAL_FREQUENCY_HZ:.0e}"
    )
    met = (
        fast_rate >= GOAL_RATE
        and fast_rate / naive_rate >= GOAL_RATIO
        and drift_dev <= GOAL_DRIFT_HZ_S
        and frequency_dev <= GOAL_FREQUENCY_HZ
    )
    print("all goals met" if met else "GOALS NOT MET")


if __name__ == "__main__":
    main()
