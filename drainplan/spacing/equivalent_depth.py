"""Hooghoudt's equivalent depth: the thickness that folds radial flow near a drain
into the horizontal-flow term of the drain-spacing equations.

Two methods are provided:

* ``"series"`` (default) -- the van der Molen & Wesseling (1991) solution,
  evaluated exactly (to rounding) with a pair of fast-converging series;
* ``"moody"`` -- Moody's (1966) two-branch approximation, used for US practice
  and for reproducing hand calculations made with Hooghoudt's tables.

Everything here is plain numpy: scalars or arrays in (broadcast together),
floats or arrays out, SI units (metres).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .._validate import (as_float_arrays, require_positive, require_nonnegative,
                        require_radius_below_barrier)

__all__ = ["EQUIVALENT_DEPTH_METHODS", "molen_wesseling_f", "equivalent_depth",
           "equivalent_depth_deep_limit"]

#: Names accepted by ``method=`` in :func:`equivalent_depth`.
EQUIVALENT_DEPTH_METHODS = ("series", "moody")

# Switch point between the two series for F(x): both use the same ratio there,
# exp(-2x) = exp(-pi^2/x)  <=>  x = pi / sqrt(2); the ratio is then 0.0118, so
# six terms give a truncation error below 1e-13 (relative).
_X_SWITCH = np.pi / np.sqrt(2.0)
_N_TERMS = 6


def molen_wesseling_f(x):
    """Function F(x) in the van der Molen & Wesseling equivalent-depth solution.

    Parameters
    ----------
    x : array_like
        ``2 pi D / L`` with D the depth to the barrier below drain level and
        L the drain spacing [-]. Must be > 0.

    Returns
    -------
    numpy.ndarray or float
        F(x) [-].

    Notes
    -----
    The published series is

    .. math:: F(x) = \\sum_{n=1,3,5,\\ldots} \\frac{4 e^{-2nx}}{n(1-e^{-2nx})}
              = 2 \\sum_{n\\ge 1} \\ln \\coth(n x)

    (Eq. 2-4 of the engineering summary of [1]; the second form follows by
    expanding the geometric series). It converges slowly for small x, where
    the published small-x form

    .. math:: F(x) \\approx \\frac{\\pi^2}{4x} + \\ln\\frac{x}{2\\pi}

    is used. That form is the leading part of the modular transformation of
    the series (the product is a ratio of Dedekind eta functions,
    ``eta(2 tau) / eta(tau)^2`` with ``q = exp(-2x)``), whose exact remainder is

    .. math:: 2 \\sum_{n\\ge1} (-1)^{n+1} \\ln(1 - p^n), \\quad p = e^{-\\pi^2/x}.

    Here the small-x form plus that remainder is used for ``x <= pi/sqrt(2)``
    and the direct series above it; both ratios are below 0.012 on their side
    of the switch, so six terms reach an absolute error near 1e-15 everywhere.

    References
    ----------
    .. [1] van der Molen, W.H. and Wesseling, J. (1991). A solution in closed
       form and a series solution to replace the tables for the thickness of
       the equivalent layer in Hooghoudt's drain spacing formula. Agricultural
       Water Management 19, 1-16.

    Examples
    --------
    >>> round(float(molen_wesseling_f(0.5)), 6)
    2.403778
    """
    x = np.asarray(x, dtype=float)
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
        small = x <= _X_SWITCH
        # One ratio per case: p = exp(-pi^2/x) on the small side, q = exp(-2x)
        # on the large side. With A(z) = prod(1 - z^n) and B(z) = prod(1 - z^2n),
        #   small x:  remainder = 2 ln(A(p) / B(p)^2)
        #   large x:  F         = 2 ln(B(q) / A(q)^2)   (= 2 sum ln coth(n x))
        z = np.exp(np.where(small, -np.pi**2 / x, -2.0 * x))
        z2 = z * z
        zn = z
        a = 1.0 - z
        b = 1.0 - z2
        z2n = z2
        for _ in range(1, _N_TERMS):
            zn = zn * z
            z2n = z2n * z2
            a *= 1.0 - zn
            b *= 1.0 - z2n
        out = 2.0 * np.log(np.where(small, a / (b * b), b / (a * a)))
        out = out + np.where(small, np.pi**2 / (4.0 * x) + np.log(x / (2.0 * np.pi)), 0.0)
    out = np.where(x > 0, out, np.nan)
    return out[()] if out.ndim == 0 else out


def equivalent_depth_deep_limit(spacing, drain_radius):
    """Equivalent depth for a barrier at great depth, ``pi L / (8 ln(L / (pi r0)))``.

    Parameters
    ----------
    spacing : array_like
        Drain spacing L [m].
    drain_radius : array_like
        Effective drain radius r0 [m].

    Returns
    -------
    numpy.ndarray or float
        Equivalent depth for D -> infinity [m].

    Notes
    -----
    The limit of Eq. (1.2) of the van der Molen & Wesseling solution as F -> 0.

    References
    ----------
    .. [1] van der Molen, W.H. and Wesseling, J. (1991), Agricultural Water
       Management 19, 1-16.

    Examples
    --------
    >>> round(float(equivalent_depth_deep_limit(75.0, 0.1)), 2)
    5.38
    """
    L, r0 = as_float_arrays(spacing, drain_radius)
    out = np.pi * L / (8.0 * np.log(L / (np.pi * r0)))
    return out[()] if out.ndim == 0 else out


def equivalent_depth(spacing, depth_to_barrier, drain_radius, *, method="series"):
    """Hooghoudt's equivalent depth d for drains above an impermeable barrier.

    Parameters
    ----------
    spacing : array_like
        Drain spacing L [m]; must exceed ``pi * drain_radius`` (drains apart).
    depth_to_barrier : array_like
        Thickness D of the pervious layer from drain level down to the
        impermeable barrier [m]; 0 means drains on the barrier (then d = 0).
    drain_radius : array_like
        Effective drain radius r0 [m]; for an open ditch use ``u / pi`` with u the
        wet perimeter. Must be smaller than D when D > 0.
    method : {"series", "moody"}, keyword-only
        ``"series"``: van der Molen & Wesseling (1991), exact. ``"moody"``:
        Moody (1966) approximation, 0-4 % above the exact values.

    Returns
    -------
    numpy.ndarray or float
        Equivalent depth d [m], ``0 <= d <= D``.

    Raises
    ------
    drainplan.errors.InputError
        If an input is out of range (names the input and the value) or the
        method name is unknown.

    Notes
    -----
    Series method, Eq. (1.2)::

        d = (pi L / 8) / (ln(L / (pi r0)) + F(x)),   x = 2 pi D / L

    with F from :func:`molen_wesseling_f`. Moody's approximation::

        D/L <= 0.3:  d = D / (1 + (D/L) ((8/pi) ln(D/r0) - alpha)),
                     alpha = 3.55 - 1.6 (D/L) + 2 (D/L)^2
        D/L >  0.3:  d = pi L / (8 (ln(L/r0) - 1.15))

    In both, d is limited to D (a formula value above D has no meaning: it
    happens only when L is a few drain diameters). Validity: two-dimensional
    flow to parallel drains; homogeneous soil below drain level; r0 much
    smaller than D and L.

    References
    ----------
    .. [1] Hooghoudt, S.B. (1940). Algemeene beschouwing van het probleem van de
       detailontwatering en de infiltratie door middel van parallel loopende
       drains, greppels, slooten en kanalen. Bijdragen tot de kennis van eenige
       natuurkundige grootheden van den grond 7. Rijksuitgeverij, 's-Gravenhage.
    .. [2] van der Molen, W.H. and Wesseling, J. (1991). A solution in closed
       form and a series solution to replace the tables for the thickness of
       the equivalent layer in Hooghoudt's drain spacing formula. Agricultural
       Water Management 19, 1-16.
    .. [3] Moody, W.T. (1966). Nonlinear differential equation of drain
       spacing. Journal of the Irrigation and Drainage Division, ASCE 92(IR2),
       1-9.
    .. [4] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.,
       Wageningen.

    Examples
    --------
    >>> round(float(equivalent_depth(20.0, 2.0, 0.1)), 3)
    1.359
    >>> round(float(equivalent_depth(20.0, 2.0, 0.1, method="moody")), 3)
    1.407
    >>> float(equivalent_depth(20.0, 0.0, 0.1))
    0.0
    """
    if method not in EQUIVALENT_DEPTH_METHODS:
        raise InputError(
            f"equivalent-depth method {method!r} is unknown; choose one of "
            + ", ".join(EQUIVALENT_DEPTH_METHODS), param="method")
    L, D, r0 = as_float_arrays(spacing, depth_to_barrier, drain_radius)
    require_positive(r0, "drain_radius", "drain radius", "m")
    require_nonnegative(D, "depth_to_barrier", "depth to the barrier below drain level", "m")
    require_positive(L, "spacing", "drain spacing", "m")
    require_radius_below_barrier(D, r0)
    return _equivalent_depth_unchecked(L, D, r0, method)


def _equivalent_depth_unchecked(L, D, r0, method="series"):
    """Equivalent depth without input checks (for solver inner loops)."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if method == "series":
            x = 2.0 * np.pi * D / L                                # Eq. (1.2)
            d = (np.pi / 8.0) * L / (np.log(L / (np.pi * r0)) + molen_wesseling_f(x))
        else:
            ratio = D / L
            alpha = 3.55 - 1.6 * ratio + 2.0 * ratio**2            # Moody (1966)
            shallow = D / (1.0 + ratio * ((8.0 / np.pi) * np.log(D / r0) - alpha))
            deep = np.pi * L / (8.0 * (np.log(L / r0) - 1.15))
            d = np.where(ratio <= 0.3, shallow, deep)
        # A non-positive denominator (L within a few radii) means the drains
        # touch; the formula then has no meaning and d is bounded by D.
        # (NaN and negative values fail the test and also become D; D = 0 gives
        # F = inf and so d = 0.)
        d = np.where(d >= 0.0, np.minimum(d, D), D)
    return d[()] if d.ndim == 0 else d
