"""Rows to response models."""

from __future__ import annotations

from datetime import timedelta
from typing import Any

from confirm_service.models import Detection, Observation, Site, Target
from confirm_service.schemas.log import DetectionOut, ObservationOut, SiteOut, TargetOut


def site_out(site: Site) -> dict:
    return SiteOut.model_validate(site).model_dump(mode="json")


def target_out(target: Target) -> dict:
    return TargetOut.model_validate(target).model_dump(mode="json")


def detection_out(detection: Detection) -> dict:
    return DetectionOut.model_validate(detection).model_dump(mode="json")


def observation_model(observation: Observation, **extra: Any) -> ObservationOut:
    return ObservationOut(
        id=observation.id,
        site=observation.site.code,
        target=observation.target.name if observation.target else None,
        pointing_ra_deg=observation.pointing_ra_deg,
        pointing_dec_deg=observation.pointing_dec_deg,
        start=observation.start,
        end=observation.start + timedelta(seconds=observation.duration_s),
        duration_s=observation.duration_s,
        frequency_min_hz=observation.frequency_min_hz,
        frequency_max_hz=observation.frequency_max_hz,
        channel_width_hz=observation.channel_width_hz,
        time_resolution_s=observation.time_resolution_s,
        on_source=observation.on_source,
        beam=observation.beam,
        cadence=observation.cadence,
        pipeline_run=observation.pipeline_run,
        sefd_jy=observation.sefd_jy,
        threshold_snr=observation.threshold_snr,
        detection_count=observation.detection_count,
        created_at=observation.created_at,
        complete=observation.completed_at is not None,
        completed_at=observation.completed_at,
        completed_by=observation.completed_by,
        **extra,
    )


def observation_out(observation: Observation) -> dict:
    return observation_model(observation).model_dump(mode="json", exclude_none=False)
