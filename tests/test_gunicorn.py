"""The production server: gunicorn with the shipped config serves the app (real process)."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

from confirm_service.actor import SYSTEM
from confirm_service.db import Database, upgrade_database
from confirm_service.services.tokens import create_token

ROOT = Path(__file__).resolve().parents[1]


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def test_gunicorn_serves_health_and_authenticated_routes(tmp_path):
    url = f"sqlite:///{tmp_path / 'served.db'}"
    upgrade_database(url)
    database = Database(url)
    with database.write() as session:
        _, secret = create_token(session, SYSTEM, "served-viewer", "viewer")
    database.dispose()
    port = free_port()
    env = {
        **os.environ,
        "CONFIRM_DATABASE_URL": url,
        "CONFIRM_INSTANCE_PATH": str(tmp_path),
        "CONFIRM_BIND": f"127.0.0.1:{port}",
        "CONFIRM_WORKERS": "2",
    }
    gunicorn = Path(sys.executable).with_name("gunicorn")
    server = subprocess.Popen(
        [str(gunicorn), "-c", str(ROOT / "deploy/gunicorn.conf.py")],
        env=env,
        cwd=tmp_path,
        stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT,
    )
    try:
        base = f"http://127.0.0.1:{port}"
        for _ in range(150):
            try:
                with urllib.request.urlopen(f"{base}/healthz", timeout=2) as response:
                    health = json.loads(response.read())
                break
            except OSError:
                time.sleep(0.2)
        else:
            raise AssertionError("gunicorn did not answer")
        assert health == {"status": "ok", "database": "reachable"}
        request = urllib.request.Request(
            f"{base}/api/v1/sites", headers={"Authorization": f"Bearer {secret}"}
        )
        with urllib.request.urlopen(request, timeout=10) as response:
            assert json.loads(response.read()) == {"items": [], "next": None}
        try:
            urllib.request.urlopen(f"{base}/api/v1/sites", timeout=10)
            raise AssertionError("expected 401")
        except urllib.error.HTTPError as refused:
            assert refused.code == 401
            assert refused.headers["Content-Type"] == "application/problem+json"
    finally:
        server.terminate()
        server.wait(timeout=30)
