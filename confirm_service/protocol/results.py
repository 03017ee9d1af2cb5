"""Results of the protocol core: check results, transitions, actions, evaluations.

Everything here is a frozen dataclass of plain values (str, float, int, bool, tuples and dicts
of those), so two evaluations of the same facts compare equal and serialise to the same JSON.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any, Literal

from confirm_service.states import CheckOutcome

PASS = CheckOutcome.PASS
FAIL = CheckOutcome.FAIL
PENDING = CheckOutcome.PENDING
NOT_APPLICABLE = CheckOutcome.NOT_APPLICABLE
INCONCLUSIVE = CheckOutcome.INCONCLUSIVE
"""The data exist but cannot decide (partial coverage, ambiguous links, a flagged band): the
stage machine holds the candidate for a person instead of deciding automatically."""
OUTCOMES = (PASS, FAIL, PENDING, NOT_APPLICABLE, INCONCLUSIVE)
Outcome = Literal["pass", "fail", "pending", "not_applicable", "inconclusive"]

ACTION_ESCALATE = "escalate"
REASON_CLASS_EXPIRED = "expired"


@dataclass(frozen=True, slots=True)
class CheckResult:
    """The outcome of one check for one candidate.

    ``reason`` is one sentence a coordinator can read. ``measured``, ``expected`` and
    ``tolerance`` share ``unit`` where they apply. ``stage``, ``on_fail`` and ``reason_class``
    are filled in by the stage machine from the protocol entry the check came from.
    """

    kind: str
    outcome: str
    reason: str
    measured: float | None = None
    expected: float | None = None
    tolerance: float | None = None
    unit: str | None = None
    details: dict[str, Any] = field(default_factory=dict)
    stage: str = ""
    on_fail: str | None = None
    reason_class: str | None = None

    def as_dict(self) -> dict[str, Any]:
        """A JSON-ready dictionary."""
        return asdict(self)

    def with_origin(self, stage: str, on_fail: str, reason_class: str | None) -> CheckResult:
        """The same result tagged with the protocol entry it came from."""
        return CheckResult(
            self.kind,
            self.outcome,
            self.reason,
            self.measured,
            self.expected,
            self.tolerance,
            self.unit,
            self.details,
            stage,
            on_fail,
            reason_class,
        )


@dataclass(frozen=True, slots=True)
class Transition:
    """A change of stage and/or state decided by one evaluation, at ``unix_s``."""

    from_stage: str
    to_stage: str
    from_state: str
    to_state: str
    reason: str
    reason_class: str | None = None
    unix_s: float = 0.0

    def as_dict(self) -> dict[str, Any]:
        """A JSON-ready dictionary."""
        return asdict(self)


@dataclass(frozen=True, slots=True)
class Action:
    """An intent for the service to record (delivery happens elsewhere, later).

    ``key`` is an idempotency key: the same candidate, stage entry and action always give the
    same key, so the service records each intent once however often it evaluates.
    """

    kind: str
    stage: str
    params: dict[str, Any]
    key: str

    def as_dict(self) -> dict[str, Any]:
        """A JSON-ready dictionary."""
        return asdict(self)


@dataclass(frozen=True, slots=True)
class SignoffStatus:
    """Sign-offs a stage needs from one role and who has given them."""

    role: str
    needed: int
    approved_by: tuple[str, ...]
    declined_by: tuple[str, ...]

    @property
    def met(self) -> bool:
        """True when enough distinct persons approved."""
        return len(self.approved_by) >= self.needed


@dataclass(frozen=True, slots=True)
class Evaluation:
    """What the protocol concludes about one candidate from its facts.

    A candidate in state ``passed_protocol`` passed every stage of the protocol. That is not a
    detection: it is a candidate for the people responsible to examine, and any public
    statement follows the institution's policy and the internationally agreed post-detection
    principles.
    """

    results: tuple[CheckResult, ...]
    state: str
    stage: str
    transitions: tuple[Transition, ...]
    actions: tuple[Action, ...]
    held: bool
    hold_reason: str | None
    matched: dict[int, tuple[int, ...]]
    reason_class: str | None = None
    stage_entered_unix_s: float = 0.0
    deadline_unix_s: float | None = None
    signoffs: tuple[SignoffStatus, ...] = ()

    def as_dict(self) -> dict[str, Any]:
        """A JSON-ready dictionary (observation ids become strings in ``matched``)."""
        data = asdict(self)
        data["matched"] = {str(k): list(v) for k, v in self.matched.items()}
        return data

    def result_for(self, kind: str, stage: str | None = None) -> CheckResult | None:
        """The result of the first check of ``kind`` (in ``stage`` if given), or None."""
        for result in self.results:
            if result.kind == kind and (stage is None or result.stage == stage):
                return result
        return None


@dataclass(frozen=True, slots=True)
class IntakeDecision:
    """Whether a pipeline detection becomes a candidate, and why (one sentence)."""

    promote: bool
    reason: str
    reason_class: str | None = None
