"""The sign-off rule, in one place: who has approved a stage, and whether that is enough.

A stage's rule ``{role, count}`` is met when ``count`` distinct persons holding ``role`` have,
as their latest sign-off for that stage given at or after the stage was entered, approved it.
A person whose latest sign-off refuses is listed in ``declined_by`` (the stage machine holds
the candidate for that). The service, the stage machine and the web pages all call
``signoff_statuses``.
"""

from __future__ import annotations

from collections.abc import Sequence

from confirm_service.protocol.facts import SignoffFact
from confirm_service.protocol.results import SignoffStatus
from confirm_service.protocol.schema import StageModel


def signoff_statuses(
    stage: StageModel, signoffs: Sequence[SignoffFact], entered_unix_s: float
) -> tuple[SignoffStatus, ...]:
    """Per rule of ``stage``: distinct persons of the role whose latest sign-off approves."""
    statuses = []
    for rule in stage.signoffs:
        latest: dict[str, SignoffFact] = {}
        relevant = [
            s
            for s in signoffs
            if s.stage == stage.name and s.role == rule.role and s.unix_s >= entered_unix_s
        ]
        for signoff in sorted(relevant, key=lambda s: (s.unix_s, s.approve is False, s.person)):
            latest[signoff.person] = signoff
        approved = tuple(sorted(p for p, s in latest.items() if s.approve))
        declined = tuple(sorted(p for p, s in latest.items() if not s.approve))
        statuses.append(SignoffStatus(rule.role, rule.count, approved, declined))
    return tuple(statuses)


def signoffs_met(statuses: Sequence[SignoffStatus]) -> bool:
    """True when every rule has enough approvals."""
    return all(status.met for status in statuses)
