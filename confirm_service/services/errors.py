"""Errors a service raises; the web edge turns each into a problem+json response."""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass
class ServiceError(Exception):
    """Base: ``status`` is the HTTP status the edge answers with."""

    detail: str
    errors: list[tuple[str, str]] = field(default_factory=list)
    status: int = 400
    title: str = "Bad request"

    def __str__(self) -> str:
        if self.errors:
            return "; ".join(f"{path}: {message}" for path, message in self.errors)
        return self.detail


class NotFound(ServiceError):
    def __init__(self, detail: str, errors: list[tuple[str, str]] | None = None) -> None:
        super().__init__(detail, errors or [], 404, "Not found")


class Conflict(ServiceError):
    def __init__(self, detail: str, errors: list[tuple[str, str]] | None = None) -> None:
        super().__init__(detail, errors or [], 409, "Conflict")


class Invalid(ServiceError):
    def __init__(self, detail: str, errors: list[tuple[str, str]] | None = None) -> None:
        super().__init__(detail, errors or [], 422, "Unprocessable content")


class TooLarge(ServiceError):
    def __init__(self, detail: str, errors: list[tuple[str, str]] | None = None) -> None:
        super().__init__(detail, errors or [], 413, "Content too large")


class Forbidden(ServiceError):
    def __init__(self, detail: str, errors: list[tuple[str, str]] | None = None) -> None:
        super().__init__(detail, errors or [], 403, "Forbidden")
