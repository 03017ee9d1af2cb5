"""Mixed load against real gunicorn on loopback: pipelines posting cadences while readers list
and open candidates, for a bounded time, on SQLite (WAL) or PostgreSQL.

Run: ``python benchmarks/bench_mixed_load.py [--seconds 60] [--pipelines 8] [--readers 32]
[--hits-per-scan 500] [--workers 4] [--postgres-url postgresql+psycopg://user@host/db]``

Each pipeline posts whole cadences as ``bench_triage.py`` does (6 scans, each registered, its
hits in two batches, the last marking the scan complete, so every cadence is screened and its
sky-fixed signals become candidates). Each reader lists the newest candidates and opens one of
them, in a loop. Clients are threads of this process, one new connection per request (gunicorn's
sync workers close after each answer). Printed: requests and hits per second, p50/p99 latency
per route, every error by status, and how often "database is locked" appears in an answer or in
gunicorn's log (goal: no error at all).
"""

from __future__ import annotations

import argparse
import http.client
import json
import os
import random
import signal
import socket
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from collections import defaultdict
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

from confirm_service.actor import SYSTEM
from confirm_service.app import create_app
from confirm_service.audit.checkpoints import set_up_signing_key
from confirm_service.db import upgrade_database
from confirm_service.demo import SITES, TARGETS, first_window
from confirm_service.services.tokens import create_token
from confirm_service.synthetic import batches, make_cadence

ROOT = Path(__file__).resolve().parents[1]
BATCHES_PER_SCAN = 2
LOCKED = "database is locked"


def fresh_postgres(base_url: str, name: str) -> str:
    base = make_url(base_url)
    database = f"{base.database}_bench_{name}"
    admin = create_engine(base, isolation_level="AUTOCOMMIT")
    with admin.connect() as connection:
        connection.execute(text(f'DROP DATABASE IF EXISTS "{database}" WITH (FORCE)'))
        connection.execute(text(f'CREATE DATABASE "{database}"'))
    admin.dispose()
    return base.set(database=database).render_as_string(hide_password=False)


def prepare(url: str, instance: Path) -> tuple[str, str]:
    """Migrate, register the demo sites and targets; (pipeline secret, viewer secret)."""
    upgrade_database(url)
    app = create_app({"database_url": url, "instance_path": instance, "request_log": "off"})
    database = app.extensions["confirm.db"]
    with database.read() as session:  # set-up, as `confirm-service db upgrade` does
        set_up_signing_key(session, app.extensions["confirm.settings"])
    with database.write() as session:
        _, pipeline = create_token(session, SYSTEM, "bench-pipeline", "pipeline")
        _, viewer = create_token(session, SYSTEM, "bench-viewer", "viewer")
        _, coordinator = create_token(session, SYSTEM, "bench-coordinator", "coordinator")
    client = app.test_client()
    headers = {"Authorization": f"Bearer {coordinator}"}
    for site in SITES:
        assert client.post("/api/v1/sites", json=site, headers=headers).status_code == 201
    for target in TARGETS:
        assert client.post("/api/v1/targets", json=target, headers=headers).status_code == 201
    database.dispose()
    return pipeline, viewer


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def start_gunicorn(url: str, instance: Path, workers: int, log: Path) -> tuple[Any, int]:
    port = free_port()
    env = {
        **os.environ,
        "CONFIRM_DATABASE_URL": url,
        "CONFIRM_INSTANCE_PATH": str(instance),
        "CONFIRM_BIND": f"127.0.0.1:{port}",
        "CONFIRM_WORKERS": str(workers),
        "CONFIRM_REQUEST_LOG": "off",
    }
    env.pop("PROMETHEUS_MULTIPROC_DIR", None)
    server = subprocess.Popen(
        [
            str(Path(sys.executable).with_name("gunicorn")),
            "-c",
            str(ROOT / "deploy/gunicorn.conf.py"),
        ],
        env=env,
        stdout=log.open("wb"),
        stderr=subprocess.STDOUT,
        start_new_session=True,
    )
    for _ in range(300):
        try:
            status, _ = request(port, "GET", "/healthz", None, {})
            if status == 200:
                return server, port
        except OSError:
            time.sleep(0.1)
    raise RuntimeError("gunicorn did not start")


