"""Invented sites, targets and scans for tests (no real observatory, target or person)."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from typing import Any

SITE_NORTH = {
    "code": "PRA",
    "name": "Pell Ridge Array",
    "latitude_deg": 38.52,
    "longitude_deg": -107.31,
    "elevation_m": 2410.0,
    "min_elevation_deg": 15.0,
    "sun_avoidance_deg": 10.0,
    "email": "ops@pell-ridge.example",
}
SITE_SOUTH = {
    "code": "TFO",
    "name": "Tamsin Flats Observatory",
    "latitude_deg": -31.21,
    "longitude_deg": 118.93,
    "elevation_m": 310.0,
    "webhook_url": "https://tamsin-flats.example/hooks/confirm",
}
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
        "channel_width_hz": 2.79,
        "time_resolution_s": 18.25,
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
