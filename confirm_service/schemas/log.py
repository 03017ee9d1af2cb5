"""Request and response models of the observation log: the JSON contract with pipelines."""

from __future__ import annotations

from typing import Annotated, NotRequired

from pydantic import (
    ConfigDict,
    Field,
    StrictBool,
    TypeAdapter,
    ValidationInfo,
    field_validator,
    model_validator,
)
from typing_extensions import TypedDict

from confirm_service.schemas.bounds import (
    DistancePc,
    DriftHzS,
    DurationS,
    ElevationM,
    EpochTime,
    FrequencyHz,
    ObservationTime,
    ParallaxMas,
    ProperMotionMasYr,
    Snr,
    SpectralWidthHz,
    TimeOffsetS,
    TimeResolutionS,
)
from confirm_service.schemas.common import (
    Code,
    Declination,
    Latitude,
    Longitude,
    Name,
    NoNul,
    OutModel,
    RightAscension,
    StrictModel,
    UtcIso,
)

Band = Annotated[list[FrequencyHz], Field(min_length=2, max_length=2)]
MinElevationDeg = Annotated[float, Field(ge=-10, le=90, allow_inf_nan=False)]
SunAvoidanceDeg = Annotated[float, Field(ge=0, le=180, allow_inf_nan=False)]


class SiteIn(StrictModel):
    code: Code
    name: Name
    latitude_deg: Latitude
    longitude_deg: Longitude
    elevation_m: ElevationM
    min_elevation_deg: MinElevationDeg = 10.0
    sun_avoidance_deg: SunAvoidanceDeg = 5.0
    webhook_url: Annotated[str, Field(max_length=2000, pattern=r"^https?://")] | None = None
    email: Annotated[str, Field(max_length=320, pattern=r"^[^@\s]+@[^@\s]+$")] | None = None
    receiver_bands_hz: list[Band] = []

    @model_validator(mode="after")
    def _bands_ordered(self) -> SiteIn:
        for index, (low, high) in enumerate(self.receiver_bands_hz):
            if high <= low:
                raise ValueError(f"receiver_bands_hz[{index}]: upper edge must exceed lower edge")
        return self


class SiteUpdate(StrictModel):
    """Fields to change. A column that cannot be empty takes no ``null`` (the default only
    stands for "absent": pydantic does not validate defaults)."""

    name: Name = Field(None)  # type: ignore[assignment]  # absent allowed, null refused
    latitude_deg: Latitude = Field(None)  # type: ignore[assignment]  # absent allowed, null refused
    longitude_deg: Longitude = Field(None)  # type: ignore[assignment]  # absent allowed, null refused
    elevation_m: ElevationM = Field(None)  # type: ignore[assignment]  # absent allowed, null refused
    min_elevation_deg: MinElevationDeg = Field(None)  # type: ignore[assignment]  # absent allowed, null refused
    sun_avoidance_deg: SunAvoidanceDeg = Field(None)  # type: ignore[assignment]  # absent allowed, null refused
    webhook_url: Annotated[str, Field(max_length=2000, pattern=r"^https?://")] | None = None
    email: Annotated[str, Field(max_length=320, pattern=r"^[^@\s]+@[^@\s]+$")] | None = None
    receiver_bands_hz: list[Band] | None = None


class SiteOut(OutModel):
    id: int
    code: str
    name: str
    latitude_deg: float
    longitude_deg: float
    elevation_m: float
    min_elevation_deg: float
    sun_avoidance_deg: float
    webhook_url: str | None
    email: str | None
    receiver_bands_hz: list[list[float]] = Field(validation_alias="receiver_bands")
    created_at: UtcIso
    updated_at: UtcIso


class TargetIn(StrictModel):
    name: Name
    ra_deg: RightAscension
    dec_deg: Declination
    pm_ra_mas_yr: ProperMotionMasYr | None = None
    pm_dec_mas_yr: ProperMotionMasYr | None = None
    parallax_mas: ParallaxMas | None = None
    distance_pc: DistancePc | None = None
    epoch: EpochTime | None = None


class TargetUpdate(StrictModel):
    """Fields to change; ``ra_deg`` and ``dec_deg`` take no ``null`` (see :class:`SiteUpdate`)."""

    ra_deg: RightAscension = Field(None)  # type: ignore[assignment]  # absent allowed, null refused
    dec_deg: Declination = Field(None)  # type: ignore[assignment]  # absent allowed, null refused
    pm_ra_mas_yr: ProperMotionMasYr | None = None
    pm_dec_mas_yr: ProperMotionMasYr | None = None
    parallax_mas: ParallaxMas | None = None
    distance_pc: DistancePc | None = None
    epoch: EpochTime | None = None


class TargetOut(OutModel):
    id: int
    name: str
    ra_deg: float
    dec_deg: float
    pm_ra_mas_yr: float | None
    pm_dec_mas_yr: float | None
    parallax_mas: float | None
    distance_pc: float | None
    epoch: UtcIso | None
    created_at: UtcIso
    updated_at: UtcIso


