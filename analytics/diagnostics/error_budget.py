"""Stated errors: what the estimators' standard errors carry beyond the readings' scatter.

Constant offsets do not average out: the current reading's offset (``current_offset``), a
constant offset between probes (``probe_offset_k``) and the errors of S and R. Each is
carried to first order by the fit's own linear response to it (JCGM 100:2008, GUM, eq. (13)):
a change δ of what a fit's left-hand side expects moves its parameters by (XᵀX)⁻¹Xᵀ·δ, so an
offset of standard uncertainty u adds g·gᵀ·u² to their covariance.

Errors that are the same in every window (probe offsets, S and R, a held K) cancel in a
quantity's change against its own baseline; for UA they are kept apart (``ua_probe``) so that
its changes can be judged on the fit's own precision.
"""

from __future__ import annotations

import math

import numpy as np

from .._validate import FloatArray

__all__ = ["cabinet_stderrs", "electrical_offsets", "sink_k_errors"]


def electrical_offsets(
    x: FloatArray,
    xtx: FloatArray,
    coef: FloatArray,
    cov: FloatArray,
    f_r: FloatArray,
    f_s: FloatArray,
    data_ok: bool,
    current_offset: float,
    probe_offset_k: float,
) -> tuple[FloatArray, float]:
    """(R, S) covariance with the current reading's and the probes' ΔT offsets carried in.

    An offset δ of the current changes the voltage V = I·R·f_r + S·ΔT·f_s expects by
    -R·f_r·δ on the samples with current, one of ΔT by -S·f_s·δ on all (Goldsmid 2010,
    ch. 2), which moves the fitted (R, S) by (XᵀX)⁻¹Xᵀ of that; only R's column where S is
    held (``data_ok`` False).

    Parameters
    ----------
    x : Design of the electrical fit, columns I·f_r [A], ΔT·f_s [K].
    xtx : Xᵀ·X of it [A², A·K, K²].
    coef : Fitted (R25 [ohm], S25 [V/K]).
    cov : Their covariance before the offsets [ohm², ohm·V/K, (V/K)²].
    f_r, f_s : Temperature factors of R and S per row [-].
    data_ok : Whether R and S were both fitted from the readings [-].
    current_offset : Standard uncertainty of the current reading's offset [A].
    probe_offset_k : Standard uncertainty of the probes' ΔT offset [K].

    Returns
    -------
    (covariance with the offsets [as ``cov``], S's standard error from the current offset
    alone [V/K]).
    """
    cov = np.array(cov, dtype=np.float64)
    on_rows = x[:, 0] != 0.0
    shifts = (
        (np.where(on_rows, coef[0] * f_r, 0.0), current_offset),
        (coef[1] * f_s, probe_offset_k),
    )
    s_current = 0.0  # S's part from the current reading's offset
    for j, (shift, sd) in enumerate(shifts):
        if data_ok:
            g = np.linalg.solve(xtx, x.T @ shift)
            cov += np.outer(g, g) * sd**2
            if j == 0:
                s_current = float(g[1]) * sd
        else:
            g0 = float(x[:, 0] @ shift) / float(xtx[0, 0])
            cov[0, 0] += (g0 * sd) ** 2
    return cov, s_current


def sink_k_errors(
    k_sd_scatter: float, cov1: FloatArray, forced: bool, k_prior: float, k_prior_rel: float
) -> tuple[float, float, bool]:
    """K's standard error, the part the probe offsets leave unresolved, and whether the
    readings rather than the prior determine K.

    Parameters
    ----------
    k_sd_scatter : K's standard error from the sink fit without offset terms [W/K].
    cov1 : Covariance of the sink fit with the offset terms; K first [W/K, ...].
    forced : K held at its prior (or the unit's settled value) [-].
    k_prior : K's prior [W/K].
    k_prior_rel : Relative standard deviation of that prior [-].

    Returns
    -------
    (K's error from scatter [W/K], from probe offsets [W/K], K from data [-]).
    """
    k_sd_all = float(np.sqrt(max(cov1[0, 0], 0.0)))
    k_probe = 0.0 if forced else math.sqrt(max(k_sd_all**2 - k_sd_scatter**2, 0.0))
    k_sd = k_sd_all if forced else min(k_sd_scatter, k_sd_all)
    k_from_data = not forced and k_sd_all < 0.5 * k_prior_rel * k_prior
    return k_sd, k_probe, k_from_data


