"""The agent's configuration from a TOML file (stdlib ``tomllib``) or from flags.

A file looks like this (every key but ``device_id``, ``mqtt_url``, ``buffer`` and one source is
optional)::

    device_id = "cab-17"
    mqtt_url = "mqtts://broker.example:8883"
    buffer = "/var/lib/tecfleet-agent/buffer.sqlite"
    username = "cab-17"
    password = "..."
    ca_file = "/etc/tecfleet-agent/ca.crt"

    [[sources]]
    kind = "csv"                       # csv | jsonl | command | sysfs
    path = "/var/log/cooler.csv"

    [[sources]]
    kind = "sysfs"
    every_s = 10
    channels = { t_cabinet = "w1:/sys/bus/w1/devices/28-0316a2794aff/w1_slave" }

    [calibration.current]
    scale = 0.5                        # value * scale + offset, in the channel's unit
    offset = 0.0

    [options]
    read_every_s = 10

    [report]                           # one reading per interval, with its summaries
    every_s = 900
    summaries = true
    on_above_a = 0.1                   # a current above this counts as on [A]
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import fields, replace
from pathlib import Path
from typing import Any
from urllib.parse import unquote, urlsplit

from tecfleet.ingest.agent.options import (
    CHANNELS,
    AgentConfig,
    AgentOptions,
    Calibration,
    ReportOptions,
    SourceSpec,
)
from tecfleet.ingest.errors import SettingsError

_DEVICE_ID_RE = re.compile(r"^[A-Za-z0-9_.\-]{1,64}$")
SOURCE_KINDS = ("csv", "jsonl", "command", "sysfs")
SYSFS_KINDS = ("hwmon", "iio", "w1")


def config_from_flags(
    device_id: str, mqtt_url: str, buffer: str, sources: list[str], topic_prefix: str = "tecfleet"
) -> AgentConfig:
    """The simple case: ``--source csv:PATH`` or ``jsonl:PATH`` (repeatable)."""
    specs = []
    for text in sources:
        kind, _, path = text.partition(":")
        if kind not in ("csv", "jsonl") or not path:
            raise SettingsError(f"--source {text!r}: use csv:PATH or jsonl:PATH (or --config)")
        specs.append(SourceSpec(kind=kind, path=Path(path)))
    return _checked(
        {
            "device_id": device_id,
            "mqtt_url": mqtt_url,
            "buffer": buffer,
            "topic_prefix": topic_prefix,
        },
        tuple(specs),
        {},
        AgentOptions(),
    )


def load_config(path: Path) -> AgentConfig:
    """The configuration in a TOML file; a clear ``SettingsError`` for anything wrong."""
    try:
        doc = tomllib.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise SettingsError(f"agent config {path}: {exc.strerror or exc}") from exc
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"agent config {path} is not valid TOML: {exc}") from exc
    sources = tuple(_source(index, raw) for index, raw in enumerate(doc.get("sources", [])))
    calibration = {
        name: _calibration(name, raw) for name, raw in doc.get("calibration", {}).items()
    }
    config = _checked(doc, sources, calibration, _options(doc.get("options", {})))
    if "report" not in doc:
        return config
    return replace(config, report=_report(doc["report"]))


def with_report_flags(
    config: AgentConfig, every_s: float | None, instants_only: bool
) -> AgentConfig:
    """``--report-every`` and ``--instants-only`` over the config: the interval replaces the
    ``[report]`` table's ``every_s`` (its other keys kept); checked like the table."""
    if every_s is None:
        if instants_only:
            raise SettingsError("--instants-only needs --report-every SECONDS")
        return config
    raw: dict[str, Any] = {}
    if config.report is not None:
        raw = {f.name: getattr(config.report, f.name) for f in fields(ReportOptions)}
    raw["every_s"] = every_s
    if instants_only:
        raw["summaries"] = False
    return replace(config, report=_report(raw))


def _checked(
    doc: dict[str, Any],
    sources: tuple[SourceSpec, ...],
    calibration: dict[str, Calibration],
    options: AgentOptions,
) -> AgentConfig:
    for key in ("device_id", "mqtt_url", "buffer"):
        if not isinstance(doc.get(key), str) or not doc[key]:
            raise SettingsError(f"agent config needs {key!r}")
    device_id = doc["device_id"]
    if not _DEVICE_ID_RE.match(device_id):
        raise SettingsError(f"device id {device_id!r} must match [A-Za-z0-9_.-]{{1,64}}")
    url = urlsplit(doc["mqtt_url"])
    if url.scheme not in ("mqtt", "mqtts") or not url.hostname:
        raise SettingsError("mqtt_url must be mqtt://HOST[:PORT] or mqtts://HOST[:PORT]")
    if not sources:
        raise SettingsError("the agent needs at least one source")
    username = doc.get("username") or (unquote(url.username) if url.username else None)
    password = doc.get("password") or (unquote(url.password) if url.password else None)
    return AgentConfig(
        device_id=device_id,
        mqtt_url=doc["mqtt_url"],
        buffer=Path(doc["buffer"]),
        sources=sources,
        topic_prefix=str(doc.get("topic_prefix", "tecfleet")),
        username=username,
        password=password,
        ca_file=_path_or_none(doc.get("ca_file")),
        cert_file=_path_or_none(doc.get("cert_file")),
        key_file=_path_or_none(doc.get("key_file")),
        calibration=calibration,
        options=options,
    )


