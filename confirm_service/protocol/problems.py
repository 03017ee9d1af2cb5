"""Problems found in protocol and band files, with key paths like ``stages[2].checks[0].kind``.

Every problem of a file is collected, not just the first: TOML syntax (with the key path of the
offending line), pydantic type and range errors, and the cross-key rules of the loader.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass
from typing import Any

from pydantic import ValidationError
from pydantic_core import ErrorDetails

SYNTAX_KEY_PATH_FALLBACK = "(file)"
_DISCRIMINATOR_KEYS = ("kind", "action")


@dataclass(frozen=True, slots=True)
class ProtocolProblem:
    """One problem: where (``key_path``, in ``file`` if not the protocol itself) and what."""

    key_path: str
    message: str
    file: str = ""

    def __str__(self) -> str:
        where = f"{self.file}: " if self.file else ""
        return f"{where}{self.key_path}: {self.message}"


class ProtocolError(ValueError):
    """A protocol or band file is invalid; ``problems`` lists every problem found."""

    def __init__(self, problems: list[ProtocolProblem], source: str = "") -> None:
        self.problems = list(problems)
        self.source = source
        head = f"{source}: " if source else ""
        lines = "\n".join(f"  {p}" for p in self.problems)
        super().__init__(f"{head}{len(self.problems)} problem(s)\n{lines}")


def join_path(parent: str, key: str | int) -> str:
    """``parent`` extended by a key (``a.b``) or an index (``a[2]``)."""
    if isinstance(key, int):
        return f"{parent}[{key}]"
    return f"{parent}.{key}" if parent else key


def parse_toml(text: str) -> tuple[dict[str, Any] | None, list[ProtocolProblem]]:
    """Parse TOML text; on a syntax error return the problem with the key path of its line."""
    try:
        return tomllib.loads(text), []
    except tomllib.TOMLDecodeError as error:
        return None, [_syntax_problem(text, error)]


_ARRAY_HEADER = re.compile(r"^\s*\[\[\s*([A-Za-z0-9_.\-]+)\s*\]\]")
_TABLE_HEADER = re.compile(r"^\s*\[\s*([A-Za-z0-9_.\-]+)\s*\]")
_KEY_LINE = re.compile(r"^\s*([A-Za-z0-9_\-]+)\s*=")
_LINE_NUMBER = re.compile(r"line (\d+)")


def _syntax_problem(text: str, error: tomllib.TOMLDecodeError) -> ProtocolProblem:
    match = _LINE_NUMBER.search(str(error))
    if match is None:
        return ProtocolProblem(SYNTAX_KEY_PATH_FALLBACK, f"TOML syntax error: {error}")
    line_number = int(match.group(1))
    path = _key_path_at_line(text.splitlines(), line_number)
    return ProtocolProblem(path or SYNTAX_KEY_PATH_FALLBACK, f"TOML syntax error: {error}")


def _key_path_at_line(lines: list[str], line_number: int) -> str:
    """Best-effort key path of the line ``line_number`` (1-based) from the table headers above."""
    counters: dict[str, int] = {}
    table_path = ""
    for line in lines[: line_number - 1]:
        array = _ARRAY_HEADER.match(line)
        if array:
            table_path = _array_table_path(array.group(1), counters)
            continue
        table = _TABLE_HEADER.match(line)
        if table:
            table_path = _plain_table_path(table.group(1), counters)
    current = lines[line_number - 1] if 0 < line_number <= len(lines) else ""
    key = _KEY_LINE.match(current)
    if key:
        return join_path(table_path, key.group(1))
    array = _ARRAY_HEADER.match(current) or _TABLE_HEADER.match(current)
    if array:
        return array.group(1)
    return table_path


def _array_table_path(dotted: str, counters: dict[str, int]) -> str:
    parts = dotted.split(".")
    path = _indexed_prefix(parts[:-1], counters)
    full = ".".join(parts)
    parent_instance = path
    counter_key = f"{parent_instance}|{full}"
    counters[counter_key] = counters.get(counter_key, -1) + 1
    return join_path(join_path(path, parts[-1]), counters[counter_key])


def _plain_table_path(dotted: str, counters: dict[str, int]) -> str:
    parts = dotted.split(".")
    return join_path(_indexed_prefix(parts[:-1], counters), parts[-1])


def _indexed_prefix(parts: list[str], counters: dict[str, int]) -> str:
    """Path of enclosing tables, each array table at its latest index."""
    path = ""
    dotted = ""
    for part in parts:
        dotted = f"{dotted}.{part}" if dotted else part
        index = counters.get(f"{path}|{dotted}")
        path = join_path(path, part)
        if index is not None:
            path = join_path(path, index)
    return path


_PATH_PART = re.compile(r"([^.\[\]]+)|\[(\d+)\]")


def document_order(
    problems: list[ProtocolProblem], raw: Any, file: str = ""
) -> list[ProtocolProblem]:
    """Problems of ``file`` sorted by where their keys appear in the raw data (stable)."""

    def position(problem: ProtocolProblem) -> tuple[int, ...]:
        node = raw
        out = []
        for key, index in _PATH_PART.findall(problem.key_path):
            if index:
                out.append(int(index))
                node = _child(node, int(index))
            elif isinstance(node, dict):
                keys = list(node)
                out.append(keys.index(key) if key in keys else len(keys))
                node = node.get(key)
            else:
                out.append(0)
        return tuple(out)

    mine = [p for p in problems if p.file == file]
    others = [p for p in problems if p.file != file]
    return sorted(mine, key=position) + others


def problems_from_validation_error(
    error: ValidationError, raw: Any, file: str = ""
) -> list[ProtocolProblem]:
    """Translate pydantic errors into key paths of the raw TOML data and plain messages."""
    problems = []
    for item in error.errors(include_url=False):
        path, leaf_missing_key = _key_path(item["loc"], raw, item["type"])
        problems.append(ProtocolProblem(path, _message(item, leaf_missing_key), file))
    return problems


def _key_path(loc: tuple[Any, ...], raw: Any, error_type: str) -> tuple[str, bool]:
    """Walk ``loc`` through ``raw``, dropping discriminator tags and single-table wrapping."""
    path = ""
    node = raw
    for element in loc:
        if isinstance(node, dict) and _is_discriminator_tag(node, element):
            continue
        if isinstance(element, int) and isinstance(node, dict):
            continue  # a single table accepted where a list of tables is allowed
        path = join_path(path, element)
        node = _child(node, element)
    if error_type == "union_tag_not_found":
        return join_path(path, _missing_discriminator(loc, raw)), True
    if error_type == "union_tag_invalid":
        return join_path(path, _present_discriminator(node)), False
    return path, False


def _is_discriminator_tag(node: dict[str, Any], element: Any) -> bool:
    if not isinstance(element, str) or element in node:
        return False
    return any(node.get(key) == element for key in _DISCRIMINATOR_KEYS)


def _child(node: Any, element: Any) -> Any:
    if isinstance(node, dict):
        return node.get(element)
    if isinstance(node, list) and isinstance(element, int) and 0 <= element < len(node):
        return node[element]
    return None


def _present_discriminator(node: Any) -> str:
    if isinstance(node, dict):
        for key in _DISCRIMINATOR_KEYS:
            if key in node:
                return key
    return "kind"


def _missing_discriminator(loc: tuple[Any, ...], raw: Any) -> str:
    containers = [element for element in loc if isinstance(element, str)]
    return "action" if containers and containers[-1] == "on_entry" else "kind"


def _message(item: ErrorDetails, missing_tag: bool) -> str:
    error_type = item["type"]
    ctx = item.get("ctx") or {}
    if missing_tag or error_type == "missing":
        return "required key is missing"
    if error_type == "union_tag_invalid":
        return f"unknown value {ctx.get('tag')!r}; known: {ctx.get('expected_tags')}"
    simple = _SIMPLE_MESSAGES.get(error_type)
    if simple:
        return simple
    bound = _BOUND_MESSAGES.get(error_type)
    if bound:
        symbol, key = bound
        return f"must be {symbol} {_number(ctx.get(key))}"
    if error_type == "literal_error":
        return f"must be one of {ctx.get('expected')}"
    if error_type == "string_pattern_mismatch":
        return "must be lower-case letters, digits and '_', starting with a letter"
    if error_type == "too_short":
        return f"must have at least {ctx.get('min_length')} item(s)"
    if error_type == "string_too_short":
        return "must not be empty"
    message = str(item.get("msg", "invalid value"))
    return message.removeprefix("Value error, ")


def _number(value: Any) -> str:
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


_SIMPLE_MESSAGES = {
    "extra_forbidden": "unknown key",
    "float_type": "must be a number",
    "int_type": "must be an integer",
    "bool_type": "must be true or false",
    "string_type": "must be a string",
    "list_type": "must be a list",
    "dict_type": "must be a table",
    "model_type": "must be a table",
    "model_attributes_type": "must be a table",
    "finite_number": "must be a finite number",
}
_BOUND_MESSAGES = {
    "greater_than": (">", "gt"),
    "greater_than_equal": (">=", "ge"),
    "less_than": ("<", "lt"),
    "less_than_equal": ("<=", "le"),
}
