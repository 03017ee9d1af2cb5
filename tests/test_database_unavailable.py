"""A database that does not answer: 503 problem+json with Retry-After on every route, not 500."""

from __future__ import annotations

import socket
from pathlib import Path

import pytest

from confirm_service.app import create_app


def closed_port() -> int:
    """A loopback port nothing listens on: bound once to learn a free number, then closed."""
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def unreachable_urls(tmp_path: Path) -> dict[str, str]:
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder", encoding="ascii")
    return {
        "postgresql-closed-port": f"postgresql+psycopg://postgres@127.0.0.1:{closed_port()}/x",
        "sqlite-path-is-a-folder": f"sqlite:///{tmp_path}",
        "sqlite-under-a-file": f"sqlite:///{blocker}/confirm.db",
    }


@pytest.mark.parametrize(
    "kind", ["postgresql-closed-port", "sqlite-path-is-a-folder", "sqlite-under-a-file"]
)
def test_every_route_answers_503_with_retry_after(tmp_path, kind):
    url = unreachable_urls(tmp_path)[kind]
    app = create_app({"database_url": url, "instance_path": tmp_path / "instance"})
    client = app.test_client()
    health = client.get("/healthz")
    assert health.status_code == 503
    assert int(health.headers["Retry-After"]) > 0  # RFC 9110 section 10.2.3: delay-seconds
    bearer = {"Authorization": "Bearer cs1_anything"}
    for method, path in [
        ("GET", "/api/v1/sites"),
        ("GET", "/api/v1/observations/1"),
        ("POST", "/api/v1/observations"),
        ("GET", "/api/v1/audit/checkpoints/latest"),
    ]:
        response = client.open(path, method=method, headers=bearer, json={})
        assert response.status_code == 503, (path, response.get_data(as_text=True))
        assert response.mimetype == "application/problem+json"
        assert int(response.headers["Retry-After"]) > 0
        assert response.get_json()["status"] == 503
    app.extensions["confirm.db"].dispose()
