"""Soil water properties estimated from texture, and drainable porosity from a
retention curve.

* :func:`saxton_rawls` — Saxton & Rawls (2006) pedotransfer equations: water
  contents at wilting point, field capacity and saturation, saturated K and a
  drainable porosity from sand, clay and organic matter. An **estimate** for
  screening when no field test was made; field K (:mod:`drainplan.auger_hole`)
  should govern a design.
* :func:`van_genuchten_water_content` and
  :func:`van_genuchten_drainable_porosity` — drainable porosity for a fall of
  the water table, from van Genuchten retention parameters, assuming
  hydrostatic equilibrium above the water table.

Pure numpy/scipy, SI out (m³/m³, m/d, m); vectorised over cases.
"""

from __future__ import annotations

import numpy as np

from ._validate import as_float_arrays, require_nonnegative, require_positive, scalar_or_array
from .errors import InputError

__all__ = ["saxton_rawls", "van_genuchten_water_content", "van_genuchten_drainable_porosity"]

_MM_PER_H_TO_M_PER_D = 24.0 / 1000.0


def saxton_rawls(*, sand, clay, organic_matter=2.5, density_factor=1.0):
    """Water contents and saturated K from texture (Saxton & Rawls 2006).

    Parameters
    ----------
    sand, clay : array_like
        Sand and clay content [% by mass of the mineral fine earth], 0–100,
        sand + clay <= 100.
    organic_matter : array_like
        Organic matter [% by mass], 0–8 (the paper's calibration range).
    density_factor : array_like
        Ratio of the actual to the "normal" bulk density [-], 0.9–1.3
        (1 = no compaction adjustment).

    Returns
    -------
    dict of float or numpy.ndarray
        ``theta_wilting_point`` (1500 kPa), ``theta_field_capacity``
        (33 kPa), ``theta_saturation`` [m³/m³]; ``air_entry_kpa`` [kPa];
        ``bulk_density_g_cm3``; ``ksat_m_per_d`` [m/d]; ``ksat_mm_per_h``;
        ``drainable_porosity`` [-] = θS − θ33 (the air-filled porosity at
        field capacity, a common rough value for drainage design).

    Raises
    ------
    drainplan.errors.InputError
        For fractions outside 0–100 %, sand + clay above 100 %, organic
        matter outside 0–8 % or a density factor outside 0.9–1.3.

    Notes
    -----
    Equations 1–5, 16 and the density adjustment (Eqs. 6–10) of [1], with S
    and C as decimal fractions and OM in % (not a fraction)::

        θ1500t = -0.024 S + 0.487 C + 0.006 OM + 0.005 S OM - 0.013 C OM + 0.068 S C + 0.031
        θ1500  = θ1500t + (0.14 θ1500t - 0.02)                                   (Eq. 1)
        θ33t   = -0.251 S + 0.195 C + 0.011 OM + 0.006 S OM - 0.027 C OM + 0.452 S C + 0.299
        θ33    = θ33t + (1.283 θ33t² - 0.374 θ33t - 0.015)                        (Eq. 2)
        θS33t  = 0.278 S + 0.034 C + 0.022 OM - 0.018 S OM - 0.027 C OM - 0.584 S C + 0.078
        θS33   = θS33t + (0.636 θS33t - 0.107)                                   (Eq. 3)
        ψet    = -21.67 S - 27.93 C - 81.97 θS33 + 71.12 S θS33 + 8.29 C θS33 + 14.05 S C + 27.16
        ψe     = ψet + (0.02 ψet² - 0.113 ψet - 0.70)                             (Eq. 4)
        θS     = θ33 + θS33 - 0.097 S + 0.043                                    (Eq. 5)
        B = (ln 1500 - ln 33) / (ln θ33 - ln θ1500),  λ = 1/B
        Ks = 1930 (θS - θ33)^(3 - λ)   [mm/h]                                    (Eq. 16)

    Validity: agricultural mineral soils inside the calibration data (OM up
    to 8 %, clay up to about 60 %); poor for very high clay, organic or
    salt-affected soils. Saturated K from texture can be off by a factor of
    several for a given field; treat it as a screening value.

    References
    ----------
    .. [1] Saxton, K.E. and Rawls, W.J. (2006). Soil water characteristic
       estimates by texture and organic matter for hydrologic solutions. Soil
       Science Society of America Journal 70: 1569-1578.
       doi:10.2136/sssaj2005.0117

    Examples
    --------
    Loam, 40 % sand, 20 % clay, 2.5 % organic matter:

    >>> r = saxton_rawls(sand=40, clay=20, organic_matter=2.5)
    >>> round(float(r["theta_field_capacity"]), 3), round(float(r["ksat_mm_per_h"]), 1)
    (0.28, 15.5)
    """
    sand_p, clay_p, om, df = as_float_arrays(sand, clay, organic_matter, density_factor)
    require_nonnegative(sand_p, "sand", "sand content", "%")
    require_nonnegative(clay_p, "clay", "clay content", "%")
    require_nonnegative(om, "organic_matter", "organic matter", "%")
    if np.any(sand_p > 100) or np.any(clay_p > 100) or np.any(sand_p + clay_p > 100):
        raise InputError("sand + clay must not exceed 100 %", param="clay")
    if np.any(om > 8):
        raise InputError("organic matter above 8 % is outside the range of the Saxton & Rawls "
                         "equations", param="organic_matter")
    if np.any(df < 0.9) or np.any(df > 1.3):
        raise InputError("density factor must be between 0.9 and 1.3", param="density_factor")
    S, C = sand_p / 100.0, clay_p / 100.0
    t1500t = (-0.024 * S + 0.487 * C + 0.006 * om + 0.005 * S * om - 0.013 * C * om
              + 0.068 * S * C + 0.031)
    t1500 = t1500t + (0.14 * t1500t - 0.02)                               # Eq. (1)
    t33t = (-0.251 * S + 0.195 * C + 0.011 * om + 0.006 * S * om - 0.027 * C * om
            + 0.452 * S * C + 0.299)
    t33 = t33t + (1.283 * t33t ** 2 - 0.374 * t33t - 0.015)              # Eq. (2)
    ts33t = (0.278 * S + 0.034 * C + 0.022 * om - 0.018 * S * om - 0.027 * C * om
             - 0.584 * S * C + 0.078)
    ts33 = ts33t + (0.636 * ts33t - 0.107)                                # Eq. (3)
    psit = (-21.67 * S - 27.93 * C - 81.97 * ts33 + 71.12 * S * ts33 + 8.29 * C * ts33
            + 14.05 * S * C + 27.16)
    psie = psit + (0.02 * psit ** 2 - 0.113 * psit - 0.70)               # Eq. (4)
    ts = t33 + ts33 - 0.097 * S + 0.043                                   # Eq. (5)
    rho_n = (1.0 - ts) * 2.65                                             # Eq. (6)
    # density adjustment, Eqs. (7)-(10); DF = 1 leaves the values unchanged
    rho = rho_n * df
    ts_df = 1.0 - rho / 2.65
    t33_df = t33 - 0.2 * (ts - ts_df)
    if np.any(t33_df <= t1500) or np.any(ts_df <= t33_df):
        raise InputError("this texture and density give water contents out of order "
                         "(outside the range of the equations)", param="density_factor")
    B = (np.log(1500.0) - np.log(33.0)) / (np.log(t33_df) - np.log(t1500))   # Eq. (15)
    lam = 1.0 / B
    ks = 1930.0 * (ts_df - t33_df) ** (3.0 - lam)                         # Eq. (16), mm/h
    out = {"theta_wilting_point": t1500, "theta_field_capacity": t33_df,
           "theta_saturation": ts_df, "air_entry_kpa": psie, "bulk_density_g_cm3": rho,
           "ksat_mm_per_h": ks, "ksat_m_per_d": ks * _MM_PER_H_TO_M_PER_D,
           "drainable_porosity": ts_df - t33_df}
    return {k: scalar_or_array(v) for k, v in out.items()}