def _path_or_none(value: Any) -> Path | None:
    return Path(value) if isinstance(value, str) and value else None


def _source(index: int, raw: Any) -> SourceSpec:
    where = f"sources[{index}]"
    if not isinstance(raw, dict) or raw.get("kind") not in SOURCE_KINDS:
        raise SettingsError(f"{where}: kind must be one of {', '.join(SOURCE_KINDS)}")
    kind = raw["kind"]
    every = raw.get("every_s")
    if every is not None and (not isinstance(every, int | float) or every <= 0):
        raise SettingsError(f"{where}: every_s must be a positive number of seconds")
    if kind in ("csv", "jsonl"):
        if not isinstance(raw.get("path"), str):
            raise SettingsError(f"{where}: a {kind} source needs a path")
        return SourceSpec(kind=kind, path=Path(raw["path"]), every_s=every)
    if kind == "command":
        command = raw.get("command")
        if isinstance(command, str):
            command = [command]
        if not command or not all(isinstance(part, str) for part in command):
            raise SettingsError(f"{where}: a command source needs command = [program, args...]")
        return SourceSpec(kind=kind, command=tuple(command), every_s=every)
    channels = raw.get("channels")
    if not isinstance(channels, dict) or not channels:
        raise SettingsError(f"{where}: a sysfs source needs channels = {{ name = 'kind:PATH' }}")
    pairs = []
    for name, where_from in channels.items():
        if name not in CHANNELS or name == "door_open":
            raise SettingsError(f"{where}: {name!r} is not a numeric channel")
        sys_kind, _, path = str(where_from).partition(":")
        if sys_kind not in SYSFS_KINDS or not path:
            raise SettingsError(f"{where}.{name}: use hwmon:PATH, iio:PATH or w1:PATH")
        pairs.append((name, str(where_from)))
    return SourceSpec(kind=kind, channels=tuple(pairs), every_s=every)


def _calibration(name: str, raw: Any) -> Calibration:
    if name not in CHANNELS or name == "door_open":
        raise SettingsError(f"calibration.{name}: not a numeric channel")
    if not isinstance(raw, dict) or set(raw) - {"scale", "offset"}:
        raise SettingsError(f"calibration.{name}: only scale and offset may be given")
    values = {key: raw[key] for key in ("scale", "offset") if key in raw}
    for key, value in values.items():
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise SettingsError(f"calibration.{name}.{key} must be a number")
    return Calibration(**{key: float(value) for key, value in values.items()})


def _options(raw: Any) -> AgentOptions:
    if not isinstance(raw, dict):
        raise SettingsError("[options] must be a table")
    known = {f.name: f for f in fields(AgentOptions)}
    unknown = set(raw) - set(known)
    if unknown:
        raise SettingsError(f"[options]: unknown key(s) {sorted(unknown)}")
    given: dict[str, Any] = {}
    for key, value in raw.items():
        default = getattr(AgentOptions(), key)
        if isinstance(value, bool) or not isinstance(value, int | float) or value <= 0:
            raise SettingsError(f"options.{key} must be a positive number")
        given[key] = type(default)(value)
    return AgentOptions(**given)


def _report(raw: Any) -> ReportOptions:
    if not isinstance(raw, dict):
        raise SettingsError("[report] must be a table")
    unknown = set(raw) - {f.name for f in fields(ReportOptions)}
    if unknown:
        raise SettingsError(f"[report]: unknown key(s) {sorted(unknown)}")
    if "every_s" not in raw:
        raise SettingsError("[report] needs every_s, the reporting interval in seconds")
    given: dict[str, Any] = {}
    for key, value in raw.items():
        if key == "summaries":
            if not isinstance(value, bool):
                raise SettingsError("report.summaries must be true or false")
            given[key] = value
            continue
        if isinstance(value, bool) or not isinstance(value, int | float) or value <= 0:
            raise SettingsError(f"report.{key} must be a positive number")
        given[key] = float(value)
    report = ReportOptions(**given)
    if report.min_coverage > 1.0:
        raise SettingsError("report.min_coverage is a share of the interval, at most 1")
    return report
