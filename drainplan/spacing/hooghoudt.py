"""Hooghoudt's steady-state drain-spacing equation with the equivalent depth.

Three unknowns can be solved for, each a plain vectorised function:
:func:`hooghoudt_spacing` (L from q and h), :func:`hooghoudt_head` (h from L
and q) and :func:`hooghoudt_recharge` (q from L and h).
"""

from __future__ import annotations

import numpy as np

from .._validate import (as_float_arrays, require_positive, require_nonnegative,
                        require_radius_below_barrier, scalar_or_array)
from .equivalent_depth import (EQUIVALENT_DEPTH_METHODS, _equivalent_depth_unchecked,
                               _flat, _solve_spacing, _take)
from ..errors import InputError

__all__ = ["hooghoudt_spacing", "hooghoudt_head", "hooghoudt_recharge"]


def _check_profile(k_above, k_below, depth_to_barrier, drain_radius, method):
    if method not in EQUIVALENT_DEPTH_METHODS:
        raise InputError(
            f"equivalent-depth method {method!r} is unknown; choose one of "
            + ", ".join(EQUIVALENT_DEPTH_METHODS), param="equivalent_depth_method")
    require_positive(k_above, "k_above", "hydraulic conductivity above drain level", "m/d")
    require_positive(k_below, "k_below", "hydraulic conductivity below drain level", "m/d")
    require_nonnegative(depth_to_barrier, "depth_to_barrier",
                        "depth to the barrier below drain level", "m")
    require_positive(drain_radius, "drain_radius", "drain radius", "m")
    require_radius_below_barrier(depth_to_barrier, drain_radius)


