"""The agent's tunables and its configuration: one frozen options object, one config object.

Every number has its unit and where it comes from beside it. The configuration comes from a
TOML file (``--config``) or, for the simple case, from flags (see :mod:`.config`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

#: The contract's reading channels, in payload order; ``rh`` and ``door_open`` are optional.
CHANNELS = (
    "t_cabinet",
    "t_cold",
    "t_hot",
    "t_ambient",
    "current",
    "voltage",
    "rh",
    "door_open",
)


@dataclass(frozen=True, slots=True)
class AgentOptions:
    """How often, how much and how fast the agent reads, buffers and sends."""

    #: Seconds between two reads of a scheduled source (command, sysfs) [s]; common practice,
    #: no source: a cabinet's air changes over minutes, so a reading every 10 s is ample.
    read_every_s: float = 10.0
    #: Seconds between two looks at a followed file [s]; common practice, no source.
    follow_every_s: float = 1.0
    #: Readings in one MQTT message (a batch array) [readings]; a batch of 100 readings is
    #: about 20 KiB of JSON, far below the service's 1 MiB payload limit.
    batch_max_readings: int = 100
    #: Messages sent and not yet acknowledged at once [messages]; mosquitto's default
    #: in-flight window per client is 20 (from memory).
    max_inflight_messages: int = 20
    #: Messages per second while a backlog drains [1/s]; common practice, no source: keeps a
    #: fleet reconnecting after an outage from flooding the broker all at once.
    backlog_messages_per_s: float = 20.0
    #: Readings the on-disk buffer holds before the oldest are dropped [readings]; about 58
    #: days of one reading every 10 s, some 100 MB of SQLite (values the code produced itself
    #: in a trial fill).
    buffer_max_readings: int = 500_000
    #: Bytes of a followed file read in one go [bytes]; bounds memory on a large backlog file.
    follow_chunk_bytes: int = 1 << 20
    #: A wall clock before 1 January of this year is taken as unset [year]: the agent's own
    #: release year, so a controller booted without a time source is noticed.
    release_year: int = 2026
    #: MQTT keep-alive [s]; common practice, no source.
    keepalive_s: int = 30
    #: Bounds of the reconnect back-off [s]; common practice, no source.
    reconnect_min_s: int = 1
    reconnect_max_s: int = 30
    #: Seconds a command source may run before it is killed [s]; common practice, no source.
    command_timeout_s: float = 20.0


@dataclass(frozen=True, slots=True)
class ReportOptions:
    """Reporting by interval (the ``[report]`` table): the sources are sampled as often as they
    are read, and one reading per interval is sent, with the interval's summaries."""

    #: Length of a reporting interval, aligned to multiples of it in Unix time [s].
    every_s: float
    #: Send the interval summaries (means, on share, cabinet extremes) with each report.
    summaries: bool = True
    #: A current above this counts as the module on [A]; common practice, no source: well
    #: above a current sensor's zero offset (tens of mA), well below any running module's
    #: current (amperes).
    on_above_a: float = 0.1
    #: Longest hole between samples a mean may bridge [s]; common practice, no source: a
    #: cabinet's thermostat cycle lasts minutes, so a minute without samples misplaces little;
    #: a longer hole leaves the interval without summaries.
    max_gap_s: float = 60.0
    #: Share of ``every_s`` the samples must span for the summaries to be sent [-]; common
    #: practice, no source: the first interval after a start is usually shorter.
    min_coverage: float = 0.9


@dataclass(frozen=True, slots=True)
class Calibration:
    """Per-channel correction: value * scale + offset, in the channel's unit."""

    scale: float = 1.0
    offset: float = 0.0


@dataclass(frozen=True, slots=True)
class SourceSpec:
    """One source: ``kind`` is csv, jsonl, command or sysfs."""

    kind: str
    path: Path | None = None
    command: tuple[str, ...] = ()
    #: channel -> "hwmon:PATH" | "iio:PATH" | "w1:PATH" (sysfs sources only)
    channels: tuple[tuple[str, str], ...] = ()
    every_s: float | None = None


@dataclass(frozen=True, slots=True)
class AgentConfig:
    """Everything one agent process needs: who it is, where to send, what to read."""

    device_id: str
    mqtt_url: str
    buffer: Path
    sources: tuple[SourceSpec, ...]
    topic_prefix: str = "tecfleet"
    username: str | None = None
    password: str | None = None
    ca_file: Path | None = None
    cert_file: Path | None = None
    key_file: Path | None = None
    calibration: dict[str, Calibration] = field(default_factory=dict)
    options: AgentOptions = field(default_factory=AgentOptions)
    #: None: every sample is sent as it is read.
    report: ReportOptions | None = None

    @property
    def telemetry_topic(self) -> str:
        return f"{self.topic_prefix}/{self.device_id}/telemetry"

    @property
    def status_topic(self) -> str:
        return f"{self.topic_prefix}/{self.device_id}/status"
