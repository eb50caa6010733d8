"""Kirkham's (1958) solution for steady rain seeping into parallel drains."""

from __future__ import annotations

import numpy as np

from .._solve import bracketed_root
from .._validate import (as_float_arrays, require_positive, require_radius_below_barrier,
                        scalar_or_array)

__all__ = ["kirkham_f", "kirkham_head", "kirkham_spacing"]

_CASE_BLOCK = 2048   # cases per block when summing the series
_TERM_BLOCK = 256    # series terms per block
_EXP_LIMIT = 40.0    # stop once exp(-2 m x) < exp(-40) ~ 4e-18


def _check(depth_to_barrier, drain_radius):
    require_positive(drain_radius, "drain_radius", "drain radius", "m")
    require_positive(depth_to_barrier, "depth_to_barrier",
                     "depth to the barrier below drain level", "m")
    require_radius_below_barrier(depth_to_barrier, drain_radius)


def kirkham_f(spacing, depth_to_barrier, drain_radius):
    """Kirkham's geometry factor F_K for steady rain into parallel drains.

    Parameters
    ----------
    spacing : array_like
        Drain spacing L [m].
    depth_to_barrier : array_like
        Depth D of the impermeable layer below the drain centre [m], > 0.
    drain_radius : array_like
        Drain radius r [m], smaller than D.

    Returns
    -------
    numpy.ndarray or float
        F_K [-]; the midway head is ``h = q L F_K / K``.

    Notes
    -----
    Kirkham's series (Eq. 2.1 of the method notes)::

        F_K = (1/pi) [ ln(L / (pi r))
              + sum_{m>=1} (1/m) (cos(2 pi m r / L) - cos(m pi)) (coth(2 pi m D / L) - 1) ]

    The terms fall like ``exp(-4 pi m D / L)``; they are summed until that
    factor is below 1e-17, so shallow barriers (small D/L) need thousands of
    terms. Equating with the linear Hooghoudt form gives the equivalent depth
    ``d = L / (8 F_K)``, which agrees with the van der Molen & Wesseling series
    to within 0.05 % (the only difference being the finite-radius terms).
    Assumptions: homogeneous isotropic soil, steady uniform recharge, water
    table low enough to be linearised (h much smaller than D), drains running
    full as line sinks of radius r.

    References
    ----------
    .. [1] Kirkham, D. (1958). Seepage of steady rainfall through soil into
       drains. Transactions, American Geophysical Union 39(5), 892-908.

    Examples
    --------
    >>> round(float(kirkham_f(20.0, 2.0, 0.1)), 6)
    1.838977
    """
    L, D, r = as_float_arrays(spacing, depth_to_barrier, drain_radius)
    require_positive(L, "spacing", "drain spacing", "m")
    _check(D, r)
    shape = L.shape
    L, D, r = (np.ravel(v) for v in (L, D, r))
    x = 2.0 * np.pi * D / L
    total = np.zeros(L.size)
    for start in range(0, L.size, _CASE_BLOCK):
        sl = slice(start, start + _CASE_BLOCK)
        xs, ls, rs = x[sl], L[sl], r[sl]
        acc = np.zeros(xs.size)
        m0 = 1
        while True:
            active = m0 * xs < 0.5 * _EXP_LIMIT
            if not np.any(active):
                break
            m = np.arange(m0, m0 + _TERM_BLOCK, dtype=float)
            xa = xs[active, None]
            e = np.exp(-2.0 * m * xa)
            coth_minus_1 = 2.0 * e / (1.0 - e)
            cos_r = np.cos(2.0 * np.pi * m * rs[active, None] / ls[active, None])
            cos_pi = np.where(m % 2 == 1, -1.0, 1.0)
            acc[active] += np.sum((cos_r - cos_pi) * coth_minus_1 / m, axis=1)   # Eq. (2.1)
            m0 += _TERM_BLOCK
        total[sl] = acc
    fk = (np.log(L / (np.pi * r)) + total) / np.pi                            # Eq. (2.1)
    return scalar_or_array(fk.reshape(shape))


def kirkham_head(*, spacing, recharge, k, depth_to_barrier, drain_radius):
    """Midway water-table height above the drain centre, Kirkham (1958).

    Parameters
    ----------
    spacing : array_like
        Drain spacing L [m].
    recharge : array_like
        Steady rainfall or recharge rate q [m/d], > 0.
    k : array_like
        Saturated hydraulic conductivity K (homogeneous, isotropic) [m/d], > 0.
    depth_to_barrier : array_like
        Depth D of the impermeable layer below the drain centre [m].
    drain_radius : array_like
        Drain radius r [m].

    Returns
    -------
    numpy.ndarray or float
        h = q L F_K / K [m].

    References
    ----------
    .. [1] Kirkham, D. (1958). Seepage of steady rainfall through soil into
       drains. Transactions, American Geophysical Union 39(5), 892-908.

    Examples
    --------
    >>> round(float(kirkham_head(spacing=20.0, recharge=0.01, k=1.0,
    ...                          depth_to_barrier=2.0, drain_radius=0.1)), 4)
    0.3678
    """
    L, q, K = as_float_arrays(spacing, recharge, k)
    require_positive(q, "recharge", "recharge", "m/d")
    require_positive(K, "k", "hydraulic conductivity", "m/d")
    return scalar_or_array(q * L * kirkham_f(L, depth_to_barrier, drain_radius) / K)


def kirkham_spacing(*, head, recharge, k, depth_to_barrier, drain_radius, xtol=1e-6):
    """Drain spacing for which Kirkham's midway head equals ``head``.

    Parameters
    ----------
    head : array_like
        Allowed midway water-table height above the drain centre h [m], > 0.
    recharge, k, depth_to_barrier, drain_radius
        As in :func:`kirkham_head`.
    xtol : float
        Tolerance on the spacing [m].

    Returns
    -------
    numpy.ndarray or float
        Drain spacing L [m]; NaN with a ConvergenceWarning where none exists.

    Notes
    -----
    Solves ``q L F_K(L) / K = h`` with the shared bracketed solver, between a
    spacing of ``2 pi r`` and an upper bound from the Hooghoudt linear form
    with d = D (d never exceeds D).

    References
    ----------
    .. [1] Kirkham, D. (1958). Seepage of steady rainfall through soil into
       drains. Transactions, American Geophysical Union 39(5), 892-908.

    Examples
    --------
    >>> round(float(kirkham_spacing(head=0.3678, recharge=0.01, k=1.0,
    ...                             depth_to_barrier=2.0, drain_radius=0.1)), 1)
    20.0
    """
    h, q, K, D, r = as_float_arrays(head, recharge, k, depth_to_barrier, drain_radius)
    require_positive(h, "head", "water-table height midway above the drains", "m")
    require_positive(q, "recharge", "recharge", "m/d")
    require_positive(K, "k", "hydraulic conductivity", "m/d")
    _check(D, r)
    lo = 2.0 * np.pi * r
    hi = 1.05 * np.sqrt(8.0 * K * D * h / q) + 4.0 * lo

    def f(L, h, q, K, D, r):
        return q * L * kirkham_f(L, D, r) / K - h

    res = bracketed_root(f, lo, hi, (h, q, K, D, r), xtol=xtol, what="Kirkham spacing")
    return scalar_or_array(res.root)
