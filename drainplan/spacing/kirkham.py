"""Kirkham's (1958) solution for steady rain seeping into parallel drains."""

from __future__ import annotations

import numpy as np

from .._validate import (as_float_arrays, require_positive, require_radius_below_barrier,
                        scalar_or_array)
from .equivalent_depth import _flat, _kirkham_e2, _solve_spacing, _take, molen_wesseling_f

__all__ = ["kirkham_f", "kirkham_head", "kirkham_spacing"]


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

    Equating with the linear Hooghoudt form gives the equivalent depth
    ``d = L / (8 F_K)``, which agrees with the van der Molen & Wesseling series
    to within 0.05 %: writing ``cos(2 pi m r/L) = 1 - 2 sin^2(pi m r/L)``, the
    odd terms with the 1 are exactly van der Molen & Wesseling's F(x),
    x = 2 pi D / L, so ::

        pi F_K = ln(L / (pi r)) + F(x) - 2E,
        2E = sum_{k>=1} ln(1 + sin^2(pi r/L) / sinh^2(k x))

    (expanding ``coth(m x) - 1`` geometrically and summing over m first). 2E
    is a ratio of Jacobi theta functions; it is summed directly for
    x > pi/sqrt(2) and, for the shallow barriers whose direct series needs
    thousands of terms, through the theta functions' modular transformation::

        2E = ln(2D / (L sin(pi r/L))) + ln sinh(pi r/(2D)) - pi r^2/(2 D L)
             + sum_n ln((1 - 2 p^n cosh(pi r/D) + p^2n) / (1 - p^n)^2),
        p = exp(-pi L / D),

    a handful of terms either way (derived here; the published series itself
    is the reference of the tests).
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
    return scalar_or_array(_kirkham_f(L, D, r))


def _kirkham_f(L, D, r):
    """F_K without input checks: (ln(L/(pi r)) + F(2 pi D/L) - 2E) / pi."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore", under="ignore"):
        fk = (np.log(L / (np.pi * r)) + molen_wesseling_f(2.0 * np.pi * D / L)
              - _kirkham_e2(L, D, r)) / np.pi                                  # Eq. (2.1)
    return fk


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
    Solves ``q L F_K(L) / K = h``, i.e. ``L (pi F_K) = pi K h / q``, from a
    closed-form estimate with Halley steps (F_K and its derivative from the
    closed form in :func:`kirkham_f`), between a spacing of ``2 pi r`` and an
    upper bound from the Hooghoudt linear form with d = D (d never exceeds D);
    cases the steps cannot finish go to the bracketed solver.

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
    shape, inputs = _flat(h, q, K, D, r)

    def bracket(sel):
        h, q, K, D, r = _take(inputs, sel)
        lo = 2.0 * np.pi * r
        return lo, 1.05 * np.sqrt(8.0 * K * D * h / q) + 4.0 * lo

    def prepare(sel):
        h, q, K, D, r = _take(inputs, sel)
        lo, hi = bracket(sel)
        return np.pi * K * h / q, 0.0, D, r, lo, hi

    def f(L, i):
        h, q, K, D, r = _take(inputs, i)
        return q * L * _kirkham_f(L, D, r) / K - h

    n = int(np.prod(shape))
    L = _solve_spacing(n, prepare, bracket, f, cap=False, kirkham=True, xtol=xtol,
                       what="Kirkham spacing")
    return scalar_or_array(L.reshape(shape))
