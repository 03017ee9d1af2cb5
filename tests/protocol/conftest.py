"""Fixtures for the protocol tests: shipped protocols, a shared physics context, scenarios."""

from __future__ import annotations

from pathlib import Path

import pytest

from confirm_service.protocol import LoadedProtocol, PhysicsContext, load_protocol

from .scenarios import INJECTION_LAYOUTS, Scenario, build

PROTOCOL_DIR = Path(__file__).resolve().parents[2] / "protocols"


@pytest.fixture(scope="session")
def protocol_dir() -> Path:
    return PROTOCOL_DIR


@pytest.fixture(scope="session")
def default_protocol() -> LoadedProtocol:
    return load_protocol(PROTOCOL_DIR / "default.toml")


@pytest.fixture(scope="session")
def strict_protocol() -> LoadedProtocol:
    return load_protocol(PROTOCOL_DIR / "strict.toml")


@pytest.fixture(scope="session")
def physics_context() -> PhysicsContext:
    return PhysicsContext()


@pytest.fixture(scope="session")
def injection_scenarios() -> dict[str, Scenario]:
    """Every injection layout built once (physics truth is the slow part)."""
    return {layout.name: build(layout) for layout in INJECTION_LAYOUTS}


@pytest.fixture(scope="session")
def sky_fixed(injection_scenarios: dict[str, Scenario]) -> Scenario:
    """A sky-fixed candidate with a residual drift, complete data at two continents."""
    return injection_scenarios["sf-dun-dorado-p"]
