"""Settings: defaults, then an optional TOML file, then ``CONFIRM_*`` environment variables.

A malformed value stops start-up with :class:`ConfigError`, whose message is one line.
"""

from __future__ import annotations

import os
import sys
import tomllib
from dataclasses import field, fields, replace
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import Field, ValidationError
from pydantic.dataclasses import dataclass
from sqlalchemy.engine import make_url
from sqlalchemy.exc import ArgumentError

PACKAGE_DIR = Path(__file__).resolve().parent
PROJECT_DIR = PACKAGE_DIR.parent
_SOURCE_PROTOCOLS = PROJECT_DIR / "protocols"
_INSTALLED_PROTOCOLS = Path(sys.prefix) / "share" / "confirm-service" / "protocols"
DEFAULT_PROTOCOL_FILE = (
    _SOURCE_PROTOCOLS if _SOURCE_PROTOCOLS.is_dir() else _INSTALLED_PROTOCOLS
) / "default.toml"
"""The shipped default protocol: from the source tree, or where a wheel install put it."""


_OPTIONAL_PATHS = ("signing_key_file", "ephemeris_file", "contacts_file")


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
    max_batch_detections: Annotated[int, Field(gt=0)] = 50_000
    max_body_bytes: Annotated[int, Field(gt=0)] = 64 * 1024 * 1024
    clock_skew_allowance_s: Annotated[float, Field(ge=0, allow_inf_nan=False)] = 300.0
    service_origin: str = "confirm-service"
    checkpoint_interval_s: Annotated[float, Field(gt=0, allow_inf_nan=False)] = 3600.0
    scan_quiet_period_s: Annotated[float, Field(gt=0, allow_inf_nan=False)] = 1800.0
    secret_key: str = field(default="", repr=False)
    scheduler_tick_s: Annotated[float, Field(gt=0, allow_inf_nan=False)] = 60.0
    scheduler_standby_poll_s: Annotated[float, Field(gt=0, allow_inf_nan=False)] = 5.0
    followup_lead_time_s: Annotated[float, Field(ge=0, allow_inf_nan=False)] = 7200.0
    delivery_timeout_s: Annotated[float, Field(gt=0, allow_inf_nan=False)] = 10.0
    delivery_max_attempts: Annotated[int, Field(gt=0)] = 6
    delivery_backoff_s: Annotated[float, Field(gt=0, allow_inf_nan=False)] = 60.0
    delivery_backoff_max_s: Annotated[float, Field(gt=0, allow_inf_nan=False)] = 3600.0
    public_url: str = "http://127.0.0.1:8080"
    site_code: str = ""
    smtp_host: str = ""
    smtp_port: Annotated[int, Field(gt=0, lt=65536)] = 25
    mail_from: str = "confirm-service@localhost"
    contacts_file: Path | None = None
    request_log: Literal["json", "off"] = "json"
    scheduler_metrics_port: Annotated[int, Field(ge=0, lt=65536)] = 0

    @property
    def is_sqlite(self) -> bool:
        return self.database_url.startswith("sqlite")

    def resolved_signing_key_file(self) -> Path:
        return self.signing_key_file or self.instance_path / "audit-signing-key.pem"


_ENV_PREFIX = "CONFIRM_"


def _build(values: dict[str, Any], origins: dict[str, str]) -> Settings:
    """Validate with pydantic; the first bad field becomes a one-line :class:`ConfigError`."""
    try:
        return Settings(**values)
    except ValidationError as exc:
        error = exc.errors(include_url=False)[0]
        name = str(error["loc"][0]) if error["loc"] else "?"
        origin = origins.get(name, "setting")
        raise ConfigError(
            f"{origin}: {values.get(name)!r} is not a valid value for {name} ({error['msg']})"
        ) from None


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
    origins: dict[str, str] = {}
    config_file = environ.get(_ENV_PREFIX + "CONFIG_FILE")
    if config_file:
        try:
            raw = tomllib.loads(Path(config_file).read_text(encoding="utf-8"))
        except (OSError, tomllib.TOMLDecodeError) as exc:
            raise ConfigError(f"config file {config_file}: {exc}") from None
        for key, value in raw.items():
            if key not in known:
                raise ConfigError(f"config file {config_file}: unknown setting {key!r}")
            values[key], origins[key] = value, f"config file {config_file}"
    for name in known:
        env_name = _ENV_PREFIX + name.upper()
        if env_name in environ:
            values[name], origins[name] = environ[env_name], env_name
    for key, value in (overrides or {}).items():
        if key not in known:
            raise ConfigError(f"unknown setting {key!r}")
        values[key], origins[key] = value, "override"
    for name in _OPTIONAL_PATHS:
        if values.get(name) == "":
            values[name] = None
    settings = _build(values, origins)
    if not settings.database_url:
        db_file = settings.instance_path / "confirm-service.db"
        settings = replace(settings, database_url=f"sqlite:///{db_file}")
    return replace(settings, database_url=validate_database_url(settings.database_url))