def request(
    port: int, method: str, path: str, body: bytes | None, headers: dict[str, str]
) -> tuple[int, bytes]:
    connection = http.client.HTTPConnection("127.0.0.1", port, timeout=120)
    try:
        connection.request(method, path, body=body, headers=headers)
        answer = connection.getresponse()
        return answer.status, answer.read()
    finally:
        connection.close()


class Recorder:
    """Latencies per route, errors by (route, status), thread-safe."""

    def __init__(self) -> None:
        self.lock = threading.Lock()
        self.latency_s: dict[str, list[float]] = defaultdict(list)
        self.errors: dict[tuple[str, str], int] = defaultdict(int)
        self.locked = 0
        self.hits = 0
        self.cadences = 0

    def call(
        self, port: int, route: str, method: str, path: str, body: bytes | None, headers: dict
    ) -> tuple[int, bytes]:
        began = time.perf_counter()
        try:
            status, data = request(port, method, path, body, headers)
        except OSError as exc:
            with self.lock:
                self.errors[(route, type(exc).__name__)] += 1
            return 0, b""
        elapsed = time.perf_counter() - began
        with self.lock:
            self.latency_s[route].append(elapsed)
            if status >= 400:
                self.errors[(route, str(status))] += 1
                self.locked += LOCKED in data.decode("utf-8", "replace")
        return status, data


def visible_target(site: dict, night: datetime, first: int) -> tuple[dict, datetime]:
    """The first target from ``first`` on (in turn) with a window at ``site`` that night."""
    for k in range(len(TARGETS)):
        target = TARGETS[(first + k) % len(TARGETS)]
        try:
            return target, first_window(site, target, night, 6 * 260)
        except RuntimeError:
            continue
    raise RuntimeError(f"no target visible from {site['code']}")


def encoded_cadences(pipeline: int, count: int, hits_per_scan: int) -> list[list[tuple]]:
    """``count`` cadences of pipeline ``pipeline``: per scan its body and its batch bodies."""
    site = SITES[pipeline % len(SITES)]
    night = datetime(2026, 11, 20, tzinfo=UTC) - timedelta(days=pipeline)
    target, start = visible_target(site, night, pipeline)
    made = []
    for k in range(count):
        cadence = make_cadence(
            site,
            target,
            start + timedelta(minutes=30 * k),
            hits_per_scan,
            seed=1000 * pipeline + k,
            label=f"bench-p{pipeline}-c{k}",
        )
        scans = []
        for scan, hits in zip(cadence.scans, cadence.hits, strict=True):
            parts = batches(hits, BATCHES_PER_SCAN)
            bodies = [
                json.dumps({"detections": p, **({"complete": True} if n == len(parts) - 1 else {})})
                for n, p in enumerate(parts)
            ]
            scans.append((json.dumps(scan).encode(), [b.encode() for b in bodies], len(hits)))
        made.append(scans)
    return made


def pipeline_loop(port, secret, cadences, recorder: Recorder, stop: threading.Event) -> None:
    headers = {"Authorization": f"Bearer {secret}", "Content-Type": "application/json"}
    for scans in cadences:
        for registration, bodies, _ in scans:
            if stop.is_set():
                return
            status, data = recorder.call(
                port, "POST /observations", "POST", "/api/v1/observations", registration, headers
            )
            if status != 201:
                return
            scan_id = json.loads(data)["id"]
            for n, body in enumerate(bodies):
                route = "POST /observations/{id}/detections" + (
                    " (last: screens)" if n == len(bodies) - 1 else ""
                )
                path = f"/api/v1/observations/{scan_id}/detections"
                status, _ = recorder.call(port, route, "POST", path, body, headers)
                if status != 201:
                    return
        with recorder.lock:
            recorder.cadences += 1
            recorder.hits += sum(h for _, _, h in scans)


def reader_loop(port, secret, recorder: Recorder, stop: threading.Event, seed: int) -> None:
    headers = {"Authorization": f"Bearer {secret}"}
    rng = random.Random(seed)
    while not stop.is_set():
        status, data = recorder.call(
            port, "GET /candidates?limit=50", "GET", "/api/v1/candidates?limit=50", None, headers
        )
        items = json.loads(data)["items"] if status == 200 else []
        if items:
            chosen = rng.choice(items)["id"]
            recorder.call(
                port, "GET /candidates/{id}", "GET", f"/api/v1/candidates/{chosen}", None, headers
            )
        else:
            time.sleep(0.05)


