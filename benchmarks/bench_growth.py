"""Growth: ``GET /api/v1/candidates/{id}`` and the candidate list as stored hits grow.

Run: ``python benchmarks/bench_growth.py [--sizes 10000,100000,1000000] [--requests 300]
[--postgres-url postgresql+psycopg://user@host/db] [--only sqlite|postgresql]``

A fresh database gets the demo's sites and targets and two real cadences posted through the app
(screened; their sky-fixed signals become candidates). Background hits are then added in bulk
(scans of 5,000 hits, raw executemany in one transaction per step, outside the timed part) until
the table holds each size in turn. At each size the app (in-process, Flask test client: no
network, no gunicorn) answers ``--requests`` requests of each route; p50/p99 are printed with
the ratio of p99 to the smallest size measured in the same run. Every SQL statement the two
routes run is captured and shown with its query plan (SQLite ``EXPLAIN QUERY PLAN``,
PostgreSQL ``EXPLAIN``), so that a scan of the hit table would show.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import sys
import tempfile
import time
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np
from sqlalchemy import event, insert, text

from benchmarks.bench_mixed_load import fresh_postgres
from confirm_service.actor import SYSTEM
from confirm_service.app import create_app
from confirm_service.audit.checkpoints import set_up_signing_key
from confirm_service.db import upgrade_database
from confirm_service.demo import SITES, TARGETS, first_window
from confirm_service.models import Detection, Observation
from confirm_service.services.tokens import create_token
from confirm_service.synthetic import batches, make_cadence

HITS_PER_BACKGROUND_SCAN = 5_000
FIRST_BACKGROUND_ID = 100_000_000
BACKGROUND_START = datetime(2026, 10, 1, tzinfo=UTC)


class Service:
    def __init__(self, url: str) -> None:
        upgrade_database(url)
        folder = Path(tempfile.mkdtemp(prefix="bench-growth-"))
        self.app = create_app({"database_url": url, "instance_path": folder, "request_log": "off"})
        self.db = self.app.extensions["confirm.db"]
        with self.db.read() as session:  # set-up, as `confirm-service db upgrade` does
            set_up_signing_key(session, self.app.extensions["confirm.settings"])
        with self.db.write() as session:
            _, pipeline = create_token(session, SYSTEM, "bench-pipeline", "pipeline")
            _, viewer = create_token(session, SYSTEM, "bench-viewer", "viewer")
            _, coordinator = create_token(session, SYSTEM, "bench-coordinator", "coordinator")
        self.client = self.app.test_client()
        self.pipeline = {"Authorization": f"Bearer {pipeline}", "Content-Type": "application/json"}
        self.viewer = {"Authorization": f"Bearer {viewer}"}
        admin = {"Authorization": f"Bearer {coordinator}"}
        for site in SITES:
            self.client.post("/api/v1/sites", json=site, headers=admin)
        for target in TARGETS:
            self.client.post("/api/v1/targets", json=target, headers=admin)
        self.stored = 0
        self.next_observation = 1_000_000

    def post(self, path: str, body: bytes) -> dict[str, Any]:
        answer = self.client.post(path, data=body, headers=self.pipeline)
        if answer.status_code >= 400:
            raise RuntimeError(f"{path}: {answer.status_code} {answer.get_json()}")
        return answer.get_json()

    def post_cadences(self, count: int) -> None:
        site, target = SITES[0], TARGETS[0]
        start = first_window(site, target, datetime(2026, 11, 20, tzinfo=UTC), 6 * 260)
        for k in range(count):
            cadence = make_cadence(site, target, start, 200, seed=k + 1, label=f"growth-{k}")
            for scan, hits in zip(cadence.scans, cadence.hits, strict=True):
                scan_id = self.post("/api/v1/observations", json.dumps(scan).encode())["id"]
                parts = batches(hits, 2)
                for n, part in enumerate(parts):
                    body = {"detections": part, "complete": n == len(parts) - 1}
                    self.post(
                        f"/api/v1/observations/{scan_id}/detections", json.dumps(body).encode()
                    )
        with self.db.read() as session:
            self.stored = session.execute(text("SELECT count(*) FROM detections")).scalar_one()

    def grow_to(self, size: int, rng: np.random.Generator) -> float:
        """Add background scans until ``size`` hits are stored; seconds taken."""
        began = time.perf_counter()
        with self.db.engine.begin() as connection:
            while self.stored < size:
                count = min(HITS_PER_BACKGROUND_SCAN, size - self.stored)
                scan = self.next_observation
                self.next_observation += 1
                connection.execute(
                    insert(Observation.__table__),
                    [
                        {
                            "id": scan,
                            "site_id": 1 + scan % 2,
                            "pointing_ra_deg": 10.0,
                            "pointing_dec_deg": 20.0,
                            "start": BACKGROUND_START,
                            "duration_s": 240.0,
                            "frequency_min_hz": 1.3e9,
                            "frequency_max_hz": 1.8e9,
                            "channel_width_hz": 3.81,
                            "time_resolution_s": 12.5,
                            "on_source": True,
                            "cadence": f"background-{scan}",
                            "detection_count": count,
                            "created_at": BACKGROUND_START,
                        }
                    ],
                )
                first = FIRST_BACKGROUND_ID + self.stored
                frequency = rng.uniform(1.3e9, 1.8e9, count)
                drift = rng.uniform(-3.0, 3.0, count)
                snr = rng.uniform(12.0, 60.0, count)
                connection.execute(
                    insert(Detection.__table__),
                    [
                        {
                            "id": first + i,
                            "observation_id": scan,
                            "frequency_hz": float(frequency[i]),
                            "drift_hz_s": float(drift[i]),
                            "snr": float(snr[i]),
                            "time_offset_s": 0.0,
                            "bandwidth_hz": None,
                            "beam": None,
                            "flagged_candidate": False,
                            "screen_reason": "persistent",
                            "screening_run_id": None,
                        }
                        for i in range(count)
                    ],
                )
                self.stored += count
        if self.db.is_sqlite:
            with self.db.engine.begin() as connection:
                connection.execute(text("ANALYZE"))
        else:
            with self.db.engine.connect().execution_options(
                isolation_level="AUTOCOMMIT"
            ) as connection:
                connection.execute(text("ANALYZE"))
        return time.perf_counter() - began

    def candidate_ids(self) -> list[int]:
        listing = self.client.get("/api/v1/candidates?limit=1000", headers=self.viewer).get_json()
        return [c["id"] for c in listing["items"]]

    def timed(self, paths: list[str], repeat: int) -> list[float]:
        for path in paths[:5]:  # warm
            self.client.get(path, headers=self.viewer)
        times = []
        for n in range(repeat):
            path = paths[n % len(paths)]
            began = time.perf_counter()
            answer = self.client.get(path, headers=self.viewer)
            times.append(time.perf_counter() - began)
            assert answer.status_code == 200, answer.get_json()
        return times

    def statements(self, path: str) -> list[tuple[str, Any]]:
        captured: list[tuple[str, Any]] = []

        def keep(conn, cursor, statement, parameters, context, executemany):  # noqa: ARG001
            captured.append((statement, parameters))

        event.listen(self.db.engine, "before_cursor_execute", keep)
        try:
            self.client.get(path, headers=self.viewer)
        finally:
            event.remove(self.db.engine, "before_cursor_execute", keep)
        return captured

    def plans(self, path: str) -> list[str]:
        """The plan of every statement of ``path`` that reads the hit table."""
        lines = []
        with self.db.engine.connect() as connection:
            raw = connection.connection.driver_connection
            for statement, parameters in self.statements(path):
                if "detections" not in statement.lower():
                    continue
                if self.db.is_sqlite:
                    rows = raw.execute("EXPLAIN QUERY PLAN " + statement, parameters).fetchall()
                    plan = [row[-1] for row in rows]
                else:
                    with raw.cursor() as cursor:
                        cursor.execute("EXPLAIN " + statement, parameters)
                        plan = [row[0] for row in cursor.fetchall()]
                first = " ".join(statement.split())[:110]
                lines.append(f"    {first} ...")
                lines += [f"      {step}" for step in plan]
        return lines


def p(values: list[float], fraction: float) -> float:
    ordered = sorted(values)
    return 1000 * ordered[min(len(ordered) - 1, int(fraction * len(ordered)))]


def run(name: str, url: str, sizes: list[int], repeat: int) -> None:
    service = Service(url)
    service.post_cadences(2)
    ids = service.candidate_ids()
    print(f"[{name}] {len(ids)} candidates from 2 screened cadences; {repeat} requests per route")
    print(
        f"  {'hits stored':>12} {'load s':>7}  {'route':<28} "
        f"{'p50 ms':>7} {'p99 ms':>7} {'p99/first':>9}"
    )
    baseline: dict[str, float] = {}
    rng = np.random.default_rng(7)
    routes = {
        "GET /candidates/{id}": [f"/api/v1/candidates/{i}" for i in ids],
        "GET /candidates?limit=50": ["/api/v1/candidates?limit=50"],
    }
    for size in sizes:
        load_s = service.grow_to(size, rng)
        for route, paths in routes.items():
            times = service.timed(paths, repeat)
            p99 = p(times, 0.99)
            baseline.setdefault(route, p99)
            p50 = 1000 * statistics.median(times)
            print(
                f"  {size:>12,} {load_s:>7.1f}  {route:<28} "
                f"{p50:>7.2f} {p99:>7.2f} {p99 / baseline[route]:>9.2f}"
            )
    print("  load average (1, 5, 15 min): " + ", ".join(f"{x:.1f}" for x in os.getloadavg()))
    for route, paths in routes.items():
        print(f"  query plans of {route} at {sizes[-1]:,} hits (statements reading detections):")
        for line in service.plans(paths[0]):
            print(line)
    service.db.dispose()


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="10000,100000,1000000")
    parser.add_argument("--requests", type=int, default=300)
    parser.add_argument("--postgres-url", default=None)
    parser.add_argument("--only", choices=["sqlite", "postgresql"], default=None)
    args = parser.parse_args()
    sizes = [int(s) for s in args.sizes.split(",")]
    if args.only != "postgresql":
        folder = Path(tempfile.mkdtemp(prefix="bench-growth-db-"))
        run("SQLite (WAL)", f"sqlite:///{folder / 'growth.db'}", sizes, args.requests)
    if args.postgres_url and args.only != "sqlite":
        run("PostgreSQL", fresh_postgres(args.postgres_url, "growth"), sizes, args.requests)
    return 0


if __name__ == "__main__":
    sys.exit(main())