def van_genuchten_water_content(suction, *, theta_r, theta_s, alpha, n):
    """Water content at a suction head by van Genuchten's retention curve.

    Parameters
    ----------
    suction : array_like
        Suction head ψ >= 0 [m].
    theta_r, theta_s : array_like
        Residual and saturated water contents [m³/m³], 0 <= θr < θs <= 1.
    alpha : array_like
        Inverse air-entry scale α [1/m], > 0.
    n : array_like
        Shape parameter [-], > 1 (m = 1 - 1/n).

    Returns
    -------
    float or numpy.ndarray
        Volumetric water content θ [m³/m³].

    Notes
    -----
    θ(ψ) = θr + (θs − θr) / [1 + (α ψ)^n]^m, m = 1 − 1/n (Eq. 21 of [1]).

    References
    ----------
    .. [1] van Genuchten, M.Th. (1980). A closed-form equation for predicting
       the hydraulic conductivity of unsaturated soils. Soil Science Society of
       America Journal 44: 892-898.

    Examples
    --------
    >>> round(float(van_genuchten_water_content(1.0, theta_r=0.078, theta_s=0.43,
    ...                                         alpha=3.6, n=1.56)), 4)
    0.2421
    """
    psi, tr, ts, a, n_ = _vg_args(suction, theta_r, theta_s, alpha, n)
    require_nonnegative(psi, "suction", "suction head", "m")
    return scalar_or_array(_vg_theta(psi, tr, ts, a, n_))


