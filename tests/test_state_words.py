"""A candidate's state is named through ``CandidateState``, never spelled as a plain string.

A renamed state then changes in one place (``confirm_service/states.py``) and the type checker
finds every use. The check looks at comparisons with a ``state`` attribute or key and at
``state=`` keywords; migrations keep the words they were written with.
"""

from __future__ import annotations

import ast
from pathlib import Path

from confirm_service.states import CandidateState

SOURCE = Path(__file__).resolve().parent.parent / "confirm_service"
WORDS = {state.value for state in CandidateState}


def _names_state(node: ast.AST) -> bool:
    if isinstance(node, ast.Attribute):
        return node.attr == "state"
    if isinstance(node, ast.Subscript):
        key = node.slice
        return isinstance(key, ast.Constant) and key.value == "state"
    return False


def _state_words(node: ast.AST) -> list[str]:
    """State words spelled in ``node``: a constant, or the constants of a tuple, list or set."""
    items = node.elts if isinstance(node, ast.Tuple | ast.List | ast.Set) else [node]
    return [i.value for i in items if isinstance(i, ast.Constant) and i.value in WORDS]


def spelled_states(source: str) -> list[tuple[int, str]]:
    """(line, word) of each state spelled as a string where a state is compared or set."""
    found = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Compare):
            sides = [node.left, *node.comparators]
            if any(_names_state(side) for side in sides):
                found += [(node.lineno, w) for side in sides for w in _state_words(side)]
        elif isinstance(node, ast.keyword) and node.arg == "state":
            found += [(node.value.lineno, w) for w in _state_words(node.value)]
    return found


def test_the_check_finds_spelled_states() -> None:
    source = (
        'a = c.state == "open"\n'
        'b = row["state"] in ("rejected", "withdrawn")\n'
        'C(state="open")\n'
        "d = c.state == CandidateState.OPEN\n"
        'e = scan_state == "open"\n'
    )
    assert spelled_states(source) == [
        (1, "open"),
        (2, "rejected"),
        (2, "withdrawn"),
        (3, "open"),
    ]


def test_no_module_spells_a_state() -> None:
    found = {
        f"{path.relative_to(SOURCE)}:{line}": word
        for path in sorted(SOURCE.rglob("*.py"))
        if "migrations" not in path.parts
        for line, word in spelled_states(path.read_text(encoding="utf-8"))
    }
    assert found == {}
