"""Commands: demo."""

from confirm_service.cli import main  # noqa: F401
