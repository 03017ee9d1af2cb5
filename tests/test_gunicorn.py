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


def start_gunicorn(tmp_path: Path, url: str) -> tuple[subprocess.Popen, str]:
    """gunicorn with the shipped config on a free loopback port; returns it and its base URL."""
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
    return server, f"http://127.0.0.1:{port}"


def wait_until_serving(base: str) -> bytes:
    """The body of /healthz once gunicorn answers (it takes a few seconds to boot)."""
    for _ in range(150):
        try:
            with urllib.request.urlopen(f"{base}/healthz", timeout=2) as response:
                return response.read()
        except OSError:
            time.sleep(0.2)
    raise AssertionError("gunicorn did not answer")


def raw_exchange(base: str, request: bytes) -> tuple[int, dict[str, str], bytes]:
    """Send bytes as they are (no client library tidies them) and read the whole answer."""
    host, port = base.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=10) as connection:
        connection.sendall(request)
        received = b""
        while chunk := connection.recv(65536):
            received += chunk
    head, _, body = received.partition(b"\r\n\r\n")
    status_line, *lines = head.decode("latin-1").split("\r\n")
    headers = {k.strip().lower(): v.strip() for k, _, v in (x.partition(":") for x in lines)}
    return int(status_line.split()[1]), headers, body


def test_gunicorn_serves_health_and_authenticated_routes(tmp_path):
    url = f"sqlite:///{tmp_path / 'served.db'}"
    upgrade_database(url)
    database = Database(url)
    with database.write() as session:
        _, secret = create_token(session, SYSTEM, "served-viewer", "viewer")
    database.dispose()
    server, base = start_gunicorn(tmp_path, url)
    try:
        health = json.loads(wait_until_serving(base))
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


def test_every_error_reaches_the_client_as_problem_details(tmp_path):
    """gunicorn's own refusals (RFC 9110 statuses 400, 414; RFC 6585 status 431) and the
    application's 404/405 all carry application/problem+json (RFC 9457)."""
    url = f"sqlite:///{tmp_path / 'served.db'}"
    upgrade_database(url)
    server, base = start_gunicorn(tmp_path, url)
    try:
        wait_until_serving(base)
        host = b"Host: 127.0.0.1\r\n"
        cases = [
            (b"GET /healthz HTTP/1.1\r\n" + host + b"X-Big: " + b"a" * 9000 + b"\r\n\r\n", 431),
            (b"GET /" + b"a" * 9000 + b" HTTP/1.1\r\n" + host + b"\r\n", 414),
            (b"NOT-HTTP\r\n\r\n", 400),
            (b"GET /api/v1/no-such-thing HTTP/1.1\r\n" + host + b"Connection: close\r\n\r\n", 401),
            (b"GET /no-such-thing HTTP/1.1\r\n" + host + b"Connection: close\r\n\r\n", 404),
            (b"DELETE /healthz HTTP/1.1\r\n" + host + b"Connection: close\r\n\r\n", 405),
        ]
        for request, status in cases:
            got, headers, body = raw_exchange(base, request)
            assert got == status, (request[:40], got, body[:200])
            assert headers["content-type"] == "application/problem+json", request[:40]
            assert json.loads(body)["status"] == status
    finally:
        server.terminate()
        server.wait(timeout=30)
