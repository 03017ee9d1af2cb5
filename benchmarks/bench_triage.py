"""Triage benchmark: a whole cadence posted the way a pipeline posts it, screened, candidates made.

Run: ``python benchmarks/bench_triage.py [--hits-per-scan 5000] [--repeat 3]
[--postgres-url postgresql+psycopg://user@host/db]``

A cadence of 6 scans (on, off, on, off, on, off) with ``--hits-per-scan`` hits above the intake
threshold each: 80 % persistent interferers (same topocentric frequency and drift in every scan),
20 % one-off hits, and 2 sky-fixed signals in the on-source scans (``confirm_service.synthetic``).
Each scan is registered, its hits sent in two batches, the last one marking it complete, through
the Flask app in-process (JSON parsing, validation, insert, audit, screening, candidates, commit).
Request bodies are serialised before timing: the pipeline's own JSON encoding is not ours.

Printed in the same run:
- end to end: hits per second from the first registration to the last completion;
- pure ingest: the same requests without completion (nothing screened), hits per second;
- raw sqlite3: ``executemany`` of the same rows into the same table and index, one transaction,
  measured in each repeat beside the other two so that the ratios compare like with like;
- candidates created (and whether they are exactly the injected signals), hits per reason.
A warm-up cadence first loads the IERS tables and the physics caches, as a running server has.
"""

from __future__ import annotations

import argparse
import json
import sqlite3
import statistics
import sys
import tempfile
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

from sqlalchemy import func, select
from sqlalchemy.engine import make_url

from confirm_service.actor import SYSTEM
from confirm_service.app import create_app
from confirm_service.audit.checkpoints import set_up_signing_key
from confirm_service.db import Database, upgrade_database
from confirm_service.demo import SITES, TARGETS, first_window
from confirm_service.models import Candidate, Detection
from confirm_service.services.tokens import create_token
from confirm_service.synthetic import Cadence, batches, make_cadence

BATCHES_PER_SCAN = 2


class Service:
    """A fresh service on ``url`` with the demo's sites and targets and a pipeline token."""

    def __init__(self, url: str) -> None:
        upgrade_database(url)
        self.app = create_app(
            {
                "database_url": url,
                "instance_path": Path(tempfile.mkdtemp()),
                "request_log": "off",  # a log line per request is the operator's choice
            }
        )
        self.db: Database = self.app.extensions["confirm.db"]
        with self.db.read() as session:  # set-up, as `confirm-service db upgrade` does
            set_up_signing_key(session, self.app.extensions["confirm.settings"])
        with self.db.write() as session:
            _, pipeline = create_token(session, SYSTEM, "bench-pipeline", "pipeline")
            _, coordinator = create_token(session, SYSTEM, "bench-coordinator", "coordinator")
        self.client = self.app.test_client()
        self.pipeline = {"Authorization": f"Bearer {pipeline}", "Content-Type": "application/json"}
        admin = {"Authorization": f"Bearer {coordinator}"}
        for site in SITES:
            self.client.post("/api/v1/sites", json=site, headers=admin)
        for target in TARGETS:
            self.client.post("/api/v1/targets", json=target, headers=admin)

    def post(self, path: str, body: bytes) -> dict[str, Any]:
        response = self.client.post(path, data=body, headers=self.pipeline)
        if response.status_code >= 400:
            raise RuntimeError(f"{path}: {response.status_code} {response.get_json()}")
        return response.get_json()

    def close(self) -> None:
        self.db.dispose()


def encoded(cadence: Cadence, complete: bool) -> list[tuple[bytes, list[bytes]]]:
    """Per scan: the registration body and its batches, serialised as a pipeline would."""
    scans = []
    for scan, hits in zip(cadence.scans, cadence.hits, strict=True):
        parts = batches(hits, BATCHES_PER_SCAN)
        bodies = [
            json.dumps(
                {"detections": part, **({"complete": True} if complete and last else {})}
            ).encode()
            for last, part in ((n == len(parts) - 1, p) for n, p in enumerate(parts))
        ]
        scans.append((json.dumps(scan).encode(), bodies))
    return scans


