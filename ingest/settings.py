"""The one validated settings object of a tecfleet process.

Sources, later ones winning: built-in defaults, an optional TOML file (``TECFLEET_CONFIG`` or
``--config``), environment variables ``TECFLEET_*``, command-line flags. The object is built
once in the command-line entry point and passed down explicitly; nothing reads the environment
behind its back.
"""

from __future__ import annotations

import re
import socket
from pathlib import Path
from typing import Annotated, Any, Literal
from urllib.parse import unquote, urlsplit

from pydantic import AfterValidator, BeforeValidator, Field, SecretStr, ValidationError
from pydantic_settings import (
    BaseSettings,
    PydanticBaseSettingsSource,
    SettingsConfigDict,
    TomlConfigSettingsSource,
)

from tecfleet.ingest.errors import SettingsError

ROLES = ("ingest", "analytics", "api", "delivery")
_PREFIX_RE = re.compile(r"^[A-Za-z0-9_.\-/]{1,64}$")


def _default_client_id() -> str:
    return f"tecfleet-{socket.gethostname()}"[:64]


def _split_roles(value: Any) -> Any:
    if isinstance(value, str):
        value = [part.strip() for part in value.split(",") if part.strip()]
    return value


def _known_roles(value: tuple[str, ...]) -> tuple[str, ...]:
    unknown = [role for role in value if role not in ROLES]
    if unknown:
        raise ValueError(f"unknown role(s) {unknown}; choose from {list(ROLES)}")
    if not value:
        raise ValueError("at least one role is needed")
    return tuple(dict.fromkeys(value))


def _prefix_ok(value: str) -> str:
    if not _PREFIX_RE.match(value) or value.startswith("/") or value.endswith("/"):
        raise ValueError("topic prefix must be 1-64 of A-Z a-z 0-9 _ . - / and not start/end in /")
    if any(ch in value for ch in "+#$"):
        raise ValueError("topic prefix may not contain MQTT wildcards")
    return value


def _mqtt_url_ok(value: str) -> str:
    parts = urlsplit(value)
    if parts.scheme not in ("mqtt", "mqtts", "tcp", "ssl"):
        raise ValueError("MQTT URL must start with mqtt:// or mqtts://")
    if not parts.hostname:
        raise ValueError("MQTT URL needs a host")
    return value


def _group_ok(value: str | None) -> str | None:
    if value is not None and (not value or any(ch in value for ch in "/+#")):
        raise ValueError("share group may not be empty or contain / + #")
    return value or None


# Field types with their checks attached, so the class below only declares fields.
Roles = Annotated[tuple[str, ...], BeforeValidator(_split_roles), AfterValidator(_known_roles)]
TopicPrefix = Annotated[str, AfterValidator(_prefix_ok)]
MqttUrl = Annotated[str, AfterValidator(_mqtt_url_ok)]
ShareGroup = Annotated[str | None, AfterValidator(_group_ok)]