def cabinet_stderrs(
    cov1: FloatArray,
    cov2: FloatArray,
    resp_cab: FloatArray,
    dk_el: FloatArray,
    ua: float,
    k_sd: float,
    k_probe: float,
    held_cab: bool,
    sr_rel_cov: FloatArray | None,
    probe_offset_k: float,
) -> dict[str, float]:
    """Standard errors of the thermal fit's parameters, by name (see ``ThermalFit.stderrs``).

    UA's own error adds K's scatter through UA's response to K where the cabinet uses this
    window's K; ``ua_probe`` holds the parts that are the same in every window: the probe
    offsets through K and in Ta - Tcab itself (a shift of UA·τ), a held K, and the errors of
    S and R, directly and through K.

    Parameters
    ----------
    cov1 : Covariance of the sink fit (K, c_cold, g_cold, g_hot, c_hot, ...).
    cov2 : Covariance of the cabinet fit (UA, q_internal, C, ...).
    resp_cab : The cabinet fit's response to a change of Qc by -∫ΔT (per W/K of K), by
        S·I·Tc and -½·I²·R (per unit relative error of S, R), and by τ (per W) [W/K, ...].
    dk_el : K's response to a unit relative error of S and of R [W/K].
    ua : Fitted UA [W/K].
    k_sd, k_probe : K's error from scatter and from probe offsets [W/K].
    held_cab : The cabinet used a held or settled K [-].
    sr_rel_cov : Covariance of the relative errors of S and R, None: none [-].
    probe_offset_k : Standard uncertainty of a probe offset [K].

    Returns
    -------
    Standard errors by parameter name.
    """
    sd1 = np.sqrt(np.maximum(np.diag(cov1), 0.0))
    sd2 = np.sqrt(np.maximum(np.diag(cov2), 0.0))
    dua_dk, dua_offset = abs(float(resp_cab[0, 0])), ua * abs(float(resp_cab[3, 0]))
    dua_el = resp_cab[1:3, 0] + dk_el * float(resp_cab[0, 0])
    cov_el = np.zeros((2, 2)) if sr_rel_cov is None else np.asarray(sr_rel_cov, dtype=np.float64)
    k_el, ua_el = _combined_sd(dk_el, cov_el), _combined_sd(dua_el, cov_el)
    ua_sd = math.hypot(float(sd2[0]), 0.0 if held_cab else k_sd * dua_dk)
    ua_probe = math.hypot(
        k_probe * dua_dk,
        k_sd * dua_dk if held_cab else 0.0,
        dua_offset * probe_offset_k,
        ua_el,
    )
    return {
        "k": math.hypot(k_sd, k_probe, k_el),
        "c_cold": float(sd1[1]),
        "g_cold": float(sd1[2]),
        "g_hot": float(sd1[3]),
        "c_hot": float(sd1[4]),
        "ua": ua_sd,
        "ua_probe": ua_probe,
        "q_internal": float(sd2[1]),
        "c": float(sd2[2]),
    }


def _combined_sd(weights: FloatArray, cov: FloatArray) -> float:
    """√(wᵀ·C·w): the standard error of a first-order combination with ``weights`` of
    parameters with covariance ``cov`` (JCGM 100:2008, eq. (13); from memory). A parameter
    the readings left unbounded (infinite variance) makes it infinite where its weight is
    not zero and adds nothing where it is, rather than the NaN of 0·∞."""
    used = np.asarray(weights, np.float64) != 0.0
    w, c = np.asarray(weights, np.float64)[used], np.asarray(cov, np.float64)[np.ix_(used, used)]
    if not np.all(np.isfinite(c)):
        return math.inf
    return math.sqrt(max(float(w @ c @ w), 0.0))