def post_cadence(service: Service, requests: list[tuple[bytes, list[bytes]]]) -> float:
    """Register every scan and send its batches; seconds taken."""
    began = time.perf_counter()
    for registration, bodies in requests:
        scan_id = service.post("/api/v1/observations", registration)["id"]
        for body in bodies:
            service.post(f"/api/v1/observations/{scan_id}/detections", body)
    return time.perf_counter() - began


def raw_sqlite_rate(url: str, cadence: Cadence) -> float:
    """Rows/s of a raw sqlite3 executemany of the same rows into the same table and index."""
    upgrade_database(url)
    path = make_url(url).database
    assert path
    connection = sqlite3.connect(path)
    connection.execute(
        "INSERT INTO sites (id, code, name, latitude_deg, longitude_deg, elevation_m, "
        "min_elevation_deg, sun_avoidance_deg, receiver_bands, created_at, updated_at) "
        "VALUES (1, 'RAW', 'raw', 0, 0, 0, 10, 5, '[]', '2026-01-01', '2026-01-01')"
    )
    for k in range(len(cadence.scans)):
        connection.execute(
            "INSERT INTO observations (id, site_id, pointing_ra_deg, pointing_dec_deg, start, "
            "duration_s, frequency_min_hz, frequency_max_hz, channel_width_hz, time_resolution_s, "
            "on_source, detection_count, created_at) VALUES (?, 1, 0, 0, '2026-01-01', 240, "
            "1.3e9, 1.8e9, 3.81, 12.5, 1, 0, '2026-01-01')",
            (k + 1,),
        )
    connection.commit()
    rows = [
        (n, k + 1, h["frequency_hz"], h["drift_hz_s"], h["snr"], h["time_offset_s"], None, None, 0)
        for k, hits in enumerate(cadence.hits)
        for n, h in enumerate(hits, start=1 + k * 1_000_000)
    ]
    rows.sort(key=lambda r: r[2])
    began = time.perf_counter()
    connection.executemany(
        "INSERT INTO detections (id, observation_id, frequency_hz, drift_hz_s, snr, "
        "time_offset_s, bandwidth_hz, beam, flagged_candidate) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
        rows,
    )
    connection.commit()
    elapsed = time.perf_counter() - began
    connection.close()
    return len(rows) / elapsed


def outcome(service: Service) -> tuple[list[float], dict[str, int]]:
    with service.db.read() as session:
        frequencies = list(session.execute(select(Candidate.barycentric_frequency_hz)).scalars())
        reasons = dict(
            session.execute(
                select(Detection.screen_reason, func.count()).group_by(Detection.screen_reason)
            ).all()
        )
    return frequencies, {str(k): int(v) for k, v in sorted(reasons.items(), key=str)}


