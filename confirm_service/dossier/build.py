"""Gather a candidate's dossier from the database, with inclusion proofs of every entry."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

import numpy as np
from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service import physics
from confirm_service.audit import store
from confirm_service.audit.checkpoints import (
    checkpoint_document,
    service_public_key,
    take_checkpoint,
)
from confirm_service.audit.tree_cache import ProofBuilder
from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
from confirm_service.config import Settings
from confirm_service.models import (
    AuditEntry,
    CandidateDetection,
    CheckResult,
    FollowUpReport,
    FollowUpRequest,
    ProtocolRecord,
    Site,
)
from confirm_service.protocol import default_physics_context, reference_of, target_coord_of
from confirm_service.services import facts as factbook
from confirm_service.services.candidate_views import detail, get_candidate
from confirm_service.services.protocols import protocol_of

FORMAT = "confirm-service dossier 1"
TRACK_SAMPLES = 9


def _utc(unix_s: float) -> str:
    return datetime.fromtimestamp(unix_s, UTC).isoformat()


def predicted_tracks(session: Session, candidate: Any) -> tuple[list[dict], list[dict]]:
    """Per related scan, the predicted track; per linked detection, observed vs predicted."""
    protocol = protocol_of(session, candidate)
    context = default_physics_context()
    facts = factbook.candidate_facts(
        session, candidate, protocol, datetime.now(UTC).timestamp(), context
    )
    signal = reference_of(facts, protocol.model, context)
    prediction = _Prediction(_reference_measurement(facts, signal), _target_of(facts), context)
    linked = _linked_roles(session, candidate.id)
    scans, comparisons = [], []
    for observation in facts.all_observations():
        scans.append(_scan_with_track(observation, prediction, linked))
        comparisons += _linked_comparisons(observation, prediction, linked)
    return scans, comparisons


@dataclass(frozen=True)
class _Prediction:
    """What a predicted track needs: the reference measurement, the target, the caches."""

    measurement: physics.SignalMeasurement
    target: Any
    context: Any

    def at(self, site: Any, unix_s: Any) -> Any:
        location = physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m)
        return physics.predict_signal(
            self.measurement, self.target, location, unix_s, self.context.cache
        )


def _reference_measurement(facts: Any, signal: Any) -> physics.SignalMeasurement:
    """The reference detection as a measurement at its own site."""
    site = facts.reference_observation.site
    return physics.SignalMeasurement(
        physics.site_location(site.latitude_deg, site.longitude_deg, site.elevation_m),
        signal.unix_s,
        signal.observed_frequency_hz,
        signal.observed_drift_hz_s,
        signal.frequency_uncertainty_hz,
        signal.drift_uncertainty_hz_s,
    )


def _target_of(facts: Any) -> Any:
    """The candidate's target as an astropy coordinate, with its proper motion and parallax."""
    return target_coord_of(facts.target)


def _linked_roles(session: Session, candidate_id: int) -> dict[int, str]:
    """Detection id to its role, for every detection linked to the candidate."""
    return {
        row.detection_id: row.role
        for row in session.execute(
            select(CandidateDetection).where(CandidateDetection.candidate_id == candidate_id)
        ).scalars()
    }


def _scan_with_track(
    observation: Any, prediction: _Prediction, linked: dict[int, str]
) -> dict[str, Any]:
    """One related scan with the predicted track sampled over it and the detections in it."""
    times = np.linspace(observation.start_unix_s, observation.end_unix_s, TRACK_SAMPLES)
    track = prediction.at(observation.site, times)
    return {
        "observation": observation.id,
        "site": observation.site.code,
        "on_source": observation.on_source,
        "target": observation.target_name,
        "cadence": observation.cadence,
        "start": _utc(observation.start_unix_s),
        "duration_s": observation.duration_s,
        "frequency_min_hz": observation.frequency_min_hz,
        "frequency_max_hz": observation.frequency_max_hz,
        "channel_width_hz": observation.channel_width_hz,
        "track": [
            {
                "time": _utc(t),
                "frequency_hz": float(f),
                "frequency_sigma_hz": float(s),
                "drift_hz_s": float(d),
            }
            for t, f, s, d in zip(
                times,
                track.frequency_hz,
                track.frequency_uncertainty_hz,
                track.drift_hz_s,
                strict=True,
            )
        ],
        "detections_near_track": [
            {
                "id": d.id,
                "frequency_hz": d.frequency_hz,
                "drift_hz_s": d.drift_hz_s,
                "snr": d.snr,
                "time": _utc(observation.start_unix_s + d.time_offset_s),
                "linked": d.id in linked,
            }
            for d in observation.detections
        ],
    }


