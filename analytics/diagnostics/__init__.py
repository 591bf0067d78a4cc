"""Estimate the physical state of a cooler from its readings: module, cabinet, sinks.

Pure functions on numpy arrays, SI units, temperatures in kelvin, times in seconds. No I/O:
the runner loads readings, calls these and stores what they return. How the diagnosis is
made, with its equations and sources: ``README.md`` beside this file.

Modules, in the order the diagnosis runs:

- :mod:`.quality` - which samples are usable (:func:`flag_samples`);
- :mod:`.electrical` - R and S from V = I·R + S·ΔT (:func:`fit_electrical`, :func:`harman_steps`);
- :mod:`.seebeck_pool` - the served S pooled over a unit's recent windows
  (:func:`.seebeck_pool.pool_seebeck`);
- :mod:`.module_thermometer` - ΔT and a missing face from the module's own voltage
  (:func:`reconstruct_faces`);
- :mod:`.thermal` - K, the sinks, UA, C and the internal load (:func:`fit_thermal`), built on
  :mod:`.sinks`, :mod:`.cabinet`, :mod:`.error_budget` and :mod:`.integrals`;
- :mod:`.probe_offsets` - the probes' offsets from rests and the open-circuit voltage
  (:func:`.probe_offsets.probe_offsets`);
- :mod:`.cabinet_probe` - the cabinet probe against the cold side's balance, with the cold
  face from a probe or a floating module's open-circuit voltage;
- :mod:`.hot_side` - the hot side's resistance hour by hour;
- :mod:`.intervals` - the readings' usual interval and the time scales it sets;
- :mod:`.performance` - cooling, COP and capacity at the setpoint;
- :mod:`.options` - every threshold, prior and window share (:class:`DiagnosticsOptions`);
- :mod:`.estimates`, :mod:`.least_squares` - the estimate type, error propagation, fitting.
"""

from .electrical import (
    ElectricalFit,
    detect_floating_driver,
    fit_electrical,
    fit_held,
    floating_from_voltage,
    harman_steps,
)
from .estimates import Estimate, propagate
from .hot_side import hot_side_resistance_ratio, hot_side_resistance_ratios
from .intervals import (
    IntervalMeans,
    closing_pairs,
    interval_basis,
    scaled_for_interval,
    usual_interval,
)
from .module_thermometer import (
    FaceReconstruction,
    NotSeparableError,
    delta_t_from_hot_face,
    floating_without_faces,
    reconstruct_delta_t,
    reconstruct_faces,
    unanchored_faces,
)
from .options import DEFAULT_OPTIONS, TYPICAL_MODULE_ZT, DiagnosticsOptions
from .performance import Performance, performance_now, setpoint_capacity
from .quality import SampleFlags, flag_samples
from .thermal import THERMAL_PARAMS, ThermalFit, fit_thermal

__all__ = [
    "DEFAULT_OPTIONS",
    "THERMAL_PARAMS",
    "TYPICAL_MODULE_ZT",
    "DiagnosticsOptions",
    "ElectricalFit",
    "Estimate",
    "FaceReconstruction",
    "IntervalMeans",
    "NotSeparableError",
    "Performance",
    "SampleFlags",
    "ThermalFit",
    "closing_pairs",
    "delta_t_from_hot_face",
    "detect_floating_driver",
    "fit_electrical",
    "fit_held",
    "fit_thermal",
    "flag_samples",
    "floating_from_voltage",
    "floating_without_faces",
    "harman_steps",
    "hot_side_resistance_ratio",
    "hot_side_resistance_ratios",
    "interval_basis",
    "performance_now",
    "propagate",
    "reconstruct_delta_t",
    "reconstruct_faces",
    "scaled_for_interval",
    "setpoint_capacity",
    "unanchored_faces",
    "usual_interval",
]
