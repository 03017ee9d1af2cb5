"""The caution has one source, ``confirm_service.cautions``: no copy may drift from it.

README.md quotes it word for word; no module or template of the package spells it out again.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

from confirm_service import cautions
from confirm_service.services import predictions

ROOT = Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "confirm_service"
# Phrases that only the caution uses; a string literal holding one is a second copy.
PHRASES = ("post-detection", "not yet been explained", "Sun avoidance", "override any follow-up")


def plain(text: str) -> str:
    """Markdown quote and emphasis removed, white space collapsed."""
    text = re.sub(r"^> ?", "", text, flags=re.M).replace("**", "")
    return " ".join(text.split())


def string_literals(path: Path) -> list[tuple[int, str]]:
    """(line, text) of every string constant that is not a docstring."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    docstrings = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Module | ast.ClassDef | ast.FunctionDef | ast.AsyncFunctionDef):
            body = node.body
            if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
                docstrings.add(id(body[0].value))
    return [
        (node.lineno, node.value)
        for node in ast.walk(tree)
        if isinstance(node, ast.Constant)
        and isinstance(node.value, str)
        and id(node) not in docstrings
    ]


def test_readme_quotes_the_caution_word_for_word() -> None:
    readme = plain((ROOT / "README.md").read_text(encoding="utf-8"))
    assert f"Caution. {cautions.CANDIDATE_IS_NOT_A_DETECTION}" in readme


def test_no_module_or_template_spells_the_caution_out_again() -> None:
    copies = []
    for path in sorted(PACKAGE.rglob("*.py")):
        if path == PACKAGE / "cautions.py":
            continue
        for line, text in string_literals(path):
            copies += [f"{path.relative_to(ROOT)}:{line}: {p!r}" for p in PHRASES if p in text]
    for path in sorted(PACKAGE.rglob("*.html")):
        text = path.read_text(encoding="utf-8")
        copies += [f"{path.relative_to(ROOT)}: {p!r}" for p in PHRASES if p in text]
    assert copies == []


def test_prediction_notes_build_on_the_one_text() -> None:
    assert cautions.SITE_SAFETY in predictions.VISIBILITY_CAUTION
    assert cautions.CANDIDATE_IS_NOT_A_DETECTION.startswith(cautions.NOT_A_DETECTION)