def _linked_comparisons(
    observation: Any, prediction: _Prediction, linked: dict[int, str]
) -> list[dict[str, Any]]:
    """Observed against predicted frequency and drift for each linked detection of a scan."""
    comparisons = []
    for d in observation.detections:
        if d.id not in linked:
            continue
        at = observation.start_unix_s + d.time_offset_s
        predicted = prediction.at(observation.site, [at])
        comparisons.append(
            {
                "detection": d.id,
                "observation": observation.id,
                "site": observation.site.code,
                "role": linked[d.id],
                "time": _utc(at),
                "observed_frequency_hz": d.frequency_hz,
                "predicted_frequency_hz": float(predicted.frequency_hz[0]),
                "frequency_sigma_hz": float(predicted.frequency_uncertainty_hz[0]),
                "observed_drift_hz_s": d.drift_hz_s,
                "predicted_drift_hz_s": float(predicted.drift_hz_s[0]),
                "drift_sigma_hz_s": float(predicted.drift_uncertainty_hz_s[0]),
            }
        )
    return comparisons


def _entry_subjects(candidate_id: int, scans: list[dict]) -> list[str]:
    subjects = [f"candidate:{candidate_id}"]
    subjects += [f"observation:{scan['observation']}" for scan in scans]
    return subjects


def _followups(session: Session, candidate_id: int) -> dict[str, list[dict]]:
    requests = [
        {
            "id": r.id,
            "kind": r.kind,
            "stage": r.stage,
            "status": r.status,
            "payload": r.payload,
            "created_at": r.created_at.isoformat(),
            "sent_at": r.sent_at.isoformat() if r.sent_at else None,
        }
        for r in session.execute(
            select(FollowUpRequest)
            .where(FollowUpRequest.candidate_id == candidate_id)
            .order_by(FollowUpRequest.id)
        ).scalars()
    ]
    reports = [
        {
            "id": r.id,
            "site": site.code,
            "observed_at": r.observed_at.isoformat(),
            "duration_s": r.duration_s,
            "detected": r.detected,
            "frequency_hz": r.frequency_hz,
            "drift_hz_s": r.drift_hz_s,
            "frequency_min_hz": r.frequency_min_hz,
            "frequency_max_hz": r.frequency_max_hz,
            "time_offset_s": r.time_offset_s,
            "threshold_snr": r.threshold_snr,
            "sefd_jy": r.sefd_jy,
            "warnings": list(r.warnings or []),
            "notes": r.notes,
        }
        for r, site in session.execute(
            select(FollowUpReport, Site)
            .join(Site, Site.id == FollowUpReport.site_id)
            .where(FollowUpReport.candidate_id == candidate_id)
            .order_by(FollowUpReport.id)
        ).all()
    ]
    return {"requests": requests, "reports": reports}


