"""Under real gunicorn with two workers: one JSON log line per request on stdout, and metrics
summed over the workers (prometheus-client multiprocess mode)."""

from __future__ import annotations

import json
import urllib.request
from concurrent.futures import ThreadPoolExecutor

from prometheus_client.parser import text_string_to_metric_families

from confirm_service.actor import SYSTEM
from confirm_service.db import Database, upgrade_database
from confirm_service.services.tokens import create_token
from tests.test_gunicorn import start_gunicorn, wait_until_serving

REQUESTS = 40


def get(url: str, secret: str) -> bytes:
    request = urllib.request.Request(url, headers={"Authorization": f"Bearer {secret}"})
    with urllib.request.urlopen(request, timeout=20) as response:
        return response.read()


def test_two_workers_log_every_request_and_share_their_metrics(tmp_path, monkeypatch):
    url = f"sqlite:///{tmp_path / 'served.db'}"
    upgrade_database(url)
    database = Database(url)
    with database.write() as session:
        _, secret = create_token(session, SYSTEM, "monitor", "viewer")
    database.dispose()
    metrics_dir = tmp_path / "metrics"
    metrics_dir.mkdir()
    (metrics_dir / "counter_999999.db").write_bytes(b"stale file from an earlier run")
    monkeypatch.setenv("PROMETHEUS_MULTIPROC_DIR", str(metrics_dir))
    server, base = start_gunicorn(tmp_path, url)
    try:
        wait_until_serving(base)
        with ThreadPoolExecutor(8) as pool:
            list(pool.map(lambda _: get(f"{base}/api/v1/sites", secret), range(REQUESTS)))
        text = get(f"{base}/api/v1/metrics", secret).decode()
        writers = {p.name.rsplit("_", 1)[1] for p in metrics_dir.glob("*.db")}
    finally:
        server.terminate()
        output, _ = server.communicate(timeout=30)
    assert len(writers) >= 2, "both workers write their values"  # one file set per process
    assert "999999.db" not in writers, "gunicorn empties the folder when it starts"
    found = {
        (s.name, tuple(sorted(s.labels.items()))): s.value
        for family in text_string_to_metric_families(text)
        for s in family.samples
    }
    key = (("method", "GET"), ("route", "/api/v1/sites"), ("status", "200"))
    assert found[("confirm_http_requests_total", key)] == REQUESTS
    lines = [json.loads(line) for line in output.decode().splitlines() if line.startswith("{")]
    sites = [line for line in lines if line["route"] == "/api/v1/sites"]
    assert len(sites) == REQUESTS
    assert len({line["request_id"] for line in sites}) == REQUESTS
    assert {line["token_name"] for line in sites} == {"monitor"}
    assert secret not in output.decode()
