"""Candidates: intake, matching and evaluation under the loaded protocol."""

from __future__ import annotations

from collections.abc import Sequence

from sqlalchemy.orm import Session

from confirm_service.models import Observation
from confirm_service.schemas.log import DetectionIn
from confirm_service.services.actor import Actor


def after_ingest(
    session: Session,
    actor: Actor,
    observation: Observation,
    rows: Sequence[DetectionIn],
    ids: list[int],
) -> list[int]:
    """Promote new detections that the pipeline flagged or the intake rule accepts."""
    return []


def after_observation(session: Session, actor: Actor, observation: Observation) -> list[int]:
    """Re-evaluate the candidates a new scan bears on."""
    return []


def promote_detection(session: Session, actor: Actor, detection_id: int, note: str | None):  # type: ignore[no-untyped-def]
    raise NotImplementedError


def withdraw(session: Session, actor: Actor, candidate_id: int, rationale: str) -> None:
    raise NotImplementedError


def add_comment(session: Session, actor: Actor, candidate_id: int, text: str):  # type: ignore[no-untyped-def]
    raise NotImplementedError
