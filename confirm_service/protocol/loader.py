"""Load and validate protocol files (TOML read with tomllib, checked with pydantic).

``validate_protocol_file`` reports every problem with its key path
(``stages[2].checks[0].tolerance_hz: must be > 0``); ``load_protocol`` raises ProtocolError
carrying those problems, or returns the validated protocol with its interference bands.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from confirm_service.protocol.bands import (
    BandSet,
    InterferenceBand,
    load_interference_bands,
    validate_interference_band_file,
)
from confirm_service.protocol.problems import (
    ProtocolError,
    ProtocolProblem,
    document_order,
    parse_toml,
    problems_from_validation_error,
)
from confirm_service.protocol.results import REASON_CLASS_EXPIRED
from confirm_service.protocol.schema import ProtocolModel

BAND_KEY = "interference_bands"


@dataclass(frozen=True)
class LoadedProtocol:
    """A validated protocol, its exact source text and hashes, and its interference bands.

    ``content_sha256`` hashes the protocol file's bytes; ``bands_sha256`` the band file's
    (empty when the protocol names none). Record both: either file changes the outcome.
    """

    name: str
    version: str
    content_sha256: str
    source_text: str
    model: ProtocolModel
    path: Path | None = None
    bands_path: Path | None = None
    bands_sha256: str = ""
    bands: tuple[InterferenceBand, ...] = ()
    band_set: BandSet = field(default_factory=lambda: BandSet(()), repr=False, compare=False)


ProtocolLike = LoadedProtocol | ProtocolModel
"""What evaluation accepts: a loaded protocol file, or a validated model on its own."""


def model_of(protocol: ProtocolLike) -> ProtocolModel:
    """The validated model of a loaded protocol, or the model itself: the one lookup."""
    return protocol if isinstance(protocol, ProtocolModel) else protocol.model


def validate_protocol_file(path: str | Path) -> list[ProtocolProblem]:
    """Every problem of the protocol file at ``path`` and of its band file (empty: valid)."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as error:
        return [ProtocolProblem("(file)", f"cannot read protocol file: {error.strerror}")]
    return validate_protocol_text(text, base_dir=path.parent)


def validate_protocol_text(text: str, base_dir: str | Path | None = None) -> list[ProtocolProblem]:
    """Every problem of protocol TOML ``text``; band paths resolve against ``base_dir``."""
    raw, problems = parse_toml(text)
    if raw is None:
        return problems
    problems = document_order(_schema_problems(raw) + _cross_key_problems(raw), raw)
    problems += _band_file_problems(raw, None if base_dir is None else Path(base_dir))
    return _unique(problems)


def load_protocol(path: str | Path) -> LoadedProtocol:
    """The validated protocol at ``path`` with its bands; ProtocolError listing every problem."""
    path = Path(path)
    problems = validate_protocol_file(path)
    if problems:
        raise ProtocolError(problems, str(path))
    return _loaded(path.read_bytes(), path)


def load_protocol_text(text: str, base_dir: str | Path) -> LoadedProtocol:
    """Like ``load_protocol`` for TOML text whose band path is relative to ``base_dir``."""
    problems = validate_protocol_text(text, base_dir)
    if problems:
        raise ProtocolError(problems)
    return _loaded(text.encode("utf-8"), None, Path(base_dir))


def _loaded(data: bytes, path: Path | None, base_dir: Path | None = None) -> LoadedProtocol:
    text = data.decode("utf-8")
    raw, _ = parse_toml(text)
    model = ProtocolModel.model_validate(raw)
    base = path.parent if path is not None else base_dir
    bands_path = None
    if model.interference_bands is not None:
        if base is None:
            raise ValueError("a protocol that names a band file needs a path or a base folder")
        bands_path = base / model.interference_bands
    bands: tuple[InterferenceBand, ...] = ()
    bands_sha256 = ""
    if bands_path is not None:
        bands = tuple(load_interference_bands(bands_path))
        bands_sha256 = hashlib.sha256(bands_path.read_bytes()).hexdigest()
    return LoadedProtocol(
        name=model.name,
        version=model.version,
        content_sha256=hashlib.sha256(data).hexdigest(),
        source_text=text,
        model=model,
        path=path,
        bands_path=bands_path,
        bands_sha256=bands_sha256,
        bands=bands,
        band_set=BandSet(bands),
    )


def _schema_problems(raw: dict[str, Any]) -> list[ProtocolProblem]:
    try:
        ProtocolModel.model_validate(raw)
    except ValidationError as error:
        return problems_from_validation_error(error, raw)
    return []


def _unique(problems: list[ProtocolProblem]) -> list[ProtocolProblem]:
    seen: set[ProtocolProblem] = set()
    kept = []
    for problem in problems:
        if problem not in seen:
            seen.add(problem)
            kept.append(problem)
    return kept


