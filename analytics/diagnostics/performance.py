"""Performance now (cooling, power, COP and the best COP) and capacity at the setpoint."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .. import heat_paths, physics
from .._validate import FloatArray
from ..errors import EstimationError, PhysicsError
from .estimates import Estimate, propagate

__all__ = ["Performance", "performance_now", "setpoint_capacity"]


@dataclass(frozen=True)
class Performance:
    """Module performance at given face temperatures and current.

    Attributes
    ----------
    cooling_w, input_power_w, cop, cop_max, current_for_best_cop_a, carnot_cop :
        Qc [W], P [W], COP [-], best COP at these temperatures [-], the current giving it [A],
        Carnot COP [-], each as an :class:`.Estimate`.
    """

    cooling_w: Estimate
    input_power_w: Estimate
    cop: Estimate
    cop_max: Estimate
    current_for_best_cop_a: Estimate
    carnot_cop: Estimate


def performance_now(
    current: float,
    t_cold: float,
    t_hot: float,
    s25: float,
    r25: float,
    k: float,
    cov: FloatArray,
    n: int,
    *,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
) -> Performance:
    """Cooling, power, COP and the best COP at one operating point, with standard errors.

    Qc and P from :func:`..physics.cold_side_heat` and :func:`..physics.input_power`,
    COP = Qc/P as in :func:`..physics.cop`; the best COP and its current from
    :func:`..physics.best_cop` and :func:`..physics.current_for_best_cop` (Ioffe 1957); the
    Carnot COP Tc/(Th - Tc). S and R are taken at the mean face temperature. Errors by
    :func:`.propagate` from ``cov``.

    Parameters
    ----------
    current : Module current [A].
    t_cold, t_hot : Face temperatures [K].
    s25 : Seebeck coefficient at 25 °C [V/K].
    r25 : Resistance at 25 °C [ohm].
    k : Thermal conductance [W/K].
    cov : Covariance of (s25, r25, k).
    n : Samples behind the operating point [-].
    alpha, beta : Temperature coefficients of R and S [1/K].

    Returns
    -------
    The figures.

    Raises
    ------
    EstimationError : no power taken, or hot face not above cold face.
    """
    tm = 0.5 * (t_cold + t_hot)
    p0 = np.array([s25, r25, k])

    def figures(p: FloatArray) -> FloatArray:
        s = np.asarray(physics.seebeck_at_temperature(p[:, 0], tm, beta))
        r = np.asarray(physics.resistance_at_temperature(p[:, 1], tm, alpha))
        k = p[:, 2]
        qc = np.asarray(physics.cold_side_heat(current, t_cold, t_hot, s, r, k))
        power = np.asarray(physics.input_power(current, t_cold, t_hot, s, r))
        # COP = Qc/P from the two just computed, as physics.cop computes it.
        if np.any(power <= 0.0):
            raise EstimationError("COP is undefined where the electrical input power is <= 0")
        return np.column_stack(
            [
                qc,
                power,
                qc / power,
                physics.best_cop(t_cold, t_hot, s, r, k),
                physics.current_for_best_cop(t_cold, t_hot, s, r, k),
            ]
        )

    if t_hot <= t_cold:
        raise EstimationError("hot face not above cold face: COP figures undefined")
    try:
        values, errors = propagate(figures, p0, cov)
    except PhysicsError as exc:
        raise EstimationError(f"performance undefined at this operating point: {exc}") from exc
    carnot = float(physics.carnot_cop(t_cold, t_hot))
    est = [Estimate(float(v), float(se), n) for v, se in zip(values, errors, strict=True)]
    return Performance(est[0], est[1], est[2], est[3], est[4], Estimate(carnot, None, n))


def setpoint_capacity(
    setpoint_k: float,
    design_ambient_k: float,
    s25: float,
    r25: float,
    k: float,
    r_hot: float,
    r_cold: float,
    ua: float,
    max_current: float,
    *,
    max_voltage: float | None = None,
    q_internal: float = 0.0,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
) -> heat_paths.SetpointCapacity:
    """Whether the fitted cooler can hold its setpoint at the design ambient.

    Thin wrapper on :func:`..heat_paths.capacity_at_setpoint` with the fitted module (at
    25 °C, with temperature coefficients), sinks and cabinet.

    Parameters
    ----------
    setpoint_k : Cabinet setpoint [K].
    design_ambient_k : Ambient the unit must cope with [K].
    s25 : Seebeck coefficient at 25 °C [V/K].
    r25 : Resistance at 25 °C [ohm].
    k : Module thermal conductance [W/K].
    r_hot, r_cold : Sink resistances [K/W].
    ua : Cabinet heat-loss conductance [W/K].
    max_current : Largest drive current [A].
    max_voltage : Largest drive voltage, optional [V].
    q_internal : Heat released inside the cabinet (fans, electronics) [W].
    alpha, beta : Temperature coefficients of R and S [1/K].

    Returns
    -------
    The capacity figures.

    Raises
    ------
    EstimationError : the capacity could not be computed.
    """
    module = physics.ModuleParameters(s25, r25, k)
    try:
        return heat_paths.capacity_at_setpoint(
            setpoint_k,
            design_ambient_k,
            module,
            r_hot,
            r_cold,
            ua,
            max_current,
            max_voltage=max_voltage,
            q_internal=q_internal,
            alpha=alpha,
            beta=beta,
        )
    except PhysicsError as exc:
        raise EstimationError(f"capacity at setpoint not computable: {exc}") from exc