def hooghoudt_spacing(*, recharge, head, k_below, depth_to_barrier, drain_radius,
                      k_above=None, equivalent_depth_method="series", xtol=1e-6):
    """Drain spacing from Hooghoudt's steady-state equation.

    Parameters
    ----------
    recharge : array_like
        Steady recharge q, equal to the drain discharge per unit area [m/d].
    head : array_like
        Design height h of the water table midway between drains above drain
        level [m].
    k_below : array_like
        Saturated hydraulic conductivity K2 of the soil below drain level [m/d].
    depth_to_barrier : array_like
        Thickness D of the pervious layer from drain level to the impermeable
        barrier [m]; 0 for drains on the barrier.
    drain_radius : array_like
        Effective drain radius r0 [m].
    k_above : array_like, optional
        Conductivity K1 of the soil above drain level [m/d]; default ``k_below``
        (homogeneous profile).
    equivalent_depth_method : {"series", "moody"}
        How the equivalent depth d is computed (see
        :func:`~drainplan.spacing.equivalent_depth.equivalent_depth`).
    xtol : float
        Tolerance on the spacing [m].

    Returns
    -------
    numpy.ndarray or float
        Drain spacing L [m]. NaN (with a
        :class:`~drainplan.errors.ConvergenceWarning`) where no spacing wider
        than the drains themselves satisfies the equation.

    Raises
    ------
    drainplan.errors.InputError
        For non-positive recharge, head, conductivity or radius, a negative
        depth to the barrier, or a radius not smaller than that depth.

    Notes
    -----
    Hooghoudt's equation (Eq. 8.7 in [3]; Eq. 1.1 of the method notes)::

        q L^2 = 8 K2 d h + 4 K1 h^2

    with d = d(L, D, r0), so L is found as the root of
    ``f(L) = q L^2 - 8 K2 d(L) h - 4 K1 h^2`` between the Donnan spacing
    ``sqrt(4 K1 h^2 / q)`` (d = 0) and ``sqrt((8 K2 D h + 4 K1 h^2) / q)``
    (d = D): writing d = pi L / (8 W) with W = ln(L / (pi r0)) + F, the
    equation is ``W (L - B/L) = A`` with A = pi K2 h / q and B = 4 K1 h^2 / q,
    which two Halley steps solve from a closed-form estimate (deep-barrier and
    shallow-barrier limits of d), the first with two terms of the series of
    :func:`~drainplan.spacing.equivalent_depth.molen_wesseling_f`, the second
    with all of them, and the stop rule of :func:`drainplan._solve.newton_block`
    (further steps for the rare case it does not end; cases Halley cannot
    finish go to the bracketed solver). With D = 0 it reduces to the Donnan (Colding) form
    ``q L^2 = 4 K h^2``. Assumptions: two-dimensional steady flow to
    parallel drains; soil layers homogeneous with their interface at drain
    level; the barrier horizontal; radial flow near the drain folded into d.

    References
    ----------
    .. [1] Hooghoudt, S.B. (1940). Algemeene beschouwing van het probleem van de
       detailontwatering en de infiltratie door middel van parallel loopende
       drains, greppels, slooten en kanalen. Bijdragen tot de kennis van eenige
       natuurkundige grootheden van den grond 7, 's-Gravenhage.
    .. [2] van der Molen, W.H. and Wesseling, J. (1991). Agricultural Water
       Management 19, 1-16.
    .. [3] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.,
       Wageningen.

    Examples
    --------
    >>> round(float(hooghoudt_spacing(recharge=0.001, head=1.0, k_below=0.14,
    ...                               depth_to_barrier=4.8, drain_radius=0.1)), 1)
    64.0
    """
    if k_above is None:
        k_above = k_below
    q, h, k1, k2, D, r0 = as_float_arrays(recharge, head, k_above, k_below,
                                          depth_to_barrier, drain_radius)
    require_positive(q, "recharge", "recharge", "m/d")
    require_positive(h, "head", "water-table height midway above drain level", "m")
    _check_profile(k1, k2, D, r0, equivalent_depth_method)
    shape, inputs = _flat(q, h, k1, k2, D, r0)

    def prepare(sel):
        q, h, k1, k2, D, r0 = _take(inputs, sel)
        # q L^2 = 8 K2 h d + 4 K1 h^2 with d = pi L / (8 W):  L^2 = A L / W + B;
        # the root lies between the Donnan spacing (d = 0) and L_D (d = D)
        hq = h / q
        return (np.pi * k2) * hq, (4.0 * k1) * (h * hq), D, r0, (np.pi * (1.0 + 1e-6)) * r0, None

    def bracket(sel):
        q, h, k1, k2, D, r0 = _take(inputs, sel)
        c_above = 4.0 * k1 * h * h
        lo = np.maximum(np.sqrt(c_above / q), np.pi * r0 * (1.0 + 1e-6))
        # d <= D, so the d = D spacing is an upper bound; the factor absorbs rounding
        hi = np.sqrt((8.0 * k2 * h * D + c_above) / q) * (1.0 + 1e-9)
        return lo, hi

    def f(L, i):
        q, h, k1, k2, D, r0 = _take(inputs, i)
        d = _equivalent_depth_unchecked(L, D, r0, equivalent_depth_method)
        return q * L * L - 8.0 * k2 * h * d - 4.0 * k1 * h * h         # Eq. (1.1)

    n = int(np.prod(shape))
    L = _solve_spacing(n, prepare, bracket, f, method=equivalent_depth_method, xtol=xtol,
                       what="Hooghoudt spacing")
    return scalar_or_array(L.reshape(shape))


def hooghoudt_head(*, spacing, recharge, k_below, depth_to_barrier, drain_radius,
                   k_above=None, equivalent_depth_method="series"):
    """Midway water-table height h from Hooghoudt's equation, for a given spacing.

    Parameters are those of :func:`hooghoudt_spacing`, with ``spacing`` L [m]
    given instead of ``head``.

    Returns
    -------
    numpy.ndarray or float
        Height h of the water table midway between drains above drain level [m].

    Notes
    -----
    The positive root of ``4 K1 h^2 + 8 K2 d h - q L^2 = 0``, written in the
    cancellation-free form ``h = 2 q L^2 / (8 K2 d + sqrt((8 K2 d)^2 + 16 K1 q L^2))``.

    References
    ----------
    .. [1] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.

    Examples
    --------
    >>> round(float(hooghoudt_head(spacing=64.0, recharge=0.001, k_below=0.14,
    ...                            depth_to_barrier=4.8, drain_radius=0.1)), 3)
    1.0
    """
    if k_above is None:
        k_above = k_below
    L, q, k1, k2, D, r0 = as_float_arrays(spacing, recharge, k_above, k_below,
                                          depth_to_barrier, drain_radius)
    require_positive(L, "spacing", "drain spacing", "m")
    require_positive(q, "recharge", "recharge", "m/d")
    _check_profile(k1, k2, D, r0, equivalent_depth_method)
    d = _equivalent_depth_unchecked(L, D, r0, equivalent_depth_method)
    b = 8.0 * k2 * d
    h = 2.0 * q * L * L / (b + np.sqrt(b * b + 16.0 * k1 * q * L * L))
    return scalar_or_array(h)