def _band_file_problems(raw: dict[str, Any], base_dir: Path | None) -> list[ProtocolProblem]:
    relative = raw.get(BAND_KEY)
    if not isinstance(relative, str) or not relative:
        return []
    if base_dir is None:
        return [ProtocolProblem(BAND_KEY, "cannot resolve a relative path without a directory")]
    band_path = base_dir / relative
    if not band_path.is_file():
        return [ProtocolProblem(BAND_KEY, f"band file not found: {band_path}")]
    return validate_interference_band_file(band_path)


def _cross_key_problems(raw: dict[str, Any]) -> list[ProtocolProblem]:
    """Rules across keys, checked on the raw data so they are reported with type errors."""
    problems: list[ProtocolProblem] = []
    has_bands = isinstance(raw.get(BAND_KEY), str)
    intake = raw.get("intake")
    excludes = isinstance(intake, dict) and intake.get("exclude_interference_bands") is True
    if excludes and not has_bands:
        problems.append(
            ProtocolProblem(
                "intake.exclude_interference_bands", f"needs a top-level {BAND_KEY} file"
            )
        )
    stages = raw.get("stages")
    if not isinstance(stages, list):
        return problems
    problems += _duplicate_stage_names(stages)
    for index, stage in enumerate(stages):
        if isinstance(stage, dict):
            problems += _stage_problems(f"stages[{index}]", stage, has_bands)
    return problems


def _duplicate_stage_names(stages: list[Any]) -> list[ProtocolProblem]:
    problems = []
    first_index: dict[str, int] = {}
    for index, stage in enumerate(stages):
        name = stage.get("name") if isinstance(stage, dict) else None
        if not isinstance(name, str):
            continue
        if name in first_index:
            problems.append(
                ProtocolProblem(
                    f"stages[{index}].name",
                    f"duplicate stage name {name!r} (also stages[{first_index[name]}].name)",
                )
            )
        else:
            first_index[name] = index
    return problems


def _stage_problems(path: str, stage: dict[str, Any], has_bands: bool) -> list[ProtocolProblem]:
    problems = _deadline_problems(path, stage)
    checks = stage.get("checks")
    if isinstance(checks, list):
        problems += _check_list_problems(path, checks, has_bands)
    problems += _signoff_role_problems(path, stage.get("signoffs"))
    return problems


def _deadline_problems(path: str, stage: dict[str, Any]) -> list[ProtocolProblem]:
    problems = []
    has_deadline = "deadline_hours" in stage
    on_deadline = stage.get("on_deadline")
    if has_deadline and "on_deadline" not in stage:
        problems.append(
            ProtocolProblem(f"{path}.on_deadline", "required when deadline_hours is set")
        )
    if "on_deadline" in stage and not has_deadline:
        problems.append(
            ProtocolProblem(f"{path}.deadline_hours", "required when on_deadline is set")
        )
    contacts = stage.get("contacts")
    if on_deadline == "escalate" and not contacts:
        problems.append(
            ProtocolProblem(f"{path}.contacts", 'at least one contact for on_deadline = "escalate"')
        )
    if contacts and on_deadline != "escalate" and "on_deadline" in stage:
        problems.append(
            ProtocolProblem(f"{path}.contacts", 'only used with on_deadline = "escalate"')
        )
    return problems


def _check_list_problems(path: str, checks: list[Any], has_bands: bool) -> list[ProtocolProblem]:
    problems = []
    seen_kinds: dict[str, int] = {}
    for index, check in enumerate(checks):
        if not isinstance(check, dict):
            continue
        check_path = f"{path}.checks[{index}]"
        kind = check.get("kind")
        if isinstance(kind, str):
            if kind in seen_kinds:
                problems.append(
                    ProtocolProblem(
                        f"{check_path}.kind",
                        f"check kind {kind!r} appears twice in this stage "
                        f"(also {path}.checks[{seen_kinds[kind]}])",
                    )
                )
            seen_kinds.setdefault(kind, index)
            if kind == "known_interference" and not has_bands:
                problems.append(
                    ProtocolProblem(f"{check_path}.kind", f"needs a top-level {BAND_KEY} file")
                )
        if check.get("on_fail") == "reject" and "reason_class" not in check:
            problems.append(
                ProtocolProblem(f"{check_path}.reason_class", 'required when on_fail = "reject"')
            )
        if check.get("reason_class") == REASON_CLASS_EXPIRED:
            problems.append(
                ProtocolProblem(
                    f"{check_path}.reason_class",
                    f"{REASON_CLASS_EXPIRED!r} is reserved for expired deadlines",
                )
            )
    return problems


def _signoff_role_problems(path: str, signoffs: Any) -> list[ProtocolProblem]:
    if isinstance(signoffs, dict) or not isinstance(signoffs, list):
        return []
    problems = []
    seen: set[str] = set()
    for index, rule in enumerate(signoffs):
        role = rule.get("role") if isinstance(rule, dict) else None
        if isinstance(role, str):
            if role in seen:
                problems.append(
                    ProtocolProblem(f"{path}.signoffs[{index}].role", f"role {role!r} listed twice")
                )
            seen.add(role)
    return problems
