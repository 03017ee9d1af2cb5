"""Errors and warnings raised by the physics core."""

from __future__ import annotations


class PhysicsInputError(ValueError):
    """An input the physics core refuses; ``field`` names the offending input."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(f"{field}: {message}")
        self.field = field
        self.message = message

    def renamed(self, field: str) -> PhysicsInputError:
        """The same refusal reported under another field name (e.g. a service parameter)."""
        return PhysicsInputError(field, self.message)


class PhysicsAccuracyWarning(UserWarning):
    """A result is computed, but with degraded accuracy (the message says how much)."""
