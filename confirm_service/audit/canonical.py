"""Deterministic JSON bytes for hashing and signing.

:func:`canonical_json` follows RFC 8785 (JSON Canonicalization Scheme, JCS):

* object members sorted by the UTF-16 code units of their names (RFC 8785 section 3.2.3), so
  a name outside the Basic Multilingual Plane sorts by its surrogate pair, not its code point;
* no whitespace between tokens; output is UTF-8 without a byte order mark;
* strings escaped as ECMAScript ``JSON.stringify`` does: ``\\"``, ``\\\\``, ``\\b``, ``\\t``,
  ``\\n``, ``\\f``, ``\\r``, other control characters below U+0020 as lowercase ``\\u00xx``;
  everything else (including U+007F and non-ASCII) is written as raw UTF-8;
* numbers in the ECMAScript ``Number.prototype.toString`` layout (RFC 8785 section 3.2.2.3),
  built from the shortest round-trip digits that Python's ``repr(float)`` produces: ``4.50``
  becomes ``4.5``, ``1.0`` becomes ``1``, ``-0.0`` becomes ``0``, ``1e21`` becomes ``1e+21``,
  ``1e-7`` becomes ``1e-7`` and ``0.000001`` stays ``0.000001``.

Where this module differs from, or narrows, RFC 8785:

* Input is Python objects, not JSON text. Accepted: ``dict`` (and other mappings) with ``str``
  keys, ``list``/``tuple`` (both become arrays), ``str``, ``int``, ``float``, ``bool``, ``None``.
  Everything else is refused with :class:`TypeError`, including ``datetime``/``date`` (pass an
  ISO 8601 string instead), ``Decimal``, ``bytes``, ``set`` and non-string keys.
* Values that I-JSON (RFC 7493), which RFC 8785 requires as input, rules out are refused with
  :class:`ValueError` instead of being converted: NaN and infinities, strings holding lone
  surrogates, and integers that an IEEE 754 double cannot carry exactly. Every integer within
  +/-(2**53 - 1) is accepted; a larger one only when its digits are already the canonical text
  of the nearest double (``2**53`` yes, ``2**53 + 1`` and ``2**64`` no). Cyclic containers are
  refused with :class:`ValueError`.
* Because JCS writes integral doubles without a fraction, ``1.0`` and ``1`` canonicalise to the
  same bytes; the canonical form does not keep the int/float distinction.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Callable, Mapping
from decimal import Decimal
from typing import Any, TypeVar

__all__ = ["MAX_SAFE_INTEGER", "canonical_json", "ecmascript_number_text", "sha256_hex"]

MAX_SAFE_INTEGER = 2**53 - 1
"""Largest integer an IEEE 754 double holds exactly with its neighbours (I-JSON, RFC 7493 2.2)."""


def canonical_json(obj: Any) -> bytes:
    """Return the RFC 8785 canonical UTF-8 JSON encoding of ``obj`` (see module docstring)."""
    parts: list[str] = []
    _write_value(obj, parts, "$", set())
    text = "".join(parts)
    try:
        return text.encode("utf-8")
    except UnicodeEncodeError as exc:
        raise ValueError(
            "string holds a lone surrogate, which I-JSON (RFC 7493) and RFC 8785 refuse"
        ) from exc


def sha256_hex(data: bytes) -> str:
    """Lowercase hex SHA-256 digest of ``data``."""
    return hashlib.sha256(data).hexdigest()


_Container = TypeVar("_Container", Mapping[Any, Any], list[Any] | tuple[Any, ...])


def _write_value(value: Any, parts: list[str], path: str, open_containers: set[int]) -> None:
    if value is None:
        parts.append("null")
    elif value is True:
        parts.append("true")
    elif value is False:
        parts.append("false")
    elif isinstance(value, str):
        parts.append(_string_literal(value))
    elif isinstance(value, int):
        parts.append(_integer_literal(value, path))
    elif isinstance(value, float):
        parts.append(_float_literal(value, path))
    elif isinstance(value, Mapping):
        _write_container(value, parts, path, open_containers, _write_object)
    elif isinstance(value, list | tuple):
        _write_container(value, parts, path, open_containers, _write_array)
    else:
        raise TypeError(
            f"{path}: {type(value).__name__} is not a JSON type; convert it first "
            "(datetimes to ISO 8601 strings, Decimal to float or string, bytes to hex or base64)"
        )


def _write_container(
    value: _Container,
    parts: list[str],
    path: str,
    open_containers: set[int],
    writer: Callable[[_Container, list[str], str, set[int]], None],
) -> None:
    marker = id(value)
    if marker in open_containers:
        raise ValueError(f"{path}: container refers to itself")
    open_containers.add(marker)
    writer(value, parts, path, open_containers)
    open_containers.discard(marker)


def _write_object(
    mapping: Mapping[Any, Any], parts: list[str], path: str, open_containers: set[int]
) -> None:
    for key in mapping:
        if not isinstance(key, str):
            raise TypeError(f"{path}: object key {key!r} is {type(key).__name__}, not str")
    parts.append("{")
    for position, key in enumerate(sorted(mapping, key=_utf16_sort_key)):
        if position:
            parts.append(",")
        parts.append(_string_literal(key))
        parts.append(":")
        _write_value(mapping[key], parts, f"{path}.{key}", open_containers)
    parts.append("}")


def _write_array(
    items: list[Any] | tuple[Any, ...], parts: list[str], path: str, open_containers: set[int]
) -> None:
    parts.append("[")
    for position, item in enumerate(items):
        if position:
            parts.append(",")
        _write_value(item, parts, f"{path}[{position}]", open_containers)
    parts.append("]")


def _utf16_sort_key(name: str) -> bytes:
    """Big-endian UTF-16 bytes compare in the same order as UTF-16 code units (RFC 8785 3.2.3)."""
    return name.encode("utf-16-be", "surrogatepass")


def _string_literal(text: str) -> str:
    # With ensure_ascii=False the standard library escapes exactly the characters that
    # ECMAScript JSON.stringify escapes, with the same short forms and lowercase hex.
    return json.dumps(str(text), ensure_ascii=False)


def _integer_literal(number: int, path: str) -> str:
    digits = int.__repr__(int(number))
    if abs(number) <= MAX_SAFE_INTEGER:
        return digits
    # Beyond 2**53 an RFC 8785 reader sees the nearest double. Accept the integer only if its
    # own digits are already the canonical text of that double, so nothing changes silently.
    try:
        canonical = ecmascript_number_text(float(number))
    except OverflowError:
        canonical = ""
    if canonical != digits:
        raise ValueError(
            f"{path}: integer {number} is not exactly representable in canonical JSON "
            "(RFC 8785 numbers are IEEE 754 doubles); store it as a string"
        )
    return digits


def _float_literal(number: float, path: str) -> str:
    number = float(number)
    if not math.isfinite(number):
        raise ValueError(f"{path}: {number!r} is not allowed in JSON (RFC 8785 section 3.2.2.3)")
    return ecmascript_number_text(number)


def ecmascript_number_text(number: float) -> str:
    """Format a finite double as ECMAScript ``Number.prototype.toString`` does (ECMA-262).

    The digits are the shortest that round-trip (Python's ``repr``); only the layout follows
    ECMAScript: plain notation for decimal exponents in (-7, 21], exponent notation otherwise.
    """
    if not math.isfinite(number):
        raise ValueError(f"{number!r} has no JSON form")
    if number == 0.0:
        return "0"
    if number < 0.0:
        return "-" + ecmascript_number_text(-number)
    digits, exponent = _shortest_digits(number)
    k = len(digits)
    n = exponent + k  # value = 0.d1d2...dk * 10**n
    if k <= n <= 21:
        return digits + "0" * (n - k)
    if 0 < n <= 21:
        return digits[:n] + "." + digits[n:]
    if -6 < n <= 0:
        return "0." + "0" * (-n) + digits
    exponent_text = f"e{'+' if n - 1 >= 0 else '-'}{abs(n - 1)}"
    if k == 1:
        return digits + exponent_text
    return digits[0] + "." + digits[1:] + exponent_text


def _shortest_digits(number: float) -> tuple[str, int]:
    """Shortest round-trip significant digits and exponent: ``number == int(digits) * 10**exp``."""
    decimal_tuple = Decimal(repr(number)).as_tuple()
    digit_text = "".join(str(d) for d in decimal_tuple.digits)
    exponent = int(decimal_tuple.exponent)
    stripped = digit_text.rstrip("0")
    exponent += len(digit_text) - len(stripped)
    return stripped.lstrip("0"), exponent