class DetectionIn(TypedDict):
    """A hit: topocentric ``frequency_hz`` holding ``time_offset_s`` after the scan start.

    A TypedDict rather than a model: the bulk path validates 50,000 of these per request and a
    TypedDict validates several times faster. Absent optional keys take the defaults in
    :data:`DETECTION_DEFAULTS`.
    """

    __pydantic_config__ = ConfigDict(extra="forbid")  # type: ignore[misc]
    frequency_hz: Annotated[
        FrequencyHz,
        Field(
            description="Hz, topocentric, at the hit's instant: the scan's start plus "
            "time_offset_s (the same instant /predictions takes as time, and matching uses)"
        ),
    ]
    drift_hz_s: Annotated[DriftHzS, Field(description="Hz/s, observed, at the hit's instant")]
    snr: Snr
    time_offset_s: NotRequired[
        Annotated[
            TimeOffsetS,
            Field(description="s after the scan start: the instant frequency_hz refers to"),
        ]
    ]
    bandwidth_hz: NotRequired[SpectralWidthHz | None]
    beam: NotRequired[Annotated[str, Field(max_length=64), NoNul] | None]
    candidate: NotRequired[StrictBool]


DETECTION_DEFAULTS = {"time_offset_s": 0.0, "bandwidth_hz": None, "beam": None, "candidate": False}


class DetectionBatchIn(TypedDict):
    """A batch of a scan's hits; ``complete`` true on the scan's last batch closes the scan."""

    __pydantic_config__ = ConfigDict(extra="forbid")  # type: ignore[misc]
    detections: list[DetectionIn]
    complete: NotRequired[StrictBool]


DETECTION_BATCH = TypeAdapter(DetectionBatchIn)


class DetectionOut(OutModel):
    id: int
    observation_id: int
    frequency_hz: float
    drift_hz_s: float
    snr: float
    time_offset_s: float
    bandwidth_hz: float | None
    beam: str | None
    candidate: bool = Field(validation_alias="flagged_candidate")


class DetectionBatchOut(OutModel):
    observation_id: int
    count: int
    ids: list[int]
    complete: bool = False
    candidate_ids: list[int] = []


class ObservationIn(StrictModel):
    site: Code
    target: Name | None = None
    pointing_ra_deg: RightAscension | None = None
    pointing_dec_deg: Declination | None = None
    start: ObservationTime
    duration_s: DurationS
    frequency_min_hz: FrequencyHz
    frequency_max_hz: FrequencyHz
    channel_width_hz: SpectralWidthHz
    time_resolution_s: TimeResolutionS
    on_source: StrictBool
    beam: Annotated[str, Field(max_length=64)] | None = None
    cadence: Annotated[str, Field(max_length=128)] | None = None
    pipeline_run: Annotated[str, Field(max_length=128)] | None = None
    sefd_jy: Annotated[float, Field(gt=0, allow_inf_nan=False)] | None = Field(
        default=None,
        description="System-equivalent flux density of the receiver for this scan (Jy). With "
        "the detection threshold it says how faint a signal the scan could see: a scan that "
        "saw nothing counts as a miss only if the signal's expected SNR there reaches the "
        "threshold (radiometer equation, see protocol.misses).",
    )
    threshold_snr: Snr | None = Field(
        default=None, description="Detection threshold (signal-to-noise ratio) of the search."
    )
    detections: list[DetectionIn] = []
    complete: StrictBool | None = Field(
        default=None,
        description="Whether every hit of the scan is in this request. Default: true when "
        "detections are given inline, false otherwise (the scan stays open for batches).",
    )

    def is_complete(self) -> bool:
        """The scan's hits are all in this request (explicitly, or by giving them inline)."""
        return self.complete if self.complete is not None else bool(self.detections)

    @field_validator("frequency_max_hz")
    @classmethod
    def _above_minimum(cls, value: float, info: ValidationInfo) -> float:
        low = info.data.get("frequency_min_hz")
        if low is not None and value <= low:
            raise ValueError("must exceed frequency_min_hz")
        return value


class ObservationOut(OutModel):
    id: int
    site: str
    target: str | None
    pointing_ra_deg: float
    pointing_dec_deg: float
    start: UtcIso
    end: UtcIso
    duration_s: float
    frequency_min_hz: float
    frequency_max_hz: float
    channel_width_hz: float
    time_resolution_s: float
    on_source: bool
    beam: str | None
    cadence: str | None
    pipeline_run: str | None
    sefd_jy: float | None = None
    threshold_snr: float | None = None
    detection_count: int
    created_at: UtcIso
    complete: bool
    completed_at: UtcIso | None
    completed_by: str | None
    detection_ids: list[int] | None = None
    candidate_ids: list[int] | None = None


class ScreeningCountsOut(OutModel):
    """A scan's hits by screening outcome: reason -> count; ``pending`` not yet judged."""

    observation_id: int
    complete: bool
    detection_count: int
    pending: int
    reasons: dict[str, int]
    runs: list[int]
