"""The life cycle of a follow-up request, one source for its states and allowed moves."""

from __future__ import annotations

from enum import StrEnum


class FollowUpState(StrEnum):
    """Where a request stands. ``intended`` and ``dispatched`` belong to protocol intents only."""

    INTENDED = "intended"  # recorded by the protocol, not yet turned into requests
    DISPATCHED = "dispatched"  # an intent whose requests (or notifications) were made
    DRAFTED = "drafted"  # content built, waiting for its send time
    SENT = "sent"  # delivered to the partner (webhook accepted) or offered for pull
    ACKNOWLEDGED = "acknowledged"  # the partner said it will try
    REPORTED = "reported"  # the partner's report arrived
    CLOSED = "closed"  # nothing more to do
    EXPIRED = "expired"  # the deadline passed without a report
    DECLINED = "declined"  # the partner said no
    FAILED = "failed"  # delivery gave up (dead letter; a coordinator may re-send)


S = FollowUpState
TRANSITIONS: dict[FollowUpState, frozenset[FollowUpState]] = {
    S.INTENDED: frozenset({S.DISPATCHED}),
    S.DISPATCHED: frozenset(),
    S.DRAFTED: frozenset({S.SENT, S.FAILED, S.EXPIRED, S.DECLINED, S.REPORTED}),
    S.SENT: frozenset({S.ACKNOWLEDGED, S.REPORTED, S.EXPIRED, S.DECLINED}),
    S.ACKNOWLEDGED: frozenset({S.REPORTED, S.EXPIRED, S.DECLINED}),
    S.REPORTED: frozenset({S.CLOSED, S.REPORTED}),
    S.CLOSED: frozenset(),
    S.EXPIRED: frozenset({S.REPORTED}),
    S.DECLINED: frozenset(),
    S.FAILED: frozenset({S.DRAFTED, S.EXPIRED}),
}
"""A late report is still evidence: ``expired`` and ``drafted`` may move to ``reported``."""

OPEN_STATES = frozenset({S.DRAFTED, S.SENT, S.ACKNOWLEDGED})
"""Requests still waiting for a partner's answer."""

TIMESTAMP_COLUMN = {
    S.DRAFTED: "drafted_at",
    S.SENT: "sent_at",
    S.ACKNOWLEDGED: "acknowledged_at",
    S.REPORTED: "reported_at",
    S.CLOSED: "closed_at",
    S.EXPIRED: "expired_at",
    S.DECLINED: "declined_at",
    S.FAILED: "failed_at",
}


def can_move(current: str, wanted: str) -> bool:
    """Whether the life cycle allows ``current`` -> ``wanted``."""
    return FollowUpState(wanted) in TRANSITIONS[FollowUpState(current)]
