"""Pydantic v2 models of a protocol file (TOML).

Layout (every numeric key carries its unit)::

    name, version, description          strings
    interference_bands                  path of the band list, relative to the protocol file
    interference_band_action            "flag" (hold for review) or "reject"
    [intake]    min_snr, max_abs_drift_hz_s | max_abs_drift_nhz, exclude_interference_bands,
                require_on_source
    [matching]  frequency_tolerance_floor_hz, sigma_multiplier,
                reference_frequency_uncertainty_channels,
                reference_drift_uncertainty_resolutions, scan_margin_channels,
                off_source_max_abs_drift_hz_s | off_source_max_abs_drift_nhz (optional),
                off_source_margin_hz (optional)
    [screening] occupancy_span_hours, occupancy_drift_resolutions (optional)
    [[stages]]  name, description, checks, deadline_hours, on_deadline, contacts, signoffs,
                on_entry

Each entry of ``checks`` is ``{kind = "<kind>", on_fail = "reject"|"hold", reason_class = ...,
<the kind's parameters>}``; the kinds come from ``confirm_service.protocol.checks``.
Cross-key rules (reason_class with reject, deadline pairs, unique names) are checked by
``confirm_service.protocol.loader`` so that every problem of a file is reported at once.
"""

from __future__ import annotations

from typing import Annotated, Any, Literal, Union

from pydantic import Field, create_model, field_validator, model_validator

from confirm_service.protocol.checks import REGISTRY, CheckKind
from confirm_service.protocol.checks._base import (
    CheckParams,
    Identifier,
    NonEmptyStr,
    NonNegativeFloat,
    PositiveFloat,
    PositiveInt,
    StrictModel,
    drift_limit_hz_s,
    exactly_one_drift_limit,
)

ON_FAIL_VALUES = ("reject", "hold")
ON_DEADLINE_VALUES = ("escalate", "expire")


def _camel(kind: str) -> str:
    return "".join(part.capitalize() for part in kind.split("_"))


def _check_spec_model(entry: CheckKind) -> type[CheckParams]:
    """The protocol entry of one kind: its parameters plus kind, on_fail, reason_class."""
    return create_model(
        f"{_camel(entry.kind)}CheckSpec",
        __base__=entry.params_model,
        __module__=__name__,
        kind=(Literal[entry.kind], ...),  # type: ignore[valid-type]
        on_fail=(Literal["reject", "hold"], ...),
        reason_class=(Identifier | None, None),
    )


CHECK_SPEC_MODELS: dict[str, type[CheckParams]] = {
    kind: _check_spec_model(entry) for kind, entry in sorted(REGISTRY.items())
}
CheckSpec = Annotated[
    Union[tuple(CHECK_SPEC_MODELS.values())],  # noqa: UP007 -- built from the registry
    Field(discriminator="kind"),
]


class IntakeRule(StrictModel):
    """Which pipeline detections become candidates.

    The drift limit is ``max_abs_drift_hz_s`` (Hz/s) or ``max_abs_drift_nhz`` (Hz/s per GHz of
    the hit's frequency), exactly one of them.
    """

    min_snr: PositiveFloat
    max_abs_drift_hz_s: PositiveFloat | None = None
    max_abs_drift_nhz: PositiveFloat | None = None
    exclude_interference_bands: bool
    require_on_source: bool = True

    @model_validator(mode="after")
    def _one_drift_limit(self) -> IntakeRule:
        exactly_one_drift_limit(self, "max_abs_drift")
        return self

    def max_abs_drift_at_hz_s(self, frequency_hz: float) -> float:
        """The drift limit (Hz/s) for a hit at ``frequency_hz``."""
        return drift_limit_hz_s(self.max_abs_drift_hz_s, self.max_abs_drift_nhz, frequency_hz)


class MatchingParams(StrictModel):
    """How wide the predicted track is when linking detections to a candidate.

    Tolerance at time t in a scan with channel width w::

        max(frequency_tolerance_floor_hz, sigma_multiplier * sigma_f(t)) + s(t)
            + scan_margin_channels * w

    with sigma_f(t) the prediction's 1-sigma frequency uncertainty, grown from the reference's
    frequency uncertainty (reference_frequency_uncertainty_channels reference channels) and
    drift uncertainty (reference_drift_uncertainty_resolutions drift resolutions) over |t - t0|,
    and s(t) the bound on the prediction shortcut's error (``protocol.reference``: per Hz/s of
    residual drift, about 1.2 Hz one day and 11 Hz thirty days from the reference). A hit is
    linked only when its drift also agrees with the predicted drift within
    ``sigma_multiplier`` times the combined drift uncertainty (reference and scan).

    Scans away from the target (off-source scans, other beams) are searched wider: a signal
    that enters through the sidelobes need not follow the sky-fixed track, so any hit within
    ``D * dt + off_source_margin_hz`` of the scan's track counts (plus Earth's own largest drift
    over ``dt``), at any drift, with ``dt`` the time to the nearest target scan or the reference
    hit and D the largest plausible drift: ``off_source_max_abs_drift_hz_s`` or ``..._nhz``,
    else the intake limit (``protocol.matching`` applies it).
    """

    frequency_tolerance_floor_hz: PositiveFloat
    sigma_multiplier: PositiveFloat
    reference_frequency_uncertainty_channels: PositiveFloat
    reference_drift_uncertainty_resolutions: PositiveFloat
    scan_margin_channels: NonNegativeFloat
    off_source_max_abs_drift_hz_s: PositiveFloat | None = None
    off_source_max_abs_drift_nhz: PositiveFloat | None = None
    off_source_margin_hz: NonNegativeFloat = 0.0

    @model_validator(mode="after")
    def _one_off_source_limit(self) -> MatchingParams:
        exactly_one_drift_limit(self, "off_source_max_abs_drift", required=False)
        return self


