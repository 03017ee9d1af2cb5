"""Imports run downward only: a module imports its own package and lower layers, nothing above.

``LAYERS`` is the one statement of the order in code; DEVELOPERS.md shows the same list and a
test below keeps the two equal. Every import is counted, including those inside functions and
under ``TYPE_CHECKING``.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

PACKAGE = "confirm_service"
ROOT = Path(__file__).resolve().parent.parent
SOURCE = ROOT / PACKAGE

# Bottom to top. Each entry names top-level modules or packages of confirm_service.
LAYERS: tuple[tuple[str, ...], ...] = (
    ("timeutil", "cautions", "actor", "errors", "roles", "states", "config", "metrics"),
    ("models", "db", "schemas", "physics"),
    ("protocol",),
    ("audit",),
    ("followup",),
    ("services",),
    ("dossier",),
    ("api", "web", "scheduler", "migrations"),
    ("app",),
    ("demo", "wsgi", "serving"),
    ("synthetic",),
    ("cli",),
)

# Pure cores: no web framework, no database, no tables.
PURE = ("physics", "protocol")
PURE_FORBIDDEN = ("flask", "werkzeug", "sqlalchemy", "alembic", "psycopg", f"{PACKAGE}.models")


def layer_of(unit: str) -> int:
    for rank, layer in enumerate(LAYERS):
        if unit in layer:
            return rank
    raise KeyError(unit)


def module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def imported_modules(path: Path) -> Iterator[tuple[int, str]]:
    """(line, absolute module name) for every import statement in the file."""
    source = path.read_text(encoding="utf-8")
    yield from imports_in(source, module_name(path), path.name == "__init__.py")


def imports_in(source: str, name: str, is_package: bool) -> Iterator[tuple[int, str]]:
    """(line, absolute module name) for every import in ``source``, module ``name``."""
    package = name.split(".") if is_package else name.split(".")[:-1]
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            for alias in node.names:
                yield node.lineno, alias.name
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = ".".join(package[: len(package) - node.level + 1])
                module = f"{base}.{node.module}" if node.module else base
            else:
                module = node.module or ""
            # ``from confirm_service import x`` and ``from . import x`` import the unit x itself.
            if module in (PACKAGE, *(f"{PACKAGE}.{u}" for layer in LAYERS for u in layer)):
                for alias in node.names:
                    yield node.lineno, f"{module}.{alias.name}"
            else:
                yield node.lineno, module


def unit_of(module: str) -> str | None:
    """The top-level unit of confirm_service a module belongs to, or None for other packages."""
    parts = module.split(".")
    if parts[0] != PACKAGE or len(parts) < 2:
        return None
    return parts[1]


def source_files() -> list[Path]:
    return sorted(SOURCE.rglob("*.py"))


def upward_imports_in(modules: list[str], own: str) -> list[str]:
    """The modules of ``modules`` that ``own`` may not import (same layer or above)."""
    return [
        m
        for m in modules
        if (target := unit_of(m)) is not None
        and target != own
        and layer_of(target) >= layer_of(own)
    ]


def upward_imports() -> list[str]:
    found = []
    for path in source_files():
        own = unit_of(module_name(path))
        if own is None:  # the package's own __init__
            continue
        for line, module in imported_modules(path):
            if upward_imports_in([module], own):
                found.append(f"{path.relative_to(ROOT)}:{line}: {own} imports {module}")
    return found


def test_every_unit_has_a_layer() -> None:
    units = {unit_of(module_name(p)) for p in source_files()} - {None}
    listed = {u for layer in LAYERS for u in layer}
    assert units - listed == set(), "place the new module in LAYERS (and in DEVELOPERS.md)"


def test_imports_run_downward_only() -> None:
    assert upward_imports() == []


def test_pure_cores_import_no_framework_database_or_tables() -> None:
    found = []
    for unit in PURE:
        for path in sorted((SOURCE / unit).rglob("*.py")):
            for line, module in imported_modules(path):
                if any(module == f or module.startswith(f + ".") for f in PURE_FORBIDDEN):
                    found.append(f"{path.relative_to(ROOT)}:{line}: {module}")
    assert found == []


def render_layers() -> str:
    """The order as DEVELOPERS.md shows it: one numbered line per layer, bottom first."""
    return "\n".join(f"{n}. {', '.join(layer)}" for n, layer in enumerate(LAYERS, start=1))


def test_developers_guide_states_the_same_order() -> None:
    assert render_layers() in (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")


def test_the_walk_resolves_relative_and_package_imports() -> None:
    # An unresolved relative import would let an upward one pass unseen.
    source = "from ..services import sky\nfrom .. import web\nimport confirm_service.cli\n"
    modules = [m for _, m in imports_in(source, "confirm_service.audit.probe", False)]
    assert modules == [
        "confirm_service.services.sky",
        "confirm_service.web",
        "confirm_service.cli",
    ]
    assert len(upward_imports_in(modules, "audit")) == 3
