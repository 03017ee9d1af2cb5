"""Process-wide settings the services need beyond a session (set by create_app and the CLI)."""

from __future__ import annotations

from confirm_service.config import Settings, load_settings

_settings: Settings | None = None


def configure(settings: Settings) -> None:
    global _settings
    _settings = settings


def settings() -> Settings:
    global _settings
    if _settings is None:
        _settings = load_settings()
    return _settings
