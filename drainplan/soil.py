"""Soil profiles: a layered profile reduced to what the spacing methods take.

Pure numpy, SI (m, m/d). The drain-spacing methods see at most two layers
meeting at drain level (Hooghoudt) or one interface (Ernst); a profile of
several layers is reduced at the drain depth by thickness-weighted means,
which is how horizontal flow sees layers (transmissivity = sum of K times
thickness) [PRACTICE].
"""

from __future__ import annotations

import numpy as np

from .errors import InputError

__all__ = ["reduce_layers"]


def reduce_layers(thickness, k, drain_depth, *, drainable_porosity=None, barrier_depth=None,
                  porosity_zone=None):
    """Reduce a layered profile to K above and below drain level.

    Parameters
    ----------
    thickness : array_like
        Layer thicknesses from the surface down [m], > 0.
    k : array_like
        Saturated hydraulic conductivity of each layer [m/d], > 0.
    drain_depth : float
        Drain depth below the surface [m].
    drainable_porosity : array_like, optional
        Drainable porosity of each layer [-].
    barrier_depth : float, optional
        Depth of the impermeable barrier [m]; default the bottom of the last layer.
    porosity_zone : (top, bottom), optional
        Depth range over which the drainable porosity is averaged [m]
        (the water-table drawdown); default from the surface to the drains.

    Returns
    -------
    dict
        ``k_above`` and ``k_below`` [m/d] (thickness-weighted means above and
        below drain level, the lower one down to the barrier),
        ``barrier_depth`` [m], ``drainable_porosity`` [-] (or None).

    Examples
    --------
    >>> r = reduce_layers([0.5, 1.0, 2.0], [1.2, 0.6, 0.3], 1.0)
    >>> round(r["k_above"], 3), round(r["k_below"], 3), r["barrier_depth"]
    (0.9, 0.36, 3.5)
    """
    t = np.asarray(thickness, float)
    kk = np.asarray(k, float)
    if t.ndim != 1 or t.size == 0 or t.size != kk.size:
        raise InputError("soil layers need a thickness and a K each", param="layers")
    if np.any(~np.isfinite(t)) or np.any(t <= 0):
        raise InputError("soil layer thicknesses must be greater than 0 m", param="layers")
    if np.any(~np.isfinite(kk)) or np.any(kk <= 0):
        raise InputError("soil layer K values must be greater than 0 m/d", param="layers")
    top = np.concatenate([[0.0], np.cumsum(t)[:-1]])
    bottom = top + t
    zb = float(bottom[-1]) if barrier_depth is None else float(barrier_depth)
    zd = float(drain_depth)
    if not 0 < zd <= zb:
        raise InputError(f"drain depth {zd:g} m must lie within the profile (barrier at "
                         f"{zb:g} m)", param="drain_depth")
    if zb > bottom[-1] + 1e-9:
        raise InputError(f"the soil layers end at {bottom[-1]:g} m, above the barrier depth "
                         f"{zb:g} m; describe the profile down to the barrier",
                         param="layers")

    def mean(values, z0, z1):
        w = np.clip(np.minimum(bottom, z1) - np.maximum(top, z0), 0.0, None)
        return float((w * values).sum() / w.sum()) if w.sum() > 0 else float(values[-1])

    out = {"k_above": mean(kk, 0.0, zd), "k_below": mean(kk, zd, zb) if zb > zd
           else float(kk[np.searchsorted(bottom, zd - 1e-12)]), "barrier_depth": zb,
           "drainable_porosity": None}
    if drainable_porosity is not None:
        mu = np.asarray(drainable_porosity, float)
        z0, z1 = porosity_zone if porosity_zone is not None else (0.0, zd)
        out["drainable_porosity"] = mean(mu, z0, max(z1, z0 + 1e-6))
    return out
