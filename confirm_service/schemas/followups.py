"""Follow-up requests, partners' reports and outgoing messages: the JSON contract with partners."""

from __future__ import annotations

from datetime import datetime
from typing import Annotated, Any, Literal

from pydantic import BaseModel, Field, StrictBool, model_validator
from pydantic_core import PydanticCustomError

from confirm_service.schemas.bounds import (
    DriftHzS,
    DurationS,
    FrequencyHz,
    ObservationTime,
    RowId,
    Snr,
    TimeOffsetS,
)
from confirm_service.schemas.common import (
    AwareTime,
    Code,
    Declination,
    Positive,
    RightAscension,
    StrictModel,
    UtcIso,
)
from confirm_service.schemas.log import ObservationIn

NotObservedReason = Literal["weather", "fault", "not_visible", "other"]
FOLLOWUP_STATES = (
    "intended",
    "dispatched",
    "drafted",
    "sent",
    "acknowledged",
    "reported",
    "closed",
    "expired",
    "declined",
    "failed",
)


class ReportIn(StrictModel):
    """A partner's report: it observed (and saw the signal or not), or could not observe.

    With ``observation`` (a scan in the observation log's shape, its hits in ``detections``)
    the scan joins the log and the checks count it; ``observed_at``, ``duration_s`` and the band
    default to the scan's. ``observation_id`` names a scan already in this service's log (a
    partner instance reporting back what its own pipeline posted). ``threshold_snr`` is the
    detection threshold of the search, ``sefd_jy`` the system-equivalent flux density (Jy); a
    look that saw nothing is a miss only if the signal's expected SNR there reaches the
    threshold and the target was above the site's elevation limit.

    The instant: ``frequency_hz`` and ``drift_hz_s`` refer to ``observed_at + time_offset_s``
    (taken from the scan's strongest hit when they come from the scan), as a hit's refer to its
    scan start plus its ``time_offset_s``.
    """

    site: Code | None = None
    observed: StrictBool = True
    not_observed_reason: NotObservedReason | None = None
    observed_at: ObservationTime | None = Field(
        default=None, description="Start of the look (UTC); the scan's start by default."
    )
    duration_s: DurationS | None = None
    time_offset_s: TimeOffsetS | None = Field(
        default=None,
        description="s after observed_at: the instant frequency_hz and drift_hz_s refer to "
        "(default 0, or the strongest hit's offset when they come from the scan).",
    )
    detected: StrictBool = False
    frequency_hz: FrequencyHz | None = Field(
        default=None,
        description="Hz, topocentric at the partner, at observed_at + time_offset_s: the "
        "frequency /predictions gives for this site with to_time at that instant.",
    )
    drift_hz_s: DriftHzS | None = None
    frequency_min_hz: FrequencyHz | None = None
    frequency_max_hz: FrequencyHz | None = None
    threshold_snr: Snr | None = None
    sefd_jy: Positive | None = None
    pointing_ra_deg: RightAscension | None = None
    pointing_dec_deg: Declination | None = None
    observation: ObservationIn | None = None
    observation_id: RowId | None = None
    notes: Annotated[str, Field(max_length=10_000)] | None = None

    @model_validator(mode="after")
    def _consistent(self) -> ReportIn:
        if not self.observed:
            if self.not_observed_reason is None:
                raise PydanticCustomError(
                    "not_observed_reason", "a report without an observation needs a reason"
                )
            if self.detected or self.observation is not None:
                raise PydanticCustomError("observed", "not observed: no detection, no scan")
            return self
        scan = self.observation
        if scan is not None:
            self.observed_at = self.observed_at or scan.start
            self.duration_s = self.duration_s or scan.duration_s
            self.frequency_min_hz = self.frequency_min_hz or scan.frequency_min_hz
            self.frequency_max_hz = self.frequency_max_hz or scan.frequency_max_hz
            if self.pointing_ra_deg is None:
                self.pointing_ra_deg = scan.pointing_ra_deg
            if self.pointing_dec_deg is None:
                self.pointing_dec_deg = scan.pointing_dec_deg
            if self.detected and self.frequency_hz is None and scan.detections:
                strongest = max(scan.detections, key=lambda row: row["snr"])
                self.frequency_hz = strongest["frequency_hz"]
                self.drift_hz_s = strongest["drift_hz_s"]
                hit_instant = scan.start.timestamp() + strongest.get("time_offset_s", 0.0)
                self.time_offset_s = hit_instant - self.observed_at.timestamp()
            self.sefd_jy = self.sefd_jy or scan.sefd_jy
            self.threshold_snr = self.threshold_snr or scan.threshold_snr
            self.observation = scan.model_copy(
                update={"sefd_jy": self.sefd_jy, "threshold_snr": self.threshold_snr}
            )
        if self.observation_id is not None:
            return self  # the rest comes from the named scan
        missing = [
            name
            for name in ("observed_at", "duration_s", "frequency_min_hz", "frequency_max_hz")
            if getattr(self, name) is None
        ]
        if missing:
            raise PydanticCustomError(
                "missing", "an observed report needs {fields}", {"fields": ", ".join(missing)}
            )
        assert self.frequency_min_hz is not None and self.frequency_max_hz is not None
        if self.frequency_max_hz <= self.frequency_min_hz:
            raise PydanticCustomError("band", "frequency_max_hz must exceed frequency_min_hz")
        if self.detected and (self.frequency_hz is None or self.drift_hz_s is None):
            raise PydanticCustomError("detected", "a detection needs frequency_hz and drift_hz_s")
        return self


