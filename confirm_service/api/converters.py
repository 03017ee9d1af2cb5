"""URL converters: a path segment that cannot name a stored row does not match any route (404).

An integer above the 64-bit range of the database's id columns, or text holding a NUL character,
never reaches a query.
"""

from __future__ import annotations

from typing import Any

from flask import Flask
from werkzeug.routing import IntegerConverter, UnicodeConverter, ValidationError

from confirm_service.schemas.bounds import ROW_ID_MAX


def decimal_at_most(limit: int) -> str:
    """A regular expression for the decimal integers 0..``limit`` (no sign, no leading zero)."""
    digits = str(limit)
    choices = ["0"]
    if len(digits) > 1:
        choices.append(rf"[1-9]\d{{0,{len(digits) - 2}}}")  # every shorter number
    for place, digit in enumerate(digits):  # same length: equal up to a smaller digit here
        lowest = 1 if place == 0 else 0
        if int(digit) > lowest:
            rest = len(digits) - place - 1
            tail = rf"\d{{{rest}}}" if rest else ""
            choices.append(f"{digits[:place]}[{lowest}-{int(digit) - 1}]{tail}")
    choices.append(digits)
    return "(?:" + "|".join(choices) + ")"


class RowIdConverter(IntegerConverter):
    """``<int:...>`` limited to 0..2^31-1, the range of id columns.

    The limit is in the pattern, not only in the conversion: a segment out of range then
    matches no route at all, for every method (404), instead of matching the route's other
    methods and answering 405."""

    regex = decimal_at_most(ROW_ID_MAX)

    def __init__(self, map: Any, *args: Any, **kwargs: Any) -> None:
        kwargs.setdefault("max", ROW_ID_MAX)
        super().__init__(map, *args, **kwargs)


class TextConverter(UnicodeConverter):
    """``<name>``: any segment without a NUL character."""

    def to_python(self, value: str) -> str:
        if "\x00" in value:
            raise ValidationError()
        return value


def install_converters(app: Flask) -> None:
    """Replace the default converters; call before any blueprint is registered."""
    app.url_map.converters["int"] = RowIdConverter
    app.url_map.converters["default"] = TextConverter
    app.url_map.converters["string"] = TextConverter
