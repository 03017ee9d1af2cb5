"""Commands: dossier."""

from confirm_service.cli import main  # noqa: F401
