"""Functions stay short enough to read at once: at most ``LIMIT`` lines, decorators excluded.

``LONGER`` lists the functions that are longer today, each with its current length; it may only
shrink. Split a listed function where a name would explain a part, then lower or remove its entry
(the test fails when an entry is stale, so the list cannot drift upward unnoticed). Migrations are
generated schema steps and not counted. The limit of 50 lines is common practice, no source.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

SOURCE = Path(__file__).resolve().parent.parent / "confirm_service"
LIMIT = 50
LONGER: dict[str, int] = {
    "followup/content.py:build_request_content": 107,
    "protocol/matching.py:_predict_items": 101,
    "protocol/machine.py:_advance": 96,
    "protocol/checks/doppler_consistency.py:evaluate": 94,
    "protocol/reference.py:predict_references": 85,
    "demo.py:scenario_scans": 79,
    "services/intake.py:create_candidate": 79,
    "protocol/checks/reobservation.py:evaluate": 75,
    "followup/content.py:_window_entry": 72,
    "services/followups.py:record_report": 70,
    "cli/physics.py:predict": 69,
    "protocol/checks/on_off_cadence.py:evaluate": 66,
    "api/spec.py:build_openapi": 65,
    "services/screening.py:screen_after_completion": 64,
    "synthetic.py:make_cadence": 64,
    "services/decisions.py:add_signoff": 58,
    "services/predictions.py:compute_prediction": 58,
    "protocol/machine.py:intake_decision": 56,
    "services/observations.py:create_observation": 55,
    "services/screening.py:replay_run": 55,
    "demo.py:run_demo": 54,
    "protocol/misses.py:judge": 52,
    "services/followups.py:_requests_for_intent": 52,
    "services/screening.py:judge_cadence": 52,
}


def function_lengths() -> Iterator[tuple[str, int]]:
    """``("path:name", lines)`` of every function and method outside the migrations."""
    for path in sorted(SOURCE.rglob("*.py")):
        relative = path.relative_to(SOURCE).as_posix()
        if relative.startswith("migrations/"):
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.FunctionDef | ast.AsyncFunctionDef):
                assert node.end_lineno is not None
                yield f"{relative}:{node.name}", node.end_lineno - node.lineno + 1


def test_no_function_is_longer_than_the_limit_or_its_listed_length() -> None:
    too_long = {
        name: lines
        for name, lines in function_lengths()
        if lines > max(LIMIT, LONGER.get(name, LIMIT))
    }
    assert too_long == {}, f"split these (limit {LIMIT} lines): {too_long}"


def test_the_list_of_longer_functions_only_names_what_is_still_that_long() -> None:
    lengths: dict[str, int] = {}
    for name, lines in function_lengths():
        lengths[name] = max(lines, lengths.get(name, 0))
    stale = {
        name: (listed, lengths.get(name))
        for name, listed in LONGER.items()
        if lengths.get(name, 0) != listed
    }
    assert stale == {}, f"lower or remove these entries (listed, now): {stale}"