def _vg_args(*values):
    psi, tr, ts, a, n = as_float_arrays(*values)
    require_nonnegative(tr, "theta_r", "residual water content", "")
    require_positive(ts, "theta_s", "saturated water content", "")
    if np.any(tr >= ts) or np.any(ts > 1):
        raise InputError("water contents need 0 <= theta_r < theta_s <= 1", param="theta_s")
    require_positive(a, "alpha", "van Genuchten alpha", "1/m")
    require_positive(n, "n", "van Genuchten n", "")
    if np.any(n <= 1):
        raise InputError("van Genuchten n must be greater than 1", param="n")
    return psi, tr, ts, a, n


def _vg_theta(psi, tr, ts, a, n):
    m = 1.0 - 1.0 / n
    return tr + (ts - tr) / (1.0 + (a * psi) ** n) ** m


# composite Gauss-Legendre rule: 16 panels of 8 nodes (exact for smooth integrands,
# and the weak singularity of (a z)^n at z = 0 is confined to the first panel)
_GL_X, _GL_W = np.polynomial.legendre.leggauss(8)
_PANELS = 16


def _drained_between(z1, z2, tr, ts, a, n):
    """∫_z1^z2 (θs − θ(ζ)) dζ, vectorised over cases, by composite Gauss-Legendre."""
    edges = np.linspace(0.0, 1.0, _PANELS + 1) ** 2      # graded towards the upper end
    lo, hi = edges[:-1], edges[1:]
    u = ((0.5 * (hi - lo))[:, None] * _GL_X[None, :] + (0.5 * (hi + lo))[:, None]).ravel()
    w = ((0.5 * (hi - lo))[:, None] * _GL_W[None, :]).ravel()
    span = z2 - z1
    zz = z1[..., None] + span[..., None] * u
    f = ts[..., None] - _vg_theta(zz, tr[..., None], ts[..., None], a[..., None], n[..., None])
    return span * (f * w).sum(axis=-1)


def van_genuchten_drainable_porosity(*, theta_r, theta_s, alpha, n, from_depth, to_depth):
    """Drainable porosity for a fall of the water table, from a retention curve.

    Parameters
    ----------
    theta_r, theta_s, alpha, n : array_like
        Van Genuchten parameters (see :func:`van_genuchten_water_content`;
        α in 1/m).
    from_depth, to_depth : array_like
        Water-table depth below the surface before and after the fall [m],
        0 <= from_depth <= to_depth. Equal depths give the incremental
        (specific) yield θs − θ(ψ = depth).

    Returns
    -------
    float or numpy.ndarray
        Drainable porosity μ [-]: the water released per unit area per unit
        fall of the water table.

    Notes
    -----
    With the profile in hydrostatic equilibrium above the water table (the
    suction at height ζ above it is ζ), the air-filled volume per unit area
    with the water table at depth z is V(z) = ∫_0^z [θs − θ(ζ)] dζ, and
    μ(z1, z2) = [V(z2) − V(z1)] / (z2 − z1) (Eqs. 6.2 and 6.3 of drainplan's
    method notes; derived). The integral is evaluated by composite
    Gauss–Legendre quadrature (16 graded panels × 8 nodes). Assumes slow
    drainage (equilibrium), no hysteresis and a homogeneous profile; μ grows
    with the depth of the water table, so use the range of the design
    drawdown (e.g. from the surface to the design water-table depth).

    References
    ----------
    .. [1] van Genuchten, M.Th. (1980). Soil Science Society of America
       Journal 44: 892-898.

    Examples
    --------
    Loam-like parameters, water table falling from the surface to 0.5 m:

    >>> round(float(van_genuchten_drainable_porosity(theta_r=0.078, theta_s=0.43,
    ...       alpha=3.6, n=1.56, from_depth=0.0, to_depth=0.5)), 4)
    0.0663
    """
    z1, z2, tr, ts, a, n_ = as_float_arrays(from_depth, to_depth, theta_r, theta_s, alpha, n)
    _vg_args(z1, tr, ts, a, n_)
    require_nonnegative(z1, "from_depth", "initial water-table depth", "m")
    require_nonnegative(z2, "to_depth", "final water-table depth", "m")
    if np.any(z2 < z1):
        raise InputError("the final water-table depth must not be above the initial one",
                         param="to_depth")
    same = np.isclose(z2, z1, rtol=0, atol=1e-9)
    with np.errstate(invalid="ignore", divide="ignore"):
        mu = _drained_between(z1, z2, tr, ts, a, n_) / np.where(same, 1.0, z2 - z1)
    mu = np.where(same, ts - _vg_theta(z2, tr, ts, a, n_), mu)
    return scalar_or_array(mu)
