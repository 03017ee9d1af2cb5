"""The words every layer shares: a candidate's state and a check's outcome.

Members are ``str`` (``CandidateState.OPEN == "open"``), so they are stored, compared and written
to JSON as the plain words.
"""

from __future__ import annotations

from enum import StrEnum


class CandidateState(StrEnum):
    OPEN = "open"
    REJECTED = "rejected"
    PASSED_PROTOCOL = "passed_protocol"
    WITHDRAWN = "withdrawn"


class CheckOutcome(StrEnum):
    PASS = "pass"
    FAIL = "fail"
    PENDING = "pending"
    NOT_APPLICABLE = "not_applicable"
    INCONCLUSIVE = "inconclusive"
