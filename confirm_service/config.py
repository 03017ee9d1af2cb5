"""Settings: defaults, then an optional TOML file, then ``CONFIRM_*`` environment variables.

A malformed value stops start-up with :class:`ConfigError`, whose message is one line.
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any

from sqlalchemy.engine import make_url
from sqlalchemy.exc import ArgumentError

PACKAGE_DIR = Path(__file__).resolve().parent
PROJECT_DIR = PACKAGE_DIR.parent
DEFAULT_PROTOCOL_FILE = PROJECT_DIR / "protocols" / "default.toml"


class ConfigError(Exception):
    """A configuration value is unusable; the message is a single line for the operator."""


@dataclass(frozen=True)
class Settings:
    """Resolved configuration of one service instance."""

    instance_path: Path = field(default_factory=lambda: Path.cwd() / "instance")
    database_url: str = ""
    protocol_file: Path = DEFAULT_PROTOCOL_FILE
    signing_key_file: Path | None = None
    ephemeris_file: Path | None = None
    max_batch_detections: int = 50_000
    max_body_bytes: int = 64 * 1024 * 1024
    clock_skew_allowance_s: float = 300.0
    page_limit_default: int = 100
    page_limit_max: int = 1_000
    service_origin: str = "confirm-service"
    smtp_host: str = "127.0.0.1"
    smtp_port: int = 25
    mail_from: str = "confirm-service@localhost"
    checkpoint_interval_s: float = 3600.0
    secret_key: str = field(default="", repr=False)

    @property
    def is_sqlite(self) -> bool:
        return self.database_url.startswith("sqlite")

    def resolved_signing_key_file(self) -> Path:
        return self.signing_key_file or self.instance_path / "audit-signing-key.pem"


_ENV_PREFIX = "CONFIRM_"
_INT_FIELDS = {"max_batch_detections", "max_body_bytes", "page_limit_default", "page_limit_max"}
_INT_FIELDS |= {"smtp_port"}
_FLOAT_FIELDS = {"clock_skew_allowance_s", "checkpoint_interval_s"}
_PATH_FIELDS = {"instance_path", "protocol_file", "signing_key_file", "ephemeris_file"}


def _coerce(name: str, value: Any, origin: str) -> Any:
    try:
        if name in _INT_FIELDS:
            number = int(value)
            if number <= 0:
                raise ValueError
            return number
        if name in _FLOAT_FIELDS:
            number = float(value)
            if not number >= 0:
                raise ValueError
            return number
        if name in _PATH_FIELDS:
            return Path(value) if value not in (None, "") else None
        return str(value)
    except (TypeError, ValueError):
        raise ConfigError(f"{origin}: {value!r} is not a valid value for {name}") from None


def validate_database_url(url: str) -> str:
    """Return ``url`` if SQLAlchemy can parse it and the backend is supported."""
    try:
        parsed = make_url(url)
    except ArgumentError:
        raise ConfigError(f"database URL {url!r} is malformed") from None
    backend = parsed.get_backend_name()
    if backend not in ("sqlite", "postgresql"):
        raise ConfigError(f"database URL {url!r}: backend {backend!r} is not supported")
    if parsed.drivername == "postgresql":  # no driver named: use psycopg 3, which is installed
        url = parsed.set(drivername="postgresql+psycopg").render_as_string(hide_password=False)
    return url


def load_settings(
    overrides: dict[str, Any] | None = None, environ: dict[str, str] | None = None
) -> Settings:
    """Build :class:`Settings` from a file named by ``CONFIRM_CONFIG_FILE``, env, overrides."""
    environ = dict(os.environ if environ is None else environ)
    known = {f.name for f in fields(Settings)}
    values: dict[str, Any] = {}
    config_file = environ.get(_ENV_PREFIX + "CONFIG_FILE")
    if config_file:
        try:
            raw = tomllib.loads(Path(config_file).read_text(encoding="utf-8"))
        except (OSError, tomllib.TOMLDecodeError) as exc:
            raise ConfigError(f"config file {config_file}: {exc}") from None
        for key, value in raw.items():
            if key not in known:
                raise ConfigError(f"config file {config_file}: unknown setting {key!r}")
            values[key] = _coerce(key, value, f"config file {config_file}")
    for name in known:
        env_name = _ENV_PREFIX + name.upper()
        if env_name in environ:
            values[name] = _coerce(name, environ[env_name], env_name)
    for key, value in (overrides or {}).items():
        if key not in known:
            raise ConfigError(f"unknown setting {key!r}")
        values[key] = _coerce(key, value, "override") if isinstance(value, str) else value
    settings = replace(Settings(), **values)
    if not settings.database_url:
        db_file = settings.instance_path / "confirm-service.db"
        settings = replace(settings, database_url=f"sqlite:///{db_file}")
    return replace(settings, database_url=validate_database_url(settings.database_url))