class ReportOut(BaseModel):
    id: int
    site: str
    request_id: int | None = None
    observed: bool = True
    not_observed_reason: str | None = None
    observed_at: UtcIso
    duration_s: float
    detected: bool
    frequency_hz: float | None
    drift_hz_s: float | None
    frequency_min_hz: float
    frequency_max_hz: float
    threshold_snr: float | None = None
    sefd_jy: float | None = None
    pointing_ra_deg: float | None = None
    pointing_dec_deg: float | None = None
    observation_id: int | None = None
    time_offset_s: float = 0.0
    notes: str | None
    received_at: UtcIso
    warnings: list[str] = Field(
        default=[],
        description="What the service noticed on receipt, e.g. a sighting far outside the "
        "band predicted for this site and instant (also in the audit log). The report is "
        "stored either way.",
    )


class FollowUpCreate(StrictModel):
    """A coordinator's request: to a named site, or to every registered site at least
    ``min_distance_km`` from the sites that saw the signal that can see the target within
    ``horizon_hours`` (at most ``max_sites`` of them)."""

    site: Code | None = None
    min_distance_km: Positive | None = None
    max_sites: Annotated[int, Field(ge=1, le=20)] = 3
    horizon_hours: Annotated[float, Field(gt=0, le=24 * 60, allow_inf_nan=False)] = 168.0
    deadline: AwareTime | None = None
    note: Annotated[str, Field(max_length=2_000)] = ""

    @model_validator(mode="after")
    def _addressed(self) -> FollowUpCreate:
        if (self.site is None) == (self.min_distance_km is None):
            raise PydanticCustomError("site", "give either site or min_distance_km")
        return self


class DeclineIn(StrictModel):
    reason: Annotated[str, Field(min_length=1, max_length=2_000)]


class FollowUpListQuery(StrictModel):
    site: Code | None = None
    state: Literal[FOLLOWUP_STATES] | None = None  # type: ignore[valid-type]
    candidate: Annotated[int, Field(gt=0)] | None = None
    direction: Literal["outbound", "inbound"] | None = None
    after: Annotated[int, Field(ge=0)] = 0
    limit: Annotated[int, Field(ge=1, le=1000)] = 100


class FollowUpRequestOut(BaseModel):
    """A request (or a protocol intent) with its life cycle timestamps and its content."""

    id: int
    kind: str
    direction: str
    origin: str
    candidate_id: int | None
    stage: str
    status: str
    site: str | None
    remote_site: str | None
    remote_id: int | None
    parent_id: int | None
    send_at: UtcIso | None
    deadline: UtcIso | None
    created_at: UtcIso
    drafted_at: UtcIso | None
    sent_at: UtcIso | None
    acknowledged_at: UtcIso | None
    reported_at: UtcIso | None
    closed_at: UtcIso | None
    expired_at: UtcIso | None
    declined_at: UtcIso | None
    failed_at: UtcIso | None
    state_reason: str | None
    payload: dict[str, Any]


class MessageOut(BaseModel):
    """One outgoing message (request, report, notification) and its delivery result."""

    id: int
    message_id: str
    kind: str
    channel: str
    destination: str
    candidate_id: int | None
    request_id: int | None
    subject: str
    status: str
    attempts: int
    next_attempt_at: UtcIso | None
    last_error: str | None
    last_status_code: int | None
    created_at: UtcIso
    delivered_at: UtcIso | None
    dead_at: UtcIso | None


def iso_or_none(value: datetime | None) -> str | None:
    return value.isoformat() if value else None
