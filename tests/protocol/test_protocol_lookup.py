"""One lookup from a protocol (loaded file or bare model) to its validated model.

``protocol.loader.model_of`` holds the rule; the stage machine and the matching code go
through it, and no other module of the package writes the lookup again.
"""

from __future__ import annotations

import ast
from pathlib import Path

from confirm_service.protocol import LoadedProtocol, machine, matching
from confirm_service.protocol.loader import model_of

PACKAGE = Path(__file__).resolve().parents[2] / "confirm_service"


def test_model_of_answers_for_a_loaded_protocol_and_for_a_bare_model(
    default_protocol: LoadedProtocol,
) -> None:
    assert model_of(default_protocol) is default_protocol.model
    assert model_of(default_protocol.model) is default_protocol.model


def test_machine_and_matching_use_the_same_lookup() -> None:
    assert machine.model_of is model_of
    assert matching.model_of is model_of


def _writes_the_lookup(node: ast.AST) -> bool:
    """``x if isinstance(x, ProtocolModel) else x.model`` (or the reverse), or
    ``getattr(x, "model", x)``."""
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id == "getattr":
        name = node.args[1] if len(node.args) == 3 else None
        return isinstance(name, ast.Constant) and name.value == "model"
    if not isinstance(node, ast.IfExp) or not isinstance(node.test, ast.Call):
        return False
    call = node.test
    return (
        isinstance(call.func, ast.Name)
        and call.func.id == "isinstance"
        and len(call.args) == 2
        and isinstance(call.args[1], ast.Name)
        and call.args[1].id == "ProtocolModel"
    )


def test_no_other_module_writes_the_lookup_again() -> None:
    found = sorted(
        str(path.relative_to(PACKAGE))
        for path in PACKAGE.rglob("*.py")
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8")))
        if _writes_the_lookup(node)
    )
    assert found == ["protocol/loader.py"]