def percentile(values: list[float], fraction: float) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, int(fraction * len(ordered)))]


def run(name: str, url: str, args: argparse.Namespace) -> None:
    folder = Path(tempfile.mkdtemp(prefix="bench-mixed-"))
    pipeline_secret, viewer_secret = prepare(url, folder / "instance")
    print(f"[{name}] preparing {args.pipelines} x {args.cadences} cadences ...", flush=True)
    work = [encoded_cadences(p, args.cadences, args.hits_per_scan) for p in range(args.pipelines)]
    server, port = start_gunicorn(url, folder / "instance", args.workers, folder / "gunicorn.log")
    recorder, stop = Recorder(), threading.Event()
    threads = [
        threading.Thread(target=pipeline_loop, args=(port, pipeline_secret, w, recorder, stop))
        for w in work
    ] + [
        threading.Thread(target=reader_loop, args=(port, viewer_secret, recorder, stop, n))
        for n in range(args.readers)
    ]
    began = time.perf_counter()
    try:
        for thread in threads:
            thread.start()
        time.sleep(args.seconds)
        stop.set()
        for thread in threads:
            thread.join(timeout=180)
        elapsed = time.perf_counter() - began
    finally:
        os.killpg(server.pid, signal.SIGTERM)
        server.wait(timeout=60)
    log_text = (folder / "gunicorn.log").read_text(errors="replace")
    total = sum(len(v) for v in recorder.latency_s.values())
    print(
        f"[{name}] load average of the machine at the end (1, 5, 15 min): "
        + ", ".join(f"{x:.1f}" for x in os.getloadavg())
        + f" on {os.cpu_count()} cores"
    )
    print(
        f"[{name}] {elapsed:.0f} s, {args.workers} gunicorn workers, {args.pipelines} pipelines, "
        f"{args.readers} readers, {args.hits_per_scan} hits per scan"
    )
    print(
        f"  {total} requests = {total / elapsed:,.1f} requests/s; {recorder.cadences} cadences "
        f"complete, {recorder.hits:,} hits = {recorder.hits / elapsed:,.0f} hits/s"
    )
    print(f"  {'route':<48} {'count':>6} {'p50 ms':>8} {'p99 ms':>8}")
    for route, values in sorted(recorder.latency_s.items()):
        print(
            f"  {route:<48} {len(values):>6} {1000 * statistics.median(values):>8.1f} "
            f"{1000 * percentile(values, 0.99):>8.1f}"
        )
    if args.network_sites:
        needed = args.network_sites * args.network_hits_per_site / (args.night_hours * 3600)
        rate = recorder.hits / elapsed
        print(
            f"  a network night ({args.network_sites} sites x {args.network_hits_per_site:,.0f} "
            f"hits in {args.night_hours:g} h) needs {needed:,.0f} hits/s on average; "
            f"measured / needed = {rate / needed:.2f}"
        )
    errors = ", ".join(f"{route} {status}: {n}" for (route, status), n in recorder.errors.items())
    print(f"  errors: {sum(recorder.errors.values())} ({errors or 'none'})")
    print(f"  '{LOCKED}': {recorder.locked} in answers, {log_text.count(LOCKED)} in gunicorn's log")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=60)
    parser.add_argument("--pipelines", type=int, default=8)
    parser.add_argument("--readers", type=int, default=32)
    parser.add_argument("--hits-per-scan", type=int, default=500)
    parser.add_argument("--cadences", type=int, default=6, help="prepared per pipeline")
    parser.add_argument("--workers", type=int, default=4)
    parser.add_argument("--postgres-url", default=None)
    parser.add_argument("--network-sites", type=int, default=20)
    parser.add_argument("--network-hits-per-site", type=float, default=1e6)
    parser.add_argument("--night-hours", type=float, default=10.0)
    parser.add_argument("--only", choices=["sqlite", "postgresql"], default=None)
    args = parser.parse_args()
    if args.only != "postgresql":
        folder = Path(tempfile.mkdtemp(prefix="bench-mixed-db-"))
        run("SQLite (WAL)", f"sqlite:///{folder / 'bench.db'}", args)
    if args.postgres_url and args.only != "sqlite":
        run("PostgreSQL", fresh_postgres(args.postgres_url, "mixed"), args)
    return 0


if __name__ == "__main__":
    sys.exit(main())
