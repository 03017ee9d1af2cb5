"""Bulk-ingest benchmark: the HTTP path against a raw SQLAlchemy Core insert of the same rows.

Run: ``python benchmarks/bench_ingest.py [--batches 4] [--batch-size 50000] [--database-url URL]``

The service path is the whole request through the Flask app in-process (JSON parsing, pydantic
validation, band/time checks, id allocation, insert, audit entry, idempotency record, candidate
intake, commit). As a pipeline does, each batch carries one scan's detections, and each scan is
registered first (not timed). The reference is ``connection.execute(insert(detections), rows)``
of the same rows into the same scans of a fresh database with the same schema and indexes.
Both run on SQLite. ``--same-scan`` sends every batch to one scan instead (a harder case for the
frequency index).
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np
from sqlalchemy import insert

from confirm_service.actor import SYSTEM
from confirm_service.app import create_app
from confirm_service.audit.checkpoints import set_up_signing_key
from confirm_service.db import Database, upgrade_database
from confirm_service.models import Detection
from confirm_service.services.tokens import create_token

START = datetime.now(UTC) - timedelta(hours=2)


def make_rows(count: int, seed: int) -> list[dict]:
    rng = np.random.default_rng(seed)
    frequency = rng.uniform(1.40e9, 1.45e9, count)
    drift = rng.uniform(-4.0, 4.0, count)
    snr = rng.uniform(5.0, 9.0, count)  # below the default intake threshold: pure ingest
    offset = rng.uniform(0.0, 290.0, count)
    return [
        {
            "frequency_hz": float(f),
            "drift_hz_s": float(d),
            "snr": float(s),
            "time_offset_s": float(o),
        }
        for f, d, s, o in zip(frequency, drift, snr, offset, strict=True)
    ]


SCAN = {
    "site": "BNC",
    "target": "Bench-1",
    "duration_s": 300.0,
    "frequency_min_hz": 1.40e9,
    "frequency_max_hz": 1.45e9,
    "channel_width_hz": 3.81,
    "time_resolution_s": 12.5,
    "on_source": True,
}


def scan_start(index: int) -> datetime:
    return START + timedelta(minutes=6 * index)


def prepare(url: str, scans: int) -> tuple[Any, dict[str, str], list[int]]:
    """A fresh service with a site, a target and ``scans`` registered scans (not timed)."""
    upgrade_database(url)
    app = create_app(
        {"database_url": url, "instance_path": Path(tempfile.mkdtemp()), "request_log": "off"}
    )
    db: Database = app.extensions["confirm.db"]
    with db.read() as session:  # set-up, as `confirm-service db upgrade` does
        set_up_signing_key(session, app.extensions["confirm.settings"])
    with db.write() as session:
        _, secret = create_token(session, SYSTEM, "bench-pipeline", "pipeline")
        _, admin = create_token(session, SYSTEM, "bench-admin", "admin")
    client = app.test_client()
    headers = {"Authorization": f"Bearer {secret}"}
    admin_headers = {"Authorization": f"Bearer {admin}"}
    site = {
        "code": "BNC",
        "name": "Bench Site",
        "latitude_deg": 10.0,
        "longitude_deg": 20.0,
        "elevation_m": 100.0,
    }
    client.post("/api/v1/sites", json=site, headers=admin_headers)
    client.post(
        "/api/v1/targets",
        json={"name": "Bench-1", "ra_deg": 12.0, "dec_deg": 30.0},
        headers=admin_headers,
    )
    ids = []
    for index in range(scans):
        body = {**SCAN, "start": scan_start(index).isoformat()}
        ids.append(client.post("/api/v1/observations", json=body, headers=headers).get_json()["id"])
    return client, headers, ids


def bench_service(url: str, batches: list[bytes], same_scan: bool) -> float:
    client, headers, scan_ids = prepare(url, 1 if same_scan else len(batches))
    total = 0.0
    for index, body in enumerate(batches):
        observation_id = scan_ids[0 if same_scan else index]
        request_headers = {**headers, "Idempotency-Key": f"bench-{index}"}
        began = time.perf_counter()
        response = client.post(
            f"/api/v1/observations/{observation_id}/detections",
            data=body,
            content_type="application/json",
            headers=request_headers,
        )
        total += time.perf_counter() - began
        if response.status_code != 201:
            sys.exit(
                f"ingest failed: {response.status_code} {response.get_data(as_text=True)[:300]}"
            )
    return total


def bench_core(url: str, batches: list[list[dict]], same_scan: bool) -> float:
    from confirm_service.models import Observation, Site

    upgrade_database(url)
    db = Database(url)
    with db.write() as session:
        site = Site(
            code="BNC", name="Bench", latitude_deg=10.0, longitude_deg=20.0, elevation_m=100.0
        )
        session.add(site)
        session.flush()
        scans = [
            Observation(
                site_id=site.id,
                pointing_ra_deg=12.0,
                pointing_dec_deg=30.0,
                start=scan_start(i),
                duration_s=300.0,
                frequency_min_hz=1.40e9,
                frequency_max_hz=1.45e9,
                channel_width_hz=3.81,
                time_resolution_s=12.5,
                on_source=True,
            )
            for i in range(1 if same_scan else len(batches))
        ]
        session.add_all(scans)
        session.flush()
        scan_ids = [o.id for o in scans]
    total = 0.0
    for index, rows in enumerate(batches):
        observation_id = scan_ids[0 if same_scan else index]
        values = [
            {
                **row,
                "observation_id": observation_id,
                "bandwidth_hz": None,
                "beam": None,
                "flagged_candidate": False,
            }
            for row in rows
        ]
        began = time.perf_counter()
        with db.engine.begin() as connection:
            connection.execute(insert(Detection.__table__), values)
        total += time.perf_counter() - began
    db.dispose()
    return total


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--batches", type=int, default=4)
    parser.add_argument("--batch-size", type=int, default=50_000)
    parser.add_argument(
        "--same-scan",
        action="store_true",
        help="send every batch to one scan instead of one batch per scan",
    )
    args = parser.parse_args()
    row_batches = [make_rows(args.batch_size, seed) for seed in range(args.batches)]
    bodies = [json.dumps({"detections": rows}).encode() for rows in row_batches]
    count = args.batches * args.batch_size
    with tempfile.TemporaryDirectory() as folder:
        service_s = bench_service(f"sqlite:///{folder}/service.db", bodies, args.same_scan)
        core_s = bench_core(f"sqlite:///{folder}/core.db", row_batches, args.same_scan)
    service_rate = count / service_s
    core_rate = count / core_s
    print(
        f"detections                 : {count:,} in {args.batches} batches of {args.batch_size:,}"
        f" ({'all into one scan' if args.same_scan else 'one batch per scan'})"
    )
    print(f"service path (HTTP, SQLite): {service_s:8.3f} s  {service_rate:12,.0f} detections/s")
    print(f"raw SQLAlchemy Core insert : {core_s:8.3f} s  {core_rate:12,.0f} detections/s")
    print(f"ratio service / Core       : {service_rate / core_rate:8.2f}  (goal >= 0.5)")
    print(f"goal 100,000 detections/s  : {'met' if service_rate >= 100_000 else 'NOT met'}")


if __name__ == "__main__":
    main()
