"""Linux sysfs sensors: hwmon, IIO and 1-Wire thermometers, read in the contract's units.

The kernel's units (from memory of the kernel's sysfs documentation: hwmon
``Documentation/hwmon/sysfs-interface.rst``, IIO ``Documentation/ABI/testing/sysfs-bus-iio``,
1-Wire ``Documentation/w1/slaves/w1_therm.rst``):

- hwmon ``temp*_input`` millidegrees Celsius, ``in*_input`` millivolts, ``curr*_input``
  milliamperes, ``humidity*_input`` milli-percent;
- IIO ``<channel>_input``, or ``(<channel>_raw + <channel>_offset) * <channel>_scale``, in
  millidegrees Celsius, millivolts, milliamperes or milli-percent;
- 1-Wire ``w1_slave``: two lines, the first ending in ``YES`` when the CRC matched, the second
  ending in ``t=<millidegrees Celsius>``; newer kernels also give ``temperature`` alone.

All of them are thousandths of the contract's unit, so each value is divided by 1000.
"""

from __future__ import annotations

import logging
from pathlib import Path

from tecfleet.ingest.agent.options import AgentOptions, SourceSpec
from tecfleet.ingest.agent.sources import Polled, Sample

log = logging.getLogger(__name__)

MILLI = 1000.0


class SensorError(OSError):
    """A sysfs file is missing, unreadable or says the reading is bad."""


def read_hwmon(path: Path) -> float:
    """A hwmon ``*_input`` file in the contract's unit (°C, V, A or %)."""
    return _number(path) / MILLI


def read_iio(prefix: Path) -> float:
    """An IIO channel (``.../in_voltage0`` etc.) in the contract's unit (°C, V, A or %)."""
    processed = prefix.with_name(prefix.name + "_input")
    if processed.exists():
        return _number(processed) / MILLI
    raw = _number(prefix.with_name(prefix.name + "_raw"))
    offset_file = prefix.with_name(prefix.name + "_offset")
    scale_file = prefix.with_name(prefix.name + "_scale")
    offset = _number(offset_file) if offset_file.exists() else 0.0
    scale = _number(scale_file) if scale_file.exists() else 1.0
    return (raw + offset) * scale / MILLI


def read_w1(path: Path) -> float:
    """A 1-Wire thermometer's ``w1_slave`` (CRC checked) or ``temperature`` file [°C]."""
    text = _text(path)
    if path.name != "w1_slave":
        return _number_text(path, text) / MILLI
    lines = text.splitlines()
    if len(lines) < 2 or not lines[0].rstrip().endswith("YES"):
        raise SensorError(f"{path}: CRC check failed or no reading")
    _, found, value = lines[1].rpartition("t=")
    if not found:
        raise SensorError(f"{path}: no t= in the reading")
    return _number_text(path, value) / MILLI


_READERS = {"hwmon": read_hwmon, "iio": read_iio, "w1": read_w1}


def _text(path: Path) -> str:
    try:
        return path.read_text(encoding="ascii")
    except (OSError, UnicodeDecodeError) as exc:
        raise SensorError(f"{path}: {exc}") from exc


def _number_text(path: Path, text: str) -> float:
    try:
        return float(text.strip())
    except ValueError as exc:
        raise SensorError(f"{path}: {text.strip()[:30]!r} is not a number") from exc


def _number(path: Path) -> float:
    return _number_text(path, _text(path))


class SysfsSource:
    """Reads each configured channel from its sysfs file; one reading per look."""

    def __init__(self, spec: SourceSpec, options: AgentOptions) -> None:
        self.channels = [
            (name, kind, Path(path))
            for name, where in spec.channels
            for kind, _, path in [where.partition(":")]
        ]
        self.key = "sysfs:" + ",".join(name for name, _kind, _path in self.channels)
        self.every_s = spec.every_s or options.read_every_s

    def poll(self, _position: str | None) -> Polled:
        values: dict[str, float | bool] = {}
        for name, kind, path in self.channels:
            try:
                values[name] = _READERS[kind](path)
            except SensorError as exc:
                # A reading with a channel missing would be refused by the service; skip it.
                log.warning("sysfs channel %s unreadable, reading skipped: %s", name, exc)
                return Polled(bad_lines=1)
        return Polled(samples=[Sample(None, values)])