def build_dossier(session: Session, settings: Settings, candidate_id: int) -> dict[str, Any]:
    """Everything about one candidate, with inclusion proofs against a fresh signed checkpoint.

    Takes a checkpoint (an append-only action) so that every entry is covered; call it inside
    a write transaction.
    """
    candidate = get_candidate(session, candidate_id)
    record = detail(session, candidate_id).model_dump(mode="json")
    scans, comparisons = predicted_tracks(session, candidate)
    history = _check_history(session, candidate_id)
    protocol = _protocol_record(session, candidate)
    subjects = [*_entry_subjects(candidate_id, scans), f"protocol:{protocol.name}"]
    session.flush()
    checkpoint = take_checkpoint(session, settings, f"dossier of candidate {candidate_id}")
    public_pem, key = service_public_key(settings)
    return {
        "format": FORMAT,
        "generated_at": datetime.now(UTC).isoformat(),
        "caution": CANDIDATE_IS_NOT_A_DETECTION,
        "candidate": record,
        "check_history": history,
        "scans": scans,
        "predictions": comparisons,
        "followups": _followups(session, candidate_id),
        "protocol": _protocol_section(protocol),
        "audit": {
            "checkpoint": checkpoint_document(checkpoint),
            "public_key_pem": public_pem,
            "key_id": key,
            "entries": _proven_entries(session, int(checkpoint.tree_size), subjects),
            "method": "leaf_hash = SHA-256(0x00 || leaf_input) (RFC 6962 2.1); audit_path_hex "
            "from leaf_index in a tree of checkpoint.tree_size leaves against "
            "checkpoint.root_hash_hex (RFC 9162 2.1.3.2); Ed25519 signature over "
            "checkpoint.signed_text",
        },
    }


def _check_history(session: Session, candidate_id: int) -> list[dict[str, Any]]:
    """Every recorded check result of the candidate, oldest first."""
    return [
        {
            "evaluation": c.evaluation,
            "kind": c.kind,
            "outcome": c.outcome,
            "reason": c.reason,
            "measured": c.measured,
            "expected": c.expected,
            "tolerance": c.tolerance,
            "unit": c.unit,
            "details": c.details,
            "evaluated_at": c.evaluated_at.isoformat(),
        }
        for c in session.execute(
            select(CheckResult)
            .where(CheckResult.candidate_id == candidate_id)
            .order_by(CheckResult.id)
        ).scalars()
    ]


def _protocol_record(session: Session, candidate: Any) -> ProtocolRecord:
    """The stored protocol (and band file) the candidate is governed by."""
    return session.execute(
        select(ProtocolRecord).where(
            ProtocolRecord.sha256 == candidate.protocol_sha256,
            ProtocolRecord.bands_sha256 == candidate.bands_sha256,
        )
    ).scalar_one()


def _protocol_section(protocol: ProtocolRecord) -> dict[str, Any]:
    """The protocol files as written into the dossier folder, with their hashes."""
    return {
        "name": protocol.name,
        "version": protocol.version,
        "sha256": protocol.sha256,
        "bands_sha256": protocol.bands_sha256,
        "file": "protocol.toml",
        "bands_file": "interference_bands.toml" if protocol.bands_text is not None else None,
        "text": protocol.source_text,
        "bands_text": protocol.bands_text,
    }


def _proven_entries(session: Session, size: int, subjects: list[str]) -> list[dict[str, Any]]:
    """The audit entries about ``subjects`` in a tree of ``size`` leaves, each with its
    inclusion proof (RFC 6962 audit path)."""
    builder = ProofBuilder(store.load_leaf_hashes(session, size))
    rows = session.execute(
        select(AuditEntry)
        .where(AuditEntry.seq <= size, AuditEntry.subject.in_(subjects))
        .order_by(AuditEntry.seq)
    ).scalars()
    entries = []
    for row in rows:
        stored = store.StoredEntry(
            row.seq,
            row.at,
            row.actor,
            row.role,
            row.action,
            row.subject,
            row.payload,
            row.leaf_hash,
        )
        entries.append(
            {
                "entry": stored.as_dict(),
                "leaf_input": stored.leaf_input().decode("utf-8"),
                "leaf_index": row.seq - 1,
                "audit_path_hex": [h.hex() for h in builder.path(row.seq - 1)],
            }
        )
    return entries
