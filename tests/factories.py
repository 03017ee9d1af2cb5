"""Invented sites, targets and scans for tests (no real observatory, target or person)."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from typing import Any

from confirm_service.demo import SITES as DEMO_SITES

SITE_NORTH = dict(DEMO_SITES[0])
SITE_SOUTH = dict(DEMO_SITES[1])
TARGET = {"name": "Kestrel-7", "ra_deg": 201.365, "dec_deg": 12.42}

START = datetime(2026, 11, 20, 3, 0, tzinfo=UTC)


def observation(**overrides: Any) -> dict[str, Any]:
    body = {
        "site": "PRA",
        "target": "Kestrel-7",
        "start": START.isoformat(),
        "duration_s": 300.0,
        "frequency_min_hz": 1.40e9,
        "frequency_max_hz": 1.45e9,
        "channel_width_hz": 3.81,
        "time_resolution_s": 12.5,
        "on_source": True,
        "cadence": "PRA-20261120-k7",
        "pipeline_run": "run-0042",
    }
    body.update(overrides)
    return body


def detections(count: int, base_hz: float = 1.42e9) -> list[dict[str, Any]]:
    """Faint hits (SNR below every shipped protocol's intake threshold): log traffic only."""
    return [
        {"frequency_hz": base_hz + 37.5 * i, "drift_hz_s": -0.05, "snr": 5.0 + i % 4}
        for i in range(count)
    ]


def later(minutes: float) -> str:
    return (START + timedelta(minutes=minutes)).isoformat()


def setup_log(client: Any, auth: Any) -> None:
    """Register the invented sites and target through the API."""
    for site in (SITE_NORTH, SITE_SOUTH):
        assert (
            client.post("/api/v1/sites", json=site, headers=auth("coordinator")).status_code == 201
        )
    assert (
        client.post("/api/v1/targets", json=TARGET, headers=auth("coordinator")).status_code == 201
    )
