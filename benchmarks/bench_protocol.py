"""Benchmark: evaluate many candidates through a confirmation protocol.

    python benchmarks/bench_protocol.py [--candidates 10000] [--targets 50] [--repeat 3]

Builds synthetic candidates (invented sites and targets; 20 detections over 11 scans and one
partner report each: a six-scan cadence, two re-observations, two scans at a distant site and a
simultaneous side beam, with decoys beside the true track) and prints candidates/s for
``evaluate_many`` (batched physics; results kept), streamed chunks (tests/protocol/batching.py,
as a service stores them) and ``evaluate`` one at a time, with a warm physics TrackCache, and the
one-off cost of building the cache. Goal: >= 1000 candidates/s warm.
Times depend on the machine and its load (printed). The generator places true detections with
the protocol's own predictor: this measures speed, not correctness (see tests/protocol).
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from collections import Counter
from dataclasses import replace
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from confirm_service.protocol import (  # noqa: E402
    CandidateFacts,
    DetectionFact,
    ObservationFact,
    PhysicsContext,
    ReportFact,
    SiteFact,
    TargetFact,
    evaluate,
    evaluate_many,
    load_protocol,
)
from confirm_service.protocol.reference import predict_references  # noqa: E402
from tests.protocol.batching import gc_paused, iter_evaluations  # noqa: E402

GOAL_PER_S = 1000.0
EPOCH = datetime(2025, 6, 2, tzinfo=UTC).timestamp()
SITES = (
    SiteFact("ALD", 52.10, -1.30, 120.0),
    SiteFact("BRN", -31.20, 147.50, 300.0),
    SiteFact("CSK", 38.90, -106.20, 2400.0),
    SiteFact("DUN", -24.60, 16.80, 1300.0),
)
SCAN_S, SLEW_S, CHANNEL_HZ = 300.0, 30.0, 3.0
DAY_S = 86_164.0


class Generator:
    """Deterministic synthetic candidates."""

    def __init__(self, protocol, targets: int, seed: int, context: PhysicsContext) -> None:
        self.protocol = protocol
        self.rng = np.random.default_rng(seed)
        self.context = context
        self.targets = [
            TargetFact(
                f"BENCH-{i:03d}",
                float(self.rng.uniform(0.0, 360.0)),
                float(np.degrees(np.arcsin(self.rng.uniform(-0.8, 0.8)))),
            )
            for i in range(targets)
        ]
        self.next_id = 1

    def ids(self) -> int:
        self.next_id += 1
        return self.next_id

    def frequency_hz(self) -> float:
        while True:
            f = float(self.rng.uniform(1.1e9, 9.9e9))
            if not self.protocol.band_set.overlapping(f - 1e6, f + 1e6):
                return f

    def scan(self, site, start, centre, target, *, on_source, cadence=None, beam=None):
        return ObservationFact(
            id=self.ids(),
            site=site,
            target_name=target.name if on_source else None,
            pointing_ra_deg=target.ra_deg if on_source else (target.ra_deg + 0.5) % 360.0,
            pointing_dec_deg=target.dec_deg,
            start_unix_s=start,
            duration_s=SCAN_S,
            frequency_min_hz=centre - 5e7,
            frequency_max_hz=centre + 5e7,
            channel_width_hz=CHANNEL_HZ,
            time_resolution_s=10.0,
            on_source=on_source,
            beam=beam,
            cadence=cadence,
        )

    def detection(self, scan, frequency_hz, drift_hz_s, offset_s=20.0):
        return DetectionFact(
            self.ids(), scan.id, frequency_hz, drift_hz_s, float(self.rng.uniform(12, 50)), offset_s
        )

    def skeleton(self, index: int) -> dict:
        """Scans and reference of one candidate; true frequencies are filled in later."""
        target = self.targets[index % len(self.targets)]
        site, far = self.rng.choice(len(SITES), size=2, replace=False)
        site, far = SITES[site], SITES[far]
        start = EPOCH + float(self.rng.uniform(0.0, 7.0)) * 86_400.0
        centre = self.frequency_hz()
        cadence = [
            self.scan(
                site,
                start + i * (SCAN_S + SLEW_S),
                centre,
                target,
                on_source=i % 2 == 0,
                cadence=f"c{index}",
            )
            for i in range(6)
        ]
        reobs = [self.scan(site, start + k * DAY_S, centre, target, on_source=True) for k in (1, 2)]
        distant = [
            self.scan(far, start + h * 3600.0, centre, target, on_source=True) for h in (5.0, 9.0)
        ]
        beam = self.scan(site, cadence[0].start_unix_s, centre, target, on_source=False, beam="B2")
        on_scans = [cadence[0], cadence[2], cadence[4], *reobs, *distant]
        points = [(s.site, s.start_unix_s + 20.0) for s in [*on_scans, cadence[1]]]
        points.append((far, start + 13 * 3600.0))  # the partner report
        return {
            "index": index,
            "target": target,
            "far": far,
            "start": start,
            "centre": centre,
            "kind": str(self.rng.choice(["sky", "zero", "off"], p=[0.8, 0.1, 0.1])),
            "residual": float(self.rng.uniform(-0.5, 0.5)),
            "cadence": cadence,
            "reobs": reobs,
            "distant": distant,
            "beam": beam,
            "on_scans": on_scans,
            "points": points,
            "reference": self.detection(cadence[0], centre, 0.0),
        }

    def tracks(self, skeletons: list[dict], drifts: list[float]) -> list[tuple]:
        """True frequency and drift at every point of every skeleton: one batched call."""
        pairs, numbers, pair_index, owner, times = [], {}, [], [], []
        references = []
        for i, (sk, drift) in enumerate(zip(skeletons, drifts, strict=True)):
            references.append(
                (replace(sk["reference"], drift_hz_s=drift), sk["cadence"][0], sk["target"])
            )
            for site, unix_s in sk["points"]:
                key = (site, sk["target"])
                if key not in numbers:
                    numbers[key] = len(pairs)
                    pairs.append(key)
                pair_index.append(numbers[key])
                owner.append(i)
                times.append(unix_s)
        _, prediction = predict_references(
            self.context,
            references,
            pairs,
            np.array(pair_index, dtype=np.int64),
            np.array(owner, dtype=np.int64),
            np.array(times),
            self.protocol,
        )
        size = len(skeletons[0]["points"])
        f = prediction.frequency_hz.reshape(len(skeletons), size)
        d = prediction.drift_hz_s.reshape(len(skeletons), size)
        return list(zip(f, d, strict=True))

    def candidates(self, count: int) -> list[CandidateFacts]:
        skeletons = [self.skeleton(i) for i in range(count)]
        earth = self.tracks(skeletons, [0.0] * count)  # drift 0 at the reference: Earth drift
        drifts = [float(d[0]) + sk["residual"] for sk, (_, d) in zip(skeletons, earth, strict=True)]
        return [
            self.facts(sk, f, d)
            for sk, (f, d) in zip(skeletons, self.tracks(skeletons, drifts), strict=True)
        ]

    def facts(self, sk: dict, true_f: np.ndarray, true_drift: np.ndarray) -> CandidateFacts:
        cadence, on_scans, beam = sk["cadence"], sk["on_scans"], sk["beam"]
        all_scans = [*cadence, *sk["reobs"], *sk["distant"], beam]
        detections: dict[int, list[DetectionFact]] = {s.id: [] for s in all_scans}
        for i, scan in enumerate(on_scans):
            f, d = float(true_f[i]), float(true_drift[i])
            if sk["kind"] == "zero":
                f, d = sk["centre"], 0.0
            detections[scan.id].append(self.detection(scan, f, d))
        if sk["kind"] == "off":
            detections[cadence[1].id].append(self.detection(cadence[1], float(true_f[7]), 0.1))
        # decoys: unrelated hits 40-90 kHz from the true track, never on it (2.5 MHz from a
        # zero-drift signal, whose predicted track wanders by the Earth's Doppler shift)
        base = np.full(8, sk["centre"] + 2.5e6) if sk["kind"] == "zero" else true_f
        for i, scan in enumerate([*on_scans, cadence[1], cadence[3], cadence[5]]):
            f = float(base[min(i, 7)]) + 4.0e4
            detections[scan.id].append(self.detection(scan, f, 0.3, 5.0))
        while sum(len(v) for v in detections.values()) < 20:
            f = float(base[0]) + float(self.rng.uniform(4e4, 9e4))
            detections[beam.id].append(self.detection(beam, f, -0.2))
        scans = [replace(s, detections=tuple(detections[s.id])) for s in all_scans]
        report = ReportFact(
            self.ids(),
            sk["far"],
            sk["start"] + 13 * 3600.0,
            True,
            float(true_f[8]),
            float(true_drift[8]),
            sk["centre"] - 1e6,
            sk["centre"] + 1e6,
            SCAN_S,
        )
        return CandidateFacts(
            candidate_id=sk["index"],
            target=sk["target"],
            reference=scans[0].detections[0],
            reference_observation=scans[0],
            observations=tuple(scans[1:]),
            reports=(report,),
            signoffs=(),
            now_unix_s=sk["start"] + 3 * 86_400.0,
            stage=self.protocol.model.stages[0].name,
            state="open",
            stage_entered_unix_s=sk["start"] + 3600.0,
        )


def best_of(repeat: int, run) -> tuple[float, float, object]:
    """Best wall time, best CPU time of this process (s), and the last result."""
    best_wall, best_cpu, result = float("inf"), float("inf"), None
    for _ in range(repeat):
        wall, cpu = time.perf_counter(), time.process_time()
        result = run()
        best_cpu = min(best_cpu, time.process_time() - cpu)
        best_wall = min(best_wall, time.perf_counter() - wall)
    return best_wall, best_cpu, result


def rates(count: int, wall_s: float, cpu_s: float) -> str:
    wall_rate, cpu_rate = count / wall_s, count / cpu_s
    return (
        f"{wall_s:.2f} s wall -> {wall_rate:,.0f} candidates/s ({wall_rate / GOAL_PER_S:.2f} x "
        f"goal); {cpu_s:.2f} s CPU -> {cpu_rate:,.0f} candidates/CPU-s "
        f"({cpu_rate / GOAL_PER_S:.2f} x goal)"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--candidates", type=int, default=10_000)
    parser.add_argument("--targets", type=int, default=50)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--single", type=int, default=1000, help="candidates for one-at-a-time")
    parser.add_argument("--protocol", default=str(ROOT / "protocols" / "default.toml"))
    args = parser.parse_args()

    protocol = load_protocol(args.protocol)
    generator_context = PhysicsContext()
    start = time.perf_counter()
    generator = Generator(protocol, args.targets, seed=2025, context=generator_context)
    facts = generator.candidates(args.candidates)
    generated_s = time.perf_counter() - start
    detections = sum(len(o.detections) for o in facts[0].all_observations())
    scans = len(facts[0].all_observations())
    print(
        f"protocol {protocol.name} {protocol.version}: {args.candidates} candidates x "
        f"{detections} detections ({scans} scans, 1 report each), {args.targets} targets, "
        f"{len(SITES)} sites; generated in {generated_s:.1f} s"
    )

    context = PhysicsContext()
    cold = best_of(1, lambda: evaluate_many(protocol, facts, physics_context=context))
    print(
        f"cold, fresh TrackCache ({len(context.cache)} day-segments built with astropy): "
        f"{rates(args.candidates, cold[0], cold[1])}"
    )
    warm_wall, warm_cpu, evaluations = best_of(
        args.repeat, lambda: evaluate_many(protocol, facts, physics_context=context)
    )
    print(
        f"evaluate_many, warm, best of {args.repeat}: {rates(args.candidates, warm_wall, warm_cpu)}"
    )

    def paused_run() -> list:
        with gc_paused():
            return evaluate_many(protocol, facts, physics_context=context)

    paused = best_of(args.repeat, paused_run)
    print(f"evaluate_many, collector paused, warm: {rates(args.candidates, paused[0], paused[1])}")

    def stream() -> Counter:
        return Counter(e.state for e in iter_evaluations(protocol, facts, physics_context=context))

    streamed = best_of(args.repeat, stream)
    print(
        f"iter_evaluations (results consumed as they come), warm: "
        f"{rates(args.candidates, streamed[0], streamed[1])}"
    )
    subset = facts[: args.single]
    single = best_of(
        args.repeat, lambda: [evaluate(protocol, f, physics_context=context) for f in subset]
    )
    print(
        f"evaluate one at a time, warm, {len(subset)} candidates: "
        f"{rates(len(subset), single[0], single[1])}"
    )

    outcomes = Counter(
        (e.state, e.stage if e.state == "open" else e.reason_class) for e in evaluations
    )
    print("outcomes:", ", ".join(f"{k[0]}/{k[1]}: {v}" for k, v in sorted(outcomes.items())))
    print(
        f"load average (1, 5, 15 min): {', '.join(f'{x:.2f}' for x in os.getloadavg())} on "
        f"{os.cpu_count()} CPUs"
    )


if __name__ == "__main__":
    main()