def run_backend(
    name: str,
    make_url_for: Any,
    cadence: Cadence,
    warm: Cadence,
    repeat: int,
    raw_rate: Any = None,
) -> None:
    """Measure end to end, pure ingest and (when ``raw_rate`` is given) the raw baseline, one
    after the other in each repeat, so that a change in the machine's load touches all three;
    print medians and the per-repeat ratios."""
    hits = cadence.hit_count
    full, pure = encoded(cadence, complete=True), encoded(cadence, complete=False)
    end_to_end, ingest, raw = [], [], []
    frequencies: list[float] = []
    reasons: dict[str, int] = {}
    for n in range(repeat):
        if raw_rate is not None:
            raw.append(raw_rate(n))
        service = Service(make_url_for(f"e2e{n}"))
        post_cadence(service, encoded(warm, complete=True))  # warm caches, as a server is
        end_to_end.append(hits / post_cadence(service, full))
        frequencies, reasons = outcome(service)
        service.close()
        service = Service(make_url_for(f"pure{n}"))
        post_cadence(service, encoded(warm, complete=False))
        ingest.append(hits / post_cadence(service, pure))
        service.close()
    e2e, pure_rate = statistics.median(end_to_end), statistics.median(ingest)
    made = len(frequencies)  # the warm-up cadence carries no sky-fixed signal
    print(f"[{name}] {len(cadence.scans)} scans x {hits // len(cadence.scans)} hits = {hits} hits")
    print(f"  end to end:  {e2e:,.0f} hits/s (median of {repeat}; runs {_list(end_to_end)})")
    print(f"  pure ingest: {pure_rate:,.0f} hits/s (median of {repeat}; runs {_list(ingest)})")
    print(f"  end to end / pure ingest = {_ratios(end_to_end, ingest)}")
    if raw:
        print(
            f"  raw sqlite3 executemany, same rows, table and index: "
            f"{statistics.median(raw):,.0f} rows/s (runs {_list(raw)})"
        )
        print(f"  pure ingest / raw sqlite3 = {_ratios(ingest, raw)}")
        print(f"  end to end / raw sqlite3 = {_ratios(end_to_end, raw)}")
    exact = sorted(frequencies)[-len(cadence.sky_frequencies_hz) :]
    print(
        f"  candidates from the timed cadence: {made} "
        f"(injected sky-fixed signals: {len(cadence.sky_frequencies_hz)}; barycentric "
        f"{', '.join(f'{f / 1e6:.4f} MHz' for f in exact)})"
    )
    print("  hits per reason (warm-up and timed cadence):")
    for reason, count in reasons.items():
        print(f"    {reason:<20} {count:>7,}")


def _ratios(numerators: list[float], denominators: list[float]) -> str:
    """The median of the per-repeat ratios, and each of them."""
    ratios = [a / b for a, b in zip(numerators, denominators, strict=True)]
    return f"{statistics.median(ratios):.2f} (median; runs {', '.join(f'{r:.2f}' for r in ratios)})"


def _list(values: list[float]) -> str:
    return ", ".join(f"{v:,.0f}" for v in values)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--hits-per-scan", type=int, default=5000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--postgres-url", default=None)
    args = parser.parse_args()
    site, target = SITES[0], TARGETS[0]
    start = first_window(site, target, datetime(2026, 11, 20, tzinfo=UTC), 6 * 260)
    # the warm-up cadence: earlier the same night, so the day's physics tables are built
    warm = make_cadence(site, target, start - timedelta(hours=3), 200, seed=2, sky_signals=0)
    cadence = make_cadence(site, target, start, args.hits_per_scan, seed=1)
    folder = Path(tempfile.mkdtemp(prefix="bench-triage-"))
    run_backend(
        "SQLite",
        lambda name: f"sqlite:///{folder / name}.db",
        cadence,
        warm,
        args.repeat,
        raw_rate=lambda n: raw_sqlite_rate(f"sqlite:///{folder / f'raw{n}'}.db", cadence),
    )
    print(
        "  goals: end to end >= 25,000 hits/s and >= 0.5 x pure ingest; "
        "pure ingest >= 100,000 hits/s and >= 0.33 x raw sqlite3"
    )
    if args.postgres_url:
        base = make_url(args.postgres_url)
        run_backend(
            "PostgreSQL", lambda name: _fresh_postgres(base, name), cadence, warm, args.repeat
        )
    return 0


def _fresh_postgres(base: Any, name: str) -> str:
    from sqlalchemy import create_engine, text

    database = f"{base.database}_bench_{name}"
    admin = create_engine(base, isolation_level="AUTOCOMMIT")
    with admin.connect() as connection:
        connection.execute(text(f'DROP DATABASE IF EXISTS "{database}" WITH (FORCE)'))
        connection.execute(text(f'CREATE DATABASE "{database}"'))
    admin.dispose()
    return base.set(database=database).render_as_string(hide_password=False)


if __name__ == "__main__":
    sys.exit(main())