def hooghoudt_recharge(*, spacing, head, k_below, depth_to_barrier, drain_radius,
                       k_above=None, equivalent_depth_method="series"):
    """Steady recharge (drain discharge) q that a spacing carries at a given head.

    With ``head`` equal to the drain depth (water table at the surface midway)
    this is the drainage intensity of the system.

    Parameters are those of :func:`hooghoudt_spacing`, with ``spacing`` L [m]
    given instead of ``recharge``.

    Returns
    -------
    numpy.ndarray or float
        q = (8 K2 d h + 4 K1 h^2) / L^2 [m/d].

    References
    ----------
    .. [1] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.

    Examples
    --------
    >>> round(float(hooghoudt_recharge(spacing=64.0, head=1.0, k_below=0.14,
    ...                                depth_to_barrier=4.8, drain_radius=0.1)), 5)
    0.001
    """
    if k_above is None:
        k_above = k_below
    L, h, k1, k2, D, r0 = as_float_arrays(spacing, head, k_above, k_below,
                                          depth_to_barrier, drain_radius)
    require_positive(L, "spacing", "drain spacing", "m")
    require_positive(h, "head", "water-table height midway above drain level", "m")
    _check_profile(k1, k2, D, r0, equivalent_depth_method)
    d = _equivalent_depth_unchecked(L, D, r0, equivalent_depth_method)
    return scalar_or_array((8.0 * k2 * d * h + 4.0 * k1 * h * h) / (L * L))   # Eq. (1.1)


def hooghoudt_water_table(x, *, spacing, recharge, k_below, depth_to_barrier, drain_radius,
                          k_above=None, equivalent_depth_method="series"):
    """Steady water-table height above drain level at distance x from a drain.

    Parameters
    ----------
    x : array_like
        Distance from a drain, 0 <= x <= L [m].
    spacing, recharge, k_below, depth_to_barrier, drain_radius, k_above,
    equivalent_depth_method
        As in :func:`hooghoudt_spacing`.

    Returns
    -------
    numpy.ndarray or float
        h(x) [m], the positive root of ``4 K1 h^2 + 8 K2 d h = 4 q x (L - x)``.

    Notes
    -----
    The Dupuit-Forchheimer water table over the equivalent layer d (Hooghoudt's
    derivation before it is evaluated midway); at x = L/2 it gives the head of
    :func:`hooghoudt_head`.

    Examples
    --------
    >>> h = hooghoudt_water_table([0.0, 32.0], spacing=64.0, recharge=0.001, k_below=0.14,
    ...                           depth_to_barrier=4.8, drain_radius=0.1)
    >>> [round(float(v), 3) for v in h]
    [0.0, 1.0]
    """
    if k_above is None:
        k_above = k_below
    x, L, q, k1, k2, D, r0 = as_float_arrays(x, spacing, recharge, k_above, k_below,
                                             depth_to_barrier, drain_radius)
    require_positive(L, "spacing", "drain spacing", "m")
    _check_profile(k1, k2, D, r0, equivalent_depth_method)
    d = _equivalent_depth_unchecked(L, D, r0, equivalent_depth_method)
    c = 4.0 * q * np.clip(x, 0.0, L) * (L - np.clip(x, 0.0, L))
    b = 8.0 * k2 * d
    h = 2.0 * c / (b + np.sqrt(b * b + 16.0 * k1 * c))
    return scalar_or_array(h)