class Settings(BaseSettings):
    """Everything a tecfleet process needs to know about its surroundings."""

    model_config = SettingsConfigDict(env_prefix="TECFLEET_", extra="ignore")

    database_url: str = "sqlite:///./tecfleet.db"
    mqtt_url: MqttUrl = "mqtt://127.0.0.1:1883"
    topic_prefix: TopicPrefix = "tecfleet"
    http_host: str = "127.0.0.1"
    http_port: int = Field(8000, ge=0, le=65535)
    analyze_every_s: float = Field(30.0, gt=0)
    mqtt_client_id: str = Field(default_factory=_default_client_id)
    roles: Roles = ROLES
    share_group: ShareGroup = None

    # Not in the external contract; tuning with documented defaults.
    mqtt_protocol: Literal["auto", "5", "3.1.1"] = "auto"
    mqtt_session_expiry_s: int = Field(7 * 24 * 3600, ge=60)
    mqtt_receive_maximum: int = Field(1000, ge=1, le=65535)
    batch_max_readings: int = Field(2000, ge=1)
    batch_max_wait_s: float = Field(0.05, gt=0, le=10)
    reject_payload_cap_bytes: int = Field(4096, ge=64)
    max_payload_bytes: int = Field(1_048_576, ge=1024)
    future_tolerance_s: float = Field(300.0, ge=0)
    #: How long an analysis process keeps a device without renewing its lease, and counts as
    #: alive without a heartbeat [s]: a few analysis rounds (common practice, no source).
    analysis_lease_s: float = Field(120.0, gt=0)
    #: Devices analysed per transaction by a sharded analysis process [count] (common
    #: practice, no source).
    analysis_devices_per_commit: int = Field(20, ge=1)
    # Retention (ingest/db/retention.py). Raw readings older than this many days are rolled up
    # and removed; unset (the default) keeps them for ever, so nothing stored goes unless an
    # operator asks for it [days].
    raw_retention_days: float | None = Field(None, ge=1)
    # Width of one rollup interval; must divide a day [s]. Common practice, no source.
    rollup_interval_s: int = Field(3600, ge=60, le=86_400)
    # Rollups kept this long [days]; ten years (common practice, no source).
    rollup_retention_days: float = Field(3653.0, ge=1)
    # PostgreSQL day partitions of readings made ahead of the clock [days]; a week covers a
    # maintenance job that stopped for days (common practice, no source).
    partitions_ahead_days: int = Field(7, ge=1, le=60)
    # How often the service makes partitions ahead and applies retention [s] (common
    # practice, no source).
    retention_every_s: float = Field(3600.0, gt=0)
    config: Path | None = None

    # REST API limits and secrets; every limit is common practice, no source.
    #: Requests one API key may make per minute before it gets 429 [requests/min].
    api_rate_per_minute: int = Field(600, ge=1)
    #: Largest request body accepted [bytes].
    api_max_body_bytes: int = Field(1_048_576, ge=1024)
    #: Largest page a list answers [items]; the OpenAPI document states it.
    api_max_page_size: int = Field(1000, ge=1, le=5000)
    #: Longest span of raw readings one request or export covers [days].
    api_max_range_days: float = Field(31.0, gt=0)
    #: A key's last-used time is written at most this often [s].
    api_key_touch_s: float = Field(60.0, ge=0)
    #: How often an event stream looks for new alert changes [s].
    api_events_poll_s: float = Field(1.0, gt=0)
    #: How long one event stream stays open before the client resumes it [s].
    api_events_max_s: float = Field(600.0, gt=0)
    #: Fernet key(s) sealing webhook secrets at rest, comma separated: the first seals, all
    #: open (rotation). Unset: read from ``secret_key_file``, made there on first need.
    secret_key: SecretStr | None = None
    secret_key_file: Path = Path("tecfleet-secret.key")

    @classmethod
    def settings_customise_sources(
        cls,
        settings_cls: type[BaseSettings],
        init_settings: PydanticBaseSettingsSource,
        env_settings: PydanticBaseSettingsSource,
        dotenv_settings: PydanticBaseSettingsSource,
        file_secret_settings: PydanticBaseSettingsSource,
    ) -> tuple[PydanticBaseSettingsSource, ...]:
        # load_settings() merges file, environment and flags itself, in that order.
        return (init_settings,)

    # Derived views -------------------------------------------------------

    @property
    def mqtt_host(self) -> str:
        return urlsplit(self.mqtt_url).hostname or "127.0.0.1"

    @property
    def mqtt_port(self) -> int:
        parts = urlsplit(self.mqtt_url)
        tls = parts.scheme in ("mqtts", "ssl")
        return parts.port or (8883 if tls else 1883)

    @property
    def mqtt_tls(self) -> bool:
        return urlsplit(self.mqtt_url).scheme in ("mqtts", "ssl")

    @property
    def mqtt_credentials(self) -> tuple[str, str | None] | None:
        parts = urlsplit(self.mqtt_url)
        if parts.username is None:
            return None
        password = unquote(parts.password) if parts.password is not None else None
        return unquote(parts.username), password

    @property
    def telemetry_filter(self) -> str:
        """Topic filter the ingester subscribes to (shared when a group is set)."""
        base = f"{self.topic_prefix}/+/telemetry"
        return f"$share/{self.share_group}/{base}" if self.share_group else base

    @property
    def status_filter(self) -> str:
        # Never shared: retained status must reach every ingester.
        return f"{self.topic_prefix}/+/status"


def load_settings(
    overrides: dict[str, Any] | None = None, env: dict[str, str] | None = None
) -> Settings:
    """Build the settings from file, environment and explicit overrides (flags).

    ``env`` replaces ``os.environ`` (for tests); ``overrides`` holds flags given on the command
    line, with ``None`` meaning "not given".
    """
    import os

    environ = dict(os.environ if env is None else env)
    given = {key: value for key, value in (overrides or {}).items() if value is not None}
    config_path = given.get("config") or environ.get("TECFLEET_CONFIG")
    file_values: dict[str, Any] = {}
    if config_path:
        path = Path(config_path)
        if not path.is_file():
            raise SettingsError(f"config file {path} does not exist")
        try:
            file_values = TomlConfigSettingsSource(Settings, toml_file=path)()
        except Exception as exc:  # tomllib raises its own decode error
            raise SettingsError(f"config file {path} is not valid TOML: {exc}") from exc
    env_values = {
        key[len("TECFLEET_") :].lower(): value
        for key, value in environ.items()
        if key.startswith("TECFLEET_") and key != "TECFLEET_CONFIG"
    }
    known = set(Settings.model_fields)
    merged = {k: v for k, v in file_values.items() if k in known}
    merged.update({k: v for k, v in env_values.items() if k in known})
    merged.update(given)
    try:
        return Settings(**merged)
    except ValidationError as exc:
        problems = "; ".join(
            f"{'.'.join(str(p) for p in err['loc'])}: {err['msg']}" for err in exc.errors()
        )
        raise SettingsError(f"invalid settings: {problems}") from exc
