"""Errors a service raises; the web edge turns each into a problem+json response.

Each kind differs only in its HTTP ``status`` and ``title``, held as class attributes; the
constructor is shared.
"""

from __future__ import annotations


class ServiceError(Exception):
    """Base: ``status`` is the HTTP status the edge answers with, ``errors`` names each field."""

    status: int = 400
    title: str = "Bad request"

    def __init__(
        self,
        detail: str,
        errors: list[tuple[str, str]] | None = None,
        status: int | None = None,
        title: str | None = None,
    ) -> None:
        super().__init__(detail)
        self.detail = detail
        self.errors: list[tuple[str, str]] = list(errors or [])
        if status is not None:
            self.status = status
        if title is not None:
            self.title = title

    def __str__(self) -> str:
        if self.errors:
            return "; ".join(f"{path}: {message}" for path, message in self.errors)
        return self.detail


class NotFound(ServiceError):
    status = 404
    title = "Not found"


class Conflict(ServiceError):
    status = 409
    title = "Conflict"


class Invalid(ServiceError):
    status = 422
    title = "Unprocessable content"


class TooLarge(ServiceError):
    status = 413
    title = "Content too large"


class Forbidden(ServiceError):
    status = 403
    title = "Forbidden"


class Unavailable(ServiceError):
    """A resource the service needs (the database) does not answer; the client may retry."""

    status = 503
    title = "Service unavailable"