class ScreeningParams(StrictModel):
    """How a completed cadence's hits are screened in bulk before any becomes a candidate.

    The thresholds, bands, zero-drift multiple and on/off counts come from ``[intake]`` and the
    protocol's own ``nonzero_drift`` and ``on_off_cadence`` checks, and the off-source search
    width from ``[matching]`` (the same rule the checks use); only what those do not say is
    here. Occupancy: a hit at
    the same topocentric frequency (matching floor plus channel margins) and drift (within
    ``occupancy_drift_resolutions`` drift resolutions) in scans of other targets at the same
    site within ``occupancy_span_hours`` is local interference; 0 hours switches it off.
    """

    occupancy_span_hours: NonNegativeFloat = 24.0
    occupancy_drift_resolutions: PositiveFloat = 2.0


class SignoffRule(StrictModel):
    """``count`` distinct persons with ``role`` must approve before the stage is left."""

    role: Identifier
    count: PositiveInt


class RequestFollowupAction(StrictModel):
    """Ask partner sites at least min_distance_km away to observe within window_hours."""

    action: Literal["request_followup"]
    min_distance_km: PositiveFloat
    window_hours: PositiveFloat
    max_sites: PositiveInt | None = None
    note: str = ""


class RequestReobservationAction(StrictModel):
    """Ask for another on-source scan at least min_gap_hours later, within window_hours."""

    action: Literal["request_reobservation"]
    min_gap_hours: PositiveFloat
    window_hours: PositiveFloat
    note: str = ""


class NotifyAction(StrictModel):
    """Tell named contacts that the candidate entered the stage."""

    action: Literal["notify"]
    contacts: list[NonEmptyStr] = Field(min_length=1)
    note: str = ""


ActionSpec = Annotated[
    RequestFollowupAction | RequestReobservationAction | NotifyAction,
    Field(discriminator="action"),
]
ACTION_KINDS = ("notify", "request_followup", "request_reobservation")


class StageModel(StrictModel):
    """One stage: the checks to pass, sign-offs to collect, a deadline, actions on entry."""

    name: Identifier
    description: NonEmptyStr
    checks: list[CheckSpec] = []
    deadline_hours: PositiveFloat | None = None
    on_deadline: Literal["escalate", "expire"] | None = None
    contacts: list[NonEmptyStr] = []
    signoffs: list[SignoffRule] = []
    on_entry: list[ActionSpec] = []

    @field_validator("signoffs", mode="before")
    @classmethod
    def _single_table_is_a_list_of_one(cls, value: Any) -> Any:
        return [value] if isinstance(value, dict) else value


class ProtocolModel(StrictModel):
    """A whole protocol file.

    ``interference_band_action`` says what a hit in the listed bands means: ``"flag"`` (the
    known_interference check is inconclusive, so a person reviews the candidate; intake still
    promotes such hits) or ``"reject"`` (the check fails; intake may refuse the hit). Files
    written before the option existed meant ``"reject"``.
    """

    name: NonEmptyStr
    version: NonEmptyStr
    description: NonEmptyStr
    interference_bands: NonEmptyStr | None = None
    interference_band_action: Literal["flag", "reject"] = "reject"
    intake: IntakeRule
    matching: MatchingParams
    screening: ScreeningParams = ScreeningParams()
    stages: list[StageModel] = Field(min_length=1)

    def off_source_max_abs_drift_hz_s(self, frequency_hz: float) -> float:
        """Largest plausible drift (Hz/s) of a signal seen away from the target."""
        matching = self.matching
        if (
            matching.off_source_max_abs_drift_hz_s is None
            and matching.off_source_max_abs_drift_nhz is None
        ):
            return self.intake.max_abs_drift_at_hz_s(frequency_hz)
        return drift_limit_hz_s(
            matching.off_source_max_abs_drift_hz_s,
            matching.off_source_max_abs_drift_nhz,
            frequency_hz,
        )

    def stage_names(self) -> tuple[str, ...]:
        """Stage names in order."""
        return tuple(stage.name for stage in self.stages)

    def stage_index(self, name: str) -> int:
        """Position of stage ``name``; KeyError if the protocol has no such stage."""
        for index, stage in enumerate(self.stages):
            if stage.name == name:
                return index
        raise KeyError(f"protocol {self.name!r} has no stage {name!r}")

    def first_stage(self) -> StageModel:
        """The stage a new candidate enters."""
        return self.stages[0]
