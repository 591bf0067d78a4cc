"""The served Seebeck coefficient: the unit's electrical rows pooled over its recent windows.

Each window's electrical fit leaves the cross-product sums of its rows, folded into one block
per UTC day in the state (``DeviceState.s_days``); the served S is the fit of the blocks of the
last ``seebeck_pool_s`` (:func:`diagnostics.seebeck_pool.pool_seebeck`), since S does not wear
while a single window seldom separates it from R and the readings' offsets. A day's block
keeps what its windows would (the sums are linear in the rows) in a quarter of the room.
"""

from __future__ import annotations

from collections.abc import Sequence

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics
from tecfleet.analytics.diagnostics import seebeck_pool as sp
from tecfleet.analytics.errors import PhysicsError
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import AnalysisSettings, diagnostics_options
from tecfleet.analytics.runner.state import DeviceState

__all__ = ["serve_seebeck"]

_DAY_MS = 86_400_000


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
    A day's block is kept while its last window is within ``seebeck_pool_s``.
    """
    opts = diagnostics_options(cfg)
    days = _folded_older(state)
    if el.sums:
        weight = min(1.0, cfg.window_s / max(span_s, float(cfg.window_s)))
        # The offsets these temperatures were corrected by, put back in the pooling: the
        # pooled fit finds the constant offset itself, the same for every window.
        off = state.probe_offsets
        shift = 0.0 if off is None else float(off[2] - off[1])
        days = _fold(days, float(b), weight, shift, el.sums)
    kept = [d for d in days if d[1] > b - opts.seebeck_pool_s * 1000.0]
    state.s_days = kept or None
    pooled = _pooled(kept, prior, cfg) if el.sums else None
    if pooled is None:
        s, se, ok = el.s25_offset_free, el.s25_offset_free_se, el.reliable
        n, note, basis = el.n_on + el.n_off, el.note, None
    else:
        s, se, ok, n = pooled.s25, pooled.s25_se, pooled.reliable, round(pooled.n)
        note = None if ok else "the pooled readings do not yet pin S to within 1 %"
        span_d = (b - kept[0][0]) / _DAY_MS + cfg.window_s / 86_400.0
        windows = round(sum(d[2] for d in kept))
        basis = (
            f"{rows.basis}; pooled over {windows} windows ({span_d:.1f} d), with the "
            "constant offsets of the ΔT, voltage and current readings"
        )
    rows.add("module.seebeck_25c_v_per_k", b, s, se, n, ok, note, basis)
    rows.add("module.seebeck_v_per_k", b, s * f_s, se * f_s, n, ok, note, basis)


def _fold(
    days: list[list[float]], at: float, weight: float, shift: float, sums: Sequence[float]
) -> list[list[float]]:
    # The window ending at ``at`` added to its UTC day's block (a new one on a new day).
    last = days[-1] if days else None
    if last is not None and last[0] // _DAY_MS == at // _DAY_MS:
        block = sp.fold_sums(last[3:], sums, weight, shift)
        return [*days[:-1], [last[0], at, last[2] + 1.0, *block]]
    return [*days, [at, at, 1.0, *sp.fold_sums(None, sums, weight, shift)]]


def _folded_older(state: DeviceState) -> list[list[float]]:
    # The state's day blocks, with windows kept in the older per-window layout folded in.
    days = list(state.s_days or [])
    for e in state.s_sums or []:
        days = _fold(days, e[0], e[1], e[2], e[3:])
    state.s_sums = None
    return days


def _pooled(
    kept: list[list[float]], prior: physics.ModuleParameters | None, cfg: AnalysisSettings
) -> sp.PooledSeebeck | None:
    # The pooled fit of the kept day blocks, None where it fails.
    e_prior = (prior.resistance, prior.seebeck, cfg.rating_rel_sd) if prior else None
    ones = [1.0] * len(kept)
    try:
        return sp.pool_seebeck(
            [d[3:] for d in kept], ones, [0.0] * len(kept), e_prior,
            options=diagnostics_options(cfg),
        )  # fmt: skip
    except PhysicsError:
        return None
