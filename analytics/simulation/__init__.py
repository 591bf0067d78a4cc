"""The fleet simulator: a physics model of thermoelectric coolers, their use, faults and
sensors; where its readings go; the demo fleet; and the ``tecfleet simulate`` command.

One-way chain (each module imports only those before it)::

    specs -> truth, chunk, sensors, surroundings, thermal -> model -> fleets
          -> publisher -> scenario -> command

The pipeline never imports this package; only the command line, tests and benches do.
"""

from .chunk import Chunk, concat
from .command import add_simulate_arguments, run_simulate
from .fleets import (
    FAULT_DEFAULTS,
    parse_fault_mix,
    random_fleet,
    spec_summary,
    with_devices,
    with_sensor_set,
)
from .model import Simulator, simulate
from .publisher import FileSink, MqttSink, Sink, encode, publish_fleet
from .scenario import COMPANY, SITES, demo_fleet, run_demo_feed
from .sensors import PROBE_ERROR_C, QUANTUM, SensorModel
from .specs import (
    CHANNELS,
    FAULT_KINDS,
    FAULT_PARAM,
    MISSING_FACES,
    SENSOR_SETS,
    STANDARD_RATINGS,
    T0_K,
    DeviceSpec,
    Fault,
    FleetSpec,
    ScheduledEvent,
    device_from_ratings,
)
from .surroundings import Climate, Use
from .thermal import ALPHA_R, BETA_S, T25_K, ThermalModel
from .truth import TRUTH_PARAMS, FleetTruth

__all__ = [
    "ALPHA_R",
    "BETA_S",
    "CHANNELS",
    "COMPANY",
    "FAULT_DEFAULTS",
    "FAULT_KINDS",
    "FAULT_PARAM",
    "MISSING_FACES",
    "PROBE_ERROR_C",
    "QUANTUM",
    "SENSOR_SETS",
    "SITES",
    "STANDARD_RATINGS",
    "T0_K",
    "T25_K",
    "TRUTH_PARAMS",
    "Chunk",
    "Climate",
    "DeviceSpec",
    "Fault",
    "FileSink",
    "FleetSpec",
    "FleetTruth",
    "MqttSink",
    "ScheduledEvent",
    "SensorModel",
    "Simulator",
    "Sink",
    "ThermalModel",
    "Use",
    "add_simulate_arguments",
    "concat",
    "demo_fleet",
    "device_from_ratings",
    "encode",
    "parse_fault_mix",
    "publish_fleet",
    "random_fleet",
    "run_demo_feed",
    "run_simulate",
    "simulate",
    "spec_summary",
    "with_devices",
    "with_sensor_set",
]
