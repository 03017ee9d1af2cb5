"""URL converters: a path segment that cannot name a stored row does not match any route (404).

An integer above the 64-bit range of the database's id columns, or text holding a NUL character,
never reaches a query.
"""

from __future__ import annotations

from typing import Any

from flask import Flask
from werkzeug.routing import IntegerConverter, UnicodeConverter, ValidationError

from confirm_service.schemas.bounds import ROW_ID_MAX


class RowIdConverter(IntegerConverter):
    """``<int:...>`` limited to 0..2^31-1, the range of id columns."""

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
