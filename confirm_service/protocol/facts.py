"""Candidate facts: frozen snapshots the service fills from the database.

Times are float64 POSIX seconds (``unix_s``: seconds since 1970-01-01T00:00:00 UTC, leap seconds
ignored, as ``datetime.timestamp()`` of an aware UTC datetime gives). Frequencies are float64 Hz,
drift rates Hz/s, durations seconds, distances km.

A detection's ``frequency_hz`` is the frequency at the detection's own time,
``observation.start_unix_s + detection.time_offset_s``; ``drift_hz_s`` is its observed
(topocentric) drift rate.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

from confirm_service.states import CandidateState

STATE_OPEN = CandidateState.OPEN
STATE_REJECTED = CandidateState.REJECTED
STATE_PASSED_PROTOCOL = CandidateState.PASSED_PROTOCOL
STATE_WITHDRAWN = CandidateState.WITHDRAWN
CANDIDATE_STATES = (STATE_OPEN, STATE_REJECTED, STATE_PASSED_PROTOCOL, STATE_WITHDRAWN)
TERMINAL_STATES = (STATE_REJECTED, STATE_PASSED_PROTOCOL, STATE_WITHDRAWN)


@dataclass(frozen=True, slots=True)
class SiteFact:
    """A receiving site: WGS84 geodetic latitude/longitude (deg) and elevation (m), and the
    lowest target elevation (deg) it observes at (``min_elevation_deg``; 0 is the geometric
    horizon)."""

    code: str
    latitude_deg: float
    longitude_deg: float
    elevation_m: float
    min_elevation_deg: float = 0.0


@dataclass(frozen=True, slots=True)
class TargetFact:
    """A sky target: ICRS position (deg), optional proper motion (mas/yr), parallax (mas) or
    distance (pc), at the catalogue ``epoch`` (None: J2000.0)."""

    name: str
    ra_deg: float
    dec_deg: float
    pm_ra_mas_yr: float | None = None
    pm_dec_mas_yr: float | None = None
    parallax_mas: float | None = None
    distance_pc: float | None = None
    epoch: datetime | None = None


@dataclass(frozen=True, slots=True)
class DetectionFact:
    """One narrowband hit reported by a search pipeline inside one scan."""

    id: int
    observation_id: int
    frequency_hz: float
    drift_hz_s: float
    snr: float
    time_offset_s: float
    bandwidth_hz: float | None = None
    beam: str | None = None


@dataclass(frozen=True, slots=True)
class ObservationFact:
    """One scan: where the telescope pointed, when, over which band, with which resolution.

    ``detections`` holds the scan's detections inside the search window the protocol asked for
    (``search_window_hz``), not necessarily every hit of the scan. ``complete`` is False while
    the scan may still receive hits: an open scan is evidence of presence, never of absence.
    ``sefd_jy`` (system-equivalent flux density, Jy) and ``threshold_snr`` (the search's
    detection threshold) say how faint a signal the scan could see, when the pipeline states them.
    """

    id: int
    site: SiteFact
    target_name: str | None
    pointing_ra_deg: float
    pointing_dec_deg: float
    start_unix_s: float
    duration_s: float
    frequency_min_hz: float
    frequency_max_hz: float
    channel_width_hz: float
    time_resolution_s: float
    on_source: bool
    beam: str | None = None
    cadence: str | None = None
    complete: bool = True
    detections: tuple[DetectionFact, ...] = ()
    sefd_jy: float | None = None
    threshold_snr: float | None = None

    @property
    def end_unix_s(self) -> float:
        """End of the scan, unix seconds."""
        return self.start_unix_s + self.duration_s


@dataclass(frozen=True, slots=True)
class ReportFact:
    """A partner site's follow-up report: searched a band for a duration, saw it or not.

    ``unix_s`` is the start of the look; a sighting's ``frequency_hz`` and ``drift_hz_s`` refer
    to the instant ``unix_s + time_offset_s`` (as a hit's refer to scan start + offset).
    """

    id: int
    site: SiteFact
    unix_s: float
    detected: bool
    frequency_hz: float | None
    drift_hz_s: float | None
    frequency_min_hz: float
    frequency_max_hz: float
    duration_s: float
    threshold_snr: float | None = None
    """Detection threshold of the partner's search (signal-to-noise ratio)."""
    sefd_jy: float | None = None
    """System-equivalent flux density of the partner's receiver (Jy)."""
    pointing_ra_deg: float | None = None
    pointing_dec_deg: float | None = None
    time_offset_s: float = 0.0

    @property
    def sighting_unix_s(self) -> float:
        """The instant a sighting's frequency and drift refer to (unix s)."""
        return self.unix_s + self.time_offset_s


@dataclass(frozen=True, slots=True)
class SignoffFact:
    """A person's sign-off (approve=True) or refusal (approve=False) for a stage."""

    stage: str
    role: str
    person: str
    unix_s: float
    approve: bool


@dataclass(frozen=True, slots=True)
class CandidateFacts:
    """Everything the protocol looks at for one candidate, as of ``now_unix_s``.

    ``observations`` holds every other scan that bears on the candidate: the same target at any
    site and time, and other pointings or beams overlapping the candidate's scans in time.
    ``manual_hold_released`` is set by a person who reviewed the current holds and lets the
    candidate continue; the service should clear it when the stage changes.
    ``overruled_checks`` names the check kinds whose automatic rejection a person overruled by
    reopening the candidate: a failure of one of them holds the candidate for a person instead
    of rejecting it again.
    """

    candidate_id: int
    target: TargetFact
    reference: DetectionFact
    reference_observation: ObservationFact
    observations: tuple[ObservationFact, ...]
    reports: tuple[ReportFact, ...]
    signoffs: tuple[SignoffFact, ...]
    now_unix_s: float
    stage: str
    state: str
    stage_entered_unix_s: float
    manual_hold_released: bool = False
    overruled_checks: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        if self.state not in CANDIDATE_STATES:
            raise ValueError(f"state: must be one of {', '.join(CANDIDATE_STATES)}")

    def all_observations(self) -> tuple[ObservationFact, ...]:
        """The reference scan followed by every other scan (duplicates of it dropped)."""
        reference_id = self.reference_observation.id
        others = tuple(o for o in self.observations if o.id != reference_id)
        return (self.reference_observation, *others)
