"""The served Seebeck coefficient: the unit's electrical rows pooled over its recent windows.

Each window's electrical fit leaves the cross-product sums of its rows in the state
(``DeviceState.s_sums``); the served S is the fit of those of the last ``seebeck_pool_s``
(:func:`diagnostics.seebeck_pool.pool_seebeck`), since S does not wear while a single window
seldom separates it from R and the readings' offsets.
"""

from __future__ import annotations

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics
from tecfleet.analytics.diagnostics import seebeck_pool as sp
from tecfleet.analytics.errors import PhysicsError
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import AnalysisSettings, diagnostics_options
from tecfleet.analytics.runner.state import DeviceState

__all__ = ["serve_seebeck"]


def serve_seebeck(
    rows: EstimateRows,
    state: DeviceState,
    b: int,
    el: dg.ElectricalFit,
    prior: physics.ModuleParameters | None,
    span_s: float,
    f_s: float,
    cfg: AnalysisSettings,
) -> None:
    """Keep the window ending at ``b`` (epoch ms UTC) and store the served S25 and S.

    ``span_s`` is the time the window's rows cover [s]: windows longer than the cadence
    overlap, and their sums are counted at cadence/span. ``f_s`` is S's temperature factor
    at the window's mean module temperature [-]. Where nothing can be pooled (faces read
    from the voltage, whose S is the ratings'), the window's own S is served as before.
    """
    opts = diagnostics_options(cfg)
    kept = [e for e in state.s_sums or [] if e[0] > b - opts.seebeck_pool_s * 1000.0]
    if el.sums:
        weight = min(1.0, cfg.window_s / max(span_s, float(cfg.window_s)))
        # The offsets these temperatures were corrected by, put back in the pooling: the
        # pooled fit finds the constant offset itself, the same for every window.
        off = state.probe_offsets
        shift = 0.0 if off is None else float(off[2] - off[1])
        kept.append([float(b), weight, shift, *el.sums])
    state.s_sums = kept or None
    pooled = _pooled(kept, prior, cfg) if el.sums else None
    if pooled is None:
        s, se, ok = el.s25_offset_free, el.s25_offset_free_se, el.reliable
        n, note, basis = el.n_on + el.n_off, el.note, None
    else:
        s, se, ok, n = pooled.s25, pooled.s25_se, pooled.reliable, round(pooled.n)
        note = None if ok else "the pooled readings do not yet pin S to within 1 %"
        days = (b - kept[0][0]) / 86_400_000.0 + cfg.window_s / 86_400.0
        basis = (
            f"{rows.basis}; pooled over {pooled.windows} windows ({days:.1f} d), with the "
            "constant offsets of the ΔT, voltage and current readings"
        )
    rows.add("module.seebeck_25c_v_per_k", b, s, se, n, ok, note, basis)
    rows.add("module.seebeck_v_per_k", b, s * f_s, se * f_s, n, ok, note, basis)


def _pooled(
    kept: list[list[float]], prior: physics.ModuleParameters | None, cfg: AnalysisSettings
) -> sp.PooledSeebeck | None:
    # The pooled fit of the kept windows, None where it fails.
    e_prior = (prior.resistance, prior.seebeck, cfg.rating_rel_sd) if prior else None
    try:
        return sp.pool_seebeck(
            [e[3:] for e in kept], [e[1] for e in kept], [e[2] for e in kept], e_prior,
            options=diagnostics_options(cfg),
        )  # fmt: skip
    except PhysicsError:
        return None
