"""The physical and numeric bounds every request schema uses: each number is defined here once.

A value outside these ranges is a typo, a unit mix-up or hostile input, never an observation: it
is refused with 422 before anything is computed or stored. The numeric bounds appear in the
OpenAPI document as ``minimum``/``maximum``; the time bounds, which JSON Schema cannot express for
date-times, appear in the field descriptions.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Annotated

from pydantic import AwareDatetime, Field

# --- integers that reach a database column ----------------------------------------------------
ROW_ID_MAX = 2**31 - 1
"""Row ids are INTEGER columns, 32-bit on PostgreSQL: a larger id cannot exist. Audit sequence
numbers are BIGINT, but the log reaches 2^31 entries only after 68 years at one a second."""
INT64_MAX = 2**63 - 1
"""Largest BIGINT (PostgreSQL) and INTEGER (SQLite): audit tree sizes."""

# --- frequencies ------------------------------------------------------------------------------
FREQUENCY_MIN_HZ = 1e6
FREQUENCY_MAX_HZ = 1e12
"""Radio searches run between the ionospheric cut-off (a few MHz) and the submillimetre band;
1 MHz to 1 THz holds every receiver with room to spare (common practice, no source)."""

SPECTRAL_WIDTH_MIN_HZ = 1e-3
SPECTRAL_WIDTH_MAX_HZ = 1e9
"""Channel widths and signal bandwidths: a millihertz channel needs a 1,000 s transform; 1 GHz
is wider than any single channel or narrowband signal (common practice, no source)."""

# --- durations --------------------------------------------------------------------------------
DURATION_MIN_S = 1e-3
DURATION_MAX_S = 2 * 86_400.0
"""A scan or a follow-up look lasts from 1 ms to 2 days (a tracked source sets within a day;
2 days leaves room for circumpolar targets)."""

TIME_RESOLUTION_MIN_S = 1e-6
"""A microsecond spectrum is already far below any narrowband search's integration time."""

# --- signal quantities ------------------------------------------------------------------------
SNR_MAX = 1e6
"""A signal-to-noise ratio above a million is a saturated receiver or a corrupt number."""

DRIFT_MAX_HZ_S = 1e4
"""Earth alone gives at most about 0.16 Hz/s at 1.42 GHz (README, Doppler conventions); searches
look to a few hundred Hz/s at most. ±10 kHz/s is generous at every frequency up to 1 THz."""

# --- targets ----------------------------------------------------------------------------------
PROPER_MOTION_MAX_MAS_YR = 1e5
"""The fastest star on the sky moves about 10.4 arcsec/yr (Barnard's star; from memory):
±100 arcsec/yr leaves a factor ten."""

PARALLAX_MAX_MAS = 1e4
"""The nearest star's parallax is about 768 mas (from memory): 10 arcsec leaves a factor ten."""

DISTANCE_MIN_PC = 1e-6
DISTANCE_MAX_PC = 1e11
"""From about 0.2 au (inside the Solar System) to beyond the observable universe."""

# --- times ------------------------------------------------------------------------------------
EARLIEST_OBSERVATION = datetime(1950, 1, 1, tzinfo=UTC)
"""No radio technosignature search data predate 1950 (common practice, no source)."""
EARLIEST_EPOCH = datetime(1900, 1, 1, tzinfo=UTC)
"""Catalogue epochs go back to B1900 and B1950 (which falls on 1949-12-31)."""
LATEST_TIME = datetime(2200, 1, 1, tzinfo=UTC)
"""Far beyond any plan; keeps time arithmetic (start + duration) clear of datetime's limits."""


FrequencyHz = Annotated[
    float,
    Field(
        ge=FREQUENCY_MIN_HZ,
        le=FREQUENCY_MAX_HZ,
        allow_inf_nan=False,
        description="Hz, 1 MHz to 1 THz",
    ),
]
SpectralWidthHz = Annotated[
    float,
    Field(
        ge=SPECTRAL_WIDTH_MIN_HZ,
        le=SPECTRAL_WIDTH_MAX_HZ,
        allow_inf_nan=False,
        description="Hz, 1 mHz to 1 GHz",
    ),
]
DurationS = Annotated[
    float,
    Field(
        ge=DURATION_MIN_S, le=DURATION_MAX_S, allow_inf_nan=False, description="s, 1 ms to 2 days"
    ),
]
TimeResolutionS = Annotated[
    float,
    Field(
        ge=TIME_RESOLUTION_MIN_S,
        le=DURATION_MAX_S,
        allow_inf_nan=False,
        description="s, 1 µs to 2 days",
    ),
]
TimeOffsetS = Annotated[
    float,
    Field(ge=0, le=DURATION_MAX_S, allow_inf_nan=False, description="s after the scan start"),
]
Snr = Annotated[
    float, Field(ge=0, le=SNR_MAX, allow_inf_nan=False, description="signal-to-noise, 0 to 1e6")
]
DriftHzS = Annotated[
    float,
    Field(
        ge=-DRIFT_MAX_HZ_S,
        le=DRIFT_MAX_HZ_S,
        allow_inf_nan=False,
        description="Hz/s, within ±1e4",
    ),
]
DriftUncertaintyHzS = Annotated[
    float, Field(ge=0, le=DRIFT_MAX_HZ_S, allow_inf_nan=False, description="Hz/s, 0 to 1e4")
]
ProperMotionMasYr = Annotated[
    float,
    Field(
        ge=-PROPER_MOTION_MAX_MAS_YR,
        le=PROPER_MOTION_MAX_MAS_YR,
        allow_inf_nan=False,
        description="mas/yr, within ±1e5",
    ),
]
ParallaxMas = Annotated[
    float, Field(gt=0, le=PARALLAX_MAX_MAS, allow_inf_nan=False, description="mas, up to 1e4")
]
DistancePc = Annotated[
    float,
    Field(
        ge=DISTANCE_MIN_PC, le=DISTANCE_MAX_PC, allow_inf_nan=False, description="pc, 1e-6 to 1e11"
    ),
]
ElevationM = Annotated[
    float, Field(ge=-500, le=10_000, allow_inf_nan=False, description="m, -500 to 10,000")
]
"""Height above the WGS84 ellipsoid: from the Dead Sea shore to above any mountain."""

_OBSERVATION_SPAN = f"{EARLIEST_OBSERVATION.date()} to {LATEST_TIME.date()} UTC"
ObservationTime = Annotated[
    AwareDatetime,
    Field(
        ge=EARLIEST_OBSERVATION,
        lt=LATEST_TIME,
        description=f"ISO 8601 with a UTC offset, {_OBSERVATION_SPAN}",
    ),
]
EpochTime = Annotated[
    AwareDatetime,
    Field(
        ge=EARLIEST_EPOCH,
        lt=LATEST_TIME,
        description=(
            "Catalogue epoch of the position and proper motion (ISO 8601 with a UTC offset, "
            f"{EARLIEST_EPOCH.date()} to {LATEST_TIME.date()}). Omitted: J2000.0 "
            "(2000-01-01T12:00 TT). Every prediction, check and picture applies the proper "
            "motion from this epoch to the time of the observation."
        ),
    ),
]

RowId = Annotated[int, Field(ge=1, le=ROW_ID_MAX)]
"""An id of a stored row."""
TreeSize = Annotated[int, Field(ge=0, le=INT64_MAX)]
"""A number of audit entries."""
