"""Process-wide settings the services need beyond a session (set by create_app and the CLI)."""

from __future__ import annotations

import sys

from confirm_service.config import ConfigError, Settings, load_settings

_settings: Settings | None = None


def configure(settings: Settings) -> None:
    """Use ``settings`` for this process; switches the solar-system ephemeris if one is named.

    A named ephemeris file that cannot be used stops start-up with a one-line ConfigError.
    """
    global _settings
    if settings.ephemeris_file is None and "confirm_service.physics" not in sys.modules:
        _settings = settings  # physics starts on the builtin ephemeris when first imported
        return
    from confirm_service import physics

    wanted = str(settings.ephemeris_file) if settings.ephemeris_file else "builtin"
    if physics.current_ephemeris() != wanted:
        try:
            physics.set_ephemeris(settings.ephemeris_file)
        except (physics.PhysicsInputError, RuntimeError) as exc:
            raise ConfigError(f"CONFIRM_EPHEMERIS_FILE: {exc}") from None
    _settings = settings


def settings() -> Settings:
    global _settings
    if _settings is None:
        _settings = load_settings()
    return _settings
