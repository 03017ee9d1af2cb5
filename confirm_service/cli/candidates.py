"""Commands: candidates."""

from confirm_service.cli import main  # noqa: F401
