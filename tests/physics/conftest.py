"""Fixtures for the physics tests: the skyfield reference (DE421, builtin timescale)."""

from __future__ import annotations

import pytest

from confirm_service.physics import reset_accuracy_warning, set_ephemeris

from .skyfield_reference import SkyfieldReference


@pytest.fixture(scope="session")
def skyfield_ref() -> SkyfieldReference:
    return SkyfieldReference()


@pytest.fixture
def builtin_ephemeris():
    """Restore astropy's builtin ephemeris and the once-only warning after a test."""
    yield
    set_ephemeris(None)
    reset_accuracy_warning()
