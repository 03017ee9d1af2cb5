"""A real gunicorn in its own process group, pipeline clients that post hit batches with
idempotency keys, and a look at what the database holds afterwards."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
import urllib.error
import urllib.request
from dataclasses import dataclass, field
from pathlib import Path

from sqlalchemy import create_engine, text

from tests.test_gunicorn import free_port, wait_until_serving

ROOT = Path(__file__).resolve().parents[2]
HITS_PER_BATCH = 50
BATCH_SPACING_HZ = 1_000.0
CLIENT_SPACING_HZ = 1.0e6
FIRST_HZ = 1.40e9


def start_gunicorn(tmp_path: Path, url: str, workers: int = 2) -> tuple[subprocess.Popen, str]:
    """gunicorn with the shipped config, in a process group of its own (so that one signal
    reaches the master and every worker); returns it and its base URL once it answers."""
    port = free_port()
    env = {
        **os.environ,
        "CONFIRM_DATABASE_URL": url,
        "CONFIRM_INSTANCE_PATH": str(tmp_path / "instance"),
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
        cwd=tmp_path,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,
    )
    base = f"http://127.0.0.1:{port}"
    wait_until_serving(base)
    return server, base


def kill_hard(server: subprocess.Popen) -> None:
    """SIGKILL to gunicorn's master and workers at once: no handler runs, nothing is flushed."""
    os.killpg(server.pid, signal.SIGKILL)
    server.wait(timeout=30)


def stop(server: subprocess.Popen) -> None:
    if server.poll() is None:
        os.killpg(server.pid, signal.SIGTERM)
        server.wait(timeout=30)


def batch_body(client: int, batch: int) -> bytes:
    """Batch ``batch`` of pipeline ``client``: its own frequencies, so that each batch's rows
    can be counted in the database (invented values: 3.81 Hz channels, faint hits)."""
    base = FIRST_HZ + client * CLIENT_SPACING_HZ + batch * BATCH_SPACING_HZ
    hits = [
        {"frequency_hz": base + 3.81 * 4 * i, "drift_hz_s": -0.05, "snr": 6.0}
        for i in range(HITS_PER_BATCH)
    ]
    return json.dumps({"detections": hits}).encode()


def post_batch(
    base: str, secret: str, observation_id: int, client: int, batch: int
) -> tuple[int, dict, dict]:
    """(status, body, headers) of one batch, with the key ``c<client>-b<batch>``."""
    request = urllib.request.Request(
        f"{base}/api/v1/observations/{observation_id}/detections",
        data=batch_body(client, batch),
        method="POST",
        headers={
            "Authorization": f"Bearer {secret}",
            "Content-Type": "application/json",
            "Idempotency-Key": f"c{client}-b{batch}",
        },
    )
    try:
        with urllib.request.urlopen(request, timeout=30) as answer:
            return answer.status, json.loads(answer.read()), dict(answer.headers)
    except urllib.error.HTTPError as refused:
        return refused.code, json.loads(refused.read() or b"{}"), dict(refused.headers)


@dataclass
class Pipeline:
    """One client: posts batches in order until told to stop or the server goes away."""

    client: int
    observation_id: int
    acknowledged: dict[int, list[int]] = field(default_factory=dict)
    attempted: int = 0
    refusals: list[tuple[int, int, dict]] = field(default_factory=list)

    def run(self, base: str, secret: str, stop_event: threading.Event, limit: int) -> None:
        for batch in range(limit):
            if stop_event.is_set():
                return
            self.attempted = batch + 1
            try:
                status, body, headers = post_batch(
                    base, secret, self.observation_id, self.client, batch
                )
            except OSError:
                return  # the server went away: this batch is unacknowledged
            if status == 201:
                self.acknowledged[batch] = body["ids"]
            else:
                self.refusals.append((batch, status, headers))


def rows_per_batch(url: str, observation_id: int, client: int) -> dict[int, int]:
    """How many hits of each batch of ``client`` the database holds (by frequency)."""
    engine = create_engine(url)
    try:
        with engine.connect() as connection:
            rows = connection.execute(
                text("SELECT frequency_hz FROM detections WHERE observation_id = :o"),
                {"o": observation_id},
            ).scalars()
            counts: dict[int, int] = {}
            for frequency in rows:
                offset = frequency - FIRST_HZ - client * CLIENT_SPACING_HZ
                batch = int(offset // BATCH_SPACING_HZ)
                counts[batch] = counts.get(batch, 0) + 1
            return counts
    finally:
        engine.dispose()


def ids_of_batch(url: str, observation_id: int, client: int, batch: int) -> list[int]:
    low = FIRST_HZ + client * CLIENT_SPACING_HZ + batch * BATCH_SPACING_HZ
    engine = create_engine(url)
    try:
        with engine.connect() as connection:
            return list(
                connection.execute(
                    text(
                        "SELECT id FROM detections WHERE observation_id = :o AND frequency_hz "
                        ">= :low AND frequency_hz < :high ORDER BY id"
                    ),
                    {"o": observation_id, "low": low, "high": low + BATCH_SPACING_HZ},
                ).scalars()
            )
    finally:
        engine.dispose()


def audit_verify(url: str, instance: Path) -> subprocess.CompletedProcess:
    env = {**os.environ, "CONFIRM_DATABASE_URL": url, "CONFIRM_INSTANCE_PATH": str(instance)}
    script = Path(sys.executable).with_name("confirm-service")
    return subprocess.run(
        [str(script), "audit", "verify"], env=env, capture_output=True, text=True, timeout=120
    )
