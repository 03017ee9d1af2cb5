"""Registry of check kinds.

Every public module in this package is one check kind. It exposes

* ``KIND = "<kind>"`` -- the value of ``kind`` in a protocol file,
* ``Params`` -- a pydantic model (subclass of ``CheckParams``) of the kind's protocol keys,
* ``evaluate(facts, params, context) -> CheckResult``.

Adding a check kind means adding one module here; the schema and the stage machine find it.
Modules whose names start with ``_`` are helpers, not kinds.
"""

from __future__ import annotations

import importlib
import pkgutil
from collections.abc import Callable
from dataclasses import dataclass
from types import ModuleType
from typing import TYPE_CHECKING

from confirm_service.protocol.checks._base import CheckParams

if TYPE_CHECKING:  # the check modules import these at run time; the registry only names them
    from confirm_service.protocol.facts import CandidateFacts
    from confirm_service.protocol.matching import CandidateView
    from confirm_service.protocol.results import CheckResult

CheckEvaluator = Callable[["CandidateFacts", CheckParams, "CandidateView"], "CheckResult"]
"""A kind's ``evaluate(facts, params, context)``; ``params`` is that kind's own ``Params``."""

RESERVED_KEYS = frozenset({"kind", "on_fail", "reason_class"})


@dataclass(frozen=True)
class CheckKind:
    """One registered check kind."""

    kind: str
    params_model: type[CheckParams]
    evaluate: CheckEvaluator
    module: ModuleType
    doc: str


def _validated_kind(module: ModuleType) -> CheckKind:
    kind = getattr(module, "KIND", None)
    params_model = getattr(module, "Params", None)
    evaluate = getattr(module, "evaluate", None)
    if not isinstance(kind, str) or not kind:
        raise TypeError(f"{module.__name__}: KIND must be a non-empty string")
    if not (isinstance(params_model, type) and issubclass(params_model, CheckParams)):
        raise TypeError(f"{module.__name__}: Params must subclass CheckParams")
    if not callable(evaluate):
        raise TypeError(f"{module.__name__}: evaluate must be callable")
    clash = RESERVED_KEYS.intersection(params_model.model_fields)
    if clash:
        raise TypeError(f"{module.__name__}: parameter names {sorted(clash)} are reserved")
    doc = (module.__doc__ or "").strip().split("\n\n")[0]
    return CheckKind(kind, params_model, evaluate, module, doc)


def _discover() -> dict[str, CheckKind]:
    kinds: dict[str, CheckKind] = {}
    for info in sorted(pkgutil.iter_modules(__path__), key=lambda i: i.name):
        if info.name.startswith("_"):
            continue
        module = importlib.import_module(f"{__name__}.{info.name}")
        entry = _validated_kind(module)
        if entry.kind in kinds:
            raise TypeError(f"check kind {entry.kind!r} defined twice")
        kinds[entry.kind] = entry
    return kinds


REGISTRY: dict[str, CheckKind] = _discover()


def check_kinds() -> tuple[str, ...]:
    """Every registered check kind, sorted."""
    return tuple(sorted(REGISTRY))


def get_check(kind: str) -> CheckKind:
    """The registered check kind ``kind``; KeyError if unknown."""
    return REGISTRY[kind]
