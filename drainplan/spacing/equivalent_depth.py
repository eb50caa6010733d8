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
# exp(-2x) = exp(-pi^2/x)  <=>  x = pi / sqrt(2); the ratio t is then 0.0118.
_X_SWITCH = np.pi / np.sqrt(2.0)

# F as power series in t (the products of the published series expanded; see
# molen_wesseling_f): for x > switch, t = exp(-2x) and F = 4 sum c_m t^m with
# c_m = sum over odd k dividing m of 1/k; for x <= switch, t = exp(-pi^2/x) and
# F = pi^2/(4x) + ln(x/(2 pi)) - 2 sum e_m t^m with
# e_m = (1/m) sum over n dividing m of (-1)^(n+1) n.
_C = (1.0, 1.0, 4 / 3, 1.0, 6 / 5, 4 / 3, 8 / 7, 1.0, 13 / 9, 6 / 5)
_E = (1.0, -1 / 2, 4 / 3, -5 / 4, 6 / 5, -2 / 3, 8 / 7, -13 / 8, 13 / 9, -3 / 5)
# Eight terms at t <= 0.0118 leave a truncation error below 1e-16.
_N_TERMS = 8


def _horner(t, coefs):
    """sum_{m>=1} coefs[m-1] t^m."""
    acc = coefs[-1] * t
    for c in coefs[-2::-1]:
        acc += c
        acc *= t
    return acc


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
    of the switch. Expanding the logarithms of the products gives power series
    in the ratio t, ``F = 4 sum c_m t^m`` (large x, t = exp(-2x),
    ``c_m = sum_{odd k | m} 1/k``) and remainder ``-2 sum e_m t^m`` (small x,
    t = exp(-pi^2/x), ``e_m = (1/m) sum_{n | m} (-1)^(n+1) n``); eight terms
    reach an absolute error near 1e-16 everywhere, evaluated by Horner's rule.

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
        t = np.exp(np.where(small, -np.pi**2 / x, -2.0 * x))
        large_f = 4.0 * _horner(t, _C[:_N_TERMS])
        small_f = (np.pi**2 / (4.0 * x) + np.log(x / (2.0 * np.pi))
                   - 2.0 * _horner(t, _E[:_N_TERMS]))
        out = np.where(small, small_f, large_f)
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


# ---------------------------------------------------------------------------
# Spacing solver shared by Hooghoudt, Glover-Dumm and Kirkham.
#
# Each of them is   L^2 = A L / W(L) + B,   d = pi L / (8 W) the equivalent depth
# (Hooghoudt: A = pi K2 h / q, B = 4 K1 h^2 / q; see the callers), i.e. the root of
#     G(L) = W(L) (L - B / L) - A,
# which increases with L. W = ln(L / (pi r0)) + F(2 pi D / L) is smooth and slowly
# varying, so G is nearly linear: from a closed-form estimate (within ~20 %), one
# Halley step with two terms of the series for F and one with all of them reach
# the root to rounding (the predicted error of the second step stops it).
# ---------------------------------------------------------------------------
_PI = np.pi
_C1 = tuple(m * c for m, c in enumerate(_C[:4], 1))      # derivative series, 4 terms
_C2 = tuple(m * m * c for m, c in enumerate(_C[:3], 1))  # second derivative, 3 terms
_E1 = tuple(m * e for m, e in enumerate(_E[:4], 1))
#: The series of a case is chosen once, from its estimate; with nine terms it is
#: exact to rounding while its ratio t stays below this (the estimate is close
#: enough that it always does in practice; a case where it does not is solved
#: by the bracketed solver).
_T_VALID = 0.03
_LN_T_VALID = float(np.log(_T_VALID))
#: Cases per block of the spacing solver. A call of up to _ONE_BLOCK cases is one
#: block (Python's cost per array operation is paid once); larger calls go in
#: blocks of _CASES_PER_BLOCK. Measured on the 2-core test machine at 100,000 and
#: 1,000,000 cases: with the allocator the command line sets, 16384 was fastest
#: and 8192 within 0-12 %; with the C library's default allocator, 8192 was
#: 35 % faster at 100,000 cases (a block's temporaries, about 1.5 MB at peak,
#: stay below the heap's trim threshold, so they are not handed back to the
#: kernel and faulted in again block after block) and 4096 slower (Python's cost).
_ONE_BLOCK = 16384
_CASES_PER_BLOCK = 8192


# The kernels below work in place where they can: every new temporary of a
# block costs an allocation, and on the test machine fresh memory is slow.

def _w_small(L, inv_d, gamma):
    """W, W', W'' for x <= switch: W = ln(D/(pi r0)) + pi L/(8 D) + R, R = -2 sum e_m t^m,
    t = exp(-pi L/(2 D)), nine terms (W'' keeps the first term of R only)."""
    s = L * inv_d
    t = np.multiply(s, -0.5 * _PI)
    np.exp(t, out=t)
    w = np.multiply(s, 0.125 * _PI, out=s)
    w += gamma
    r = _horner(t, _E[:9])
    r *= 2.0
    w -= r
    w1 = _horner(t, _E1)
    w1 *= _PI
    w1 += 0.125 * _PI
    w1 *= inv_d
    w2 = np.multiply(t, (-0.5 * _PI * _PI) * inv_d * inv_d, out=t)
    return w, w1, w2


def _w_large(L, two_pi_d, ln_pr):
    """W, W', W'' for x > switch: W = ln(L/(pi r0)) + 4 sum c_m t^m, t = exp(-2x), nine
    terms (W'' with three terms of the series)."""
    inv_l = np.divide(1.0, L)
    x = np.multiply(two_pi_d, inv_l)
    t = np.multiply(x, -2.0)
    np.exp(t, out=t)
    w = np.log(L)
    w -= ln_pr
    f = _horner(t, _C[:9])
    xq = _horner(t, _C1)
    q2 = _horner(t, _C2)
    f *= 4.0
    w += f
    xq *= x
    xq *= 8.0                                   # 8 x sum m c_m t^m
    q2 *= x
    q2 *= x
    q2 *= 16.0                                  # 16 x^2 sum m^2 c_m t^m
    q2 -= 1.0
    q2 -= xq
    q2 -= xq
    w1 = xq
    w1 += 1.0
    w1 *= inv_l
    inv_l *= inv_l
    q2 *= inv_l
    return w, w1, q2


def _kirkham_e2_small(L, D, r):
    """2E (the finite-radius part of Kirkham's series) and its slope, x <= switch
    (the slope of the sum over n to first order in p)."""
    theta = _PI * r / L
    y = 0.5 * _PI * r / D
    p = np.exp(np.maximum(-_PI * L / D, -700.0))
    ch = np.cosh(2.0 * y)
    prod = np.ones_like(L)
    pn = np.ones_like(L)
    for _ in range(5):
        pn = pn * p
        prod *= (1.0 - 2.0 * pn * ch + pn * pn) / ((1.0 - pn) * (1.0 - pn))
    e2 = (np.log(2.0 * D / (L * np.sin(theta))) + np.log(np.sinh(y))
          - 0.5 * _PI * r * r / (D * L) + np.log(prod))
    g = theta / np.tan(theta) - 1.0
    inv_l = 1.0 / L
    slope = (g + 0.5 * _PI * r * r / D * inv_l) * inv_l + 2.0 * (ch - 1.0) * (_PI / D) * p
    return e2, slope, None


def _kirkham_e2_large(L, D, r):
    """2E and its slope, x > switch: sum_k ln(1 + v_k), v_k = 4 sin^2(pi r/L) w/(1 - w)^2,
    w = exp(-2 k x) (nine terms)."""
    theta = _PI * r / L
    inv_l = 1.0 / L
    x = 2.0 * _PI * D * inv_l
    z = np.exp(np.maximum(-2.0 * x, -700.0))
    s2 = np.sin(theta) ** 2
    ds2 = -theta * np.sin(2.0 * theta) * inv_l          # d sin^2(theta) / dL
    kx = 2.0 * x * inv_l                                 # d ln(w) / dL = k kx
    e2 = np.zeros_like(L)
    slope = np.zeros_like(L)
    w = np.ones_like(L)
    for k in range(1, 10):
        w = w * z
        c = 4.0 * w / ((1.0 - w) * (1.0 - w))
        v = c * s2
        e2 += np.log1p(v)
        slope += c * (ds2 + s2 * (k * kx) * (1.0 + w) / (1.0 - w)) / (1.0 + v)
    return e2, slope, None


def _kirkham_e2(L, D, r):
    """2E for any x (each case by the series of its side of the switch), value only."""
    L, D, r = np.broadcast_arrays(*(np.asarray(v, float) for v in (L, D, r)))
    out = np.empty(L.shape)
    small = 2.0 * _PI * D <= _X_SWITCH * L
    with np.errstate(divide="ignore", invalid="ignore", over="ignore", under="ignore"):
        out[small] = _kirkham_e2_small(L[small], D[small], r[small])[0]
        out[~small] = _kirkham_e2_large(L[~small], D[~small], r[~small])[0]
    return out


def _spacing_estimate(A, B, D, pr, gamma, L_D):
    """Closed-form estimate of the root of L^2 = A L / W(L) + B (within ~20 %).

    The smaller of two spacings: the deep-barrier one (W = ln(L/(pi r0)), the
    asymptotic solution of L ln(L/(pi r0)) = A, then the quadratic in L with
    that W) and one fixed-point step from the d = D spacing L_D with the
    shallow-barrier form d = D L / (L + (8/pi) D ln(D/(pi r0))).
    """
    lb = np.divide(A, pr)
    np.maximum(lb, 3.0, out=lb)
    np.log(lb, out=lb)                          # ln B, B = A / (pi r0)
    llb = np.log(lb)
    w = np.divide(llb, lb)
    w -= llb
    w += lb                                     # ln v, v ln v = B (asymptotic)
    np.maximum(w, 1.0, out=w)
    b = np.divide(A, w, out=w)
    L_deep = np.multiply(b, b, out=llb)
    L_deep += 4.0 * B
    np.sqrt(L_deep, out=L_deep)
    L_deep += b
    L_deep *= 0.5
    lam = np.maximum(gamma, 0.0, out=lb)
    lam *= (8.0 / _PI) * D
    lam += L_D
    d_s = np.divide(L_D, lam, out=lam)
    d_s *= (8.0 / _PI) * A * D
    d_s += B
    np.sqrt(d_s, out=d_s)
    return np.minimum(L_deep, d_s, out=d_s)     # <= L_D


def _flat(*arrays):
    """Broadcast and flatten; an input of one value stays a 0-d array (cheap to index)."""
    arrays = np.broadcast_arrays(*arrays)
    shape = arrays[0].shape
    out = []
    for a in arrays:
        if a.size and a.ndim and all(st == 0 for st in a.strides):
            out.append(np.asarray(a.flat[0]))        # a broadcast single value
        else:
            out.append(np.ravel(a))
    return shape, out


def _take(values, sel):
    """The cases ``sel`` (slice or index array) of each array; single values as they are."""
    return [v[sel] if v.ndim else v for v in values]


def _solve_spacing(n, prepare, bracket, exact, *, method="series", cap=True, kirkham=False,
                   xtol=1e-6, what="spacing"):
    """Roots of L^2 = A L / W(L) + B for n cases, block by block.

    ``prepare(sel) -> (A, B, D, r0, lo, hi)`` for the cases ``sel`` (a slice or
    an index array), with ``lo`` the narrowest spacing allowed and ``hi`` the
    widest, or None for the d = D spacing L_D = sqrt(8 A D / pi + B) (only
    with ``cap``: d = pi L / (8 W) is limited to D, as in Hooghoudt and
    Glover-Dumm, so cases whose d would exceed D have the root L_D).
    Those cases, drains on the barrier, roots outside the bounds and any case
    Halley cannot finish go to the bracketed solver on ``exact(L, idx)``, the
    caller's own equation (value only, increasing in L) for the cases ``idx``,
    between the ends ``bracket(idx) -> (lo, hi)``. ``kirkham``: W is Kirkham's
    pi F_K (the series W less its finite-radius part 2E), not capped.
    """
    from .._solve import _chandrupatla_block, _in_blocks

    root = np.empty(n)
    rest = []
    with np.errstate(divide="ignore", invalid="ignore", over="ignore", under="ignore"):
        step = n if n <= _ONE_BLOCK else _CASES_PER_BLOCK
        for start in range(0, n, max(step, 1)):
            sl = slice(start, min(start + step, n))
            m = sl.stop - sl.start
            A, B, D, r0, lo, hi = (v if v is None or np.shape(v) == (m,)
                                   else np.broadcast_to(v, (m,)) for v in prepare(sl))
            L, good = _solve_block(A, B, D, r0, lo, hi, method, cap, kirkham, xtol)
            root[sl] = L
            if not good.all():
                rest.append(start + np.flatnonzero(~good))
    if rest:
        rest = np.concatenate(rest)
        lo, hi = (np.broadcast_to(v, rest.shape) for v in bracket(rest))
        res = _in_blocks(_chandrupatla_block, lambda L, i: exact(L, i.astype(np.intp)), lo,
                         hi, [rest.astype(float)], xtol, 1e-12, 100, what, total=n,
                         stacklevel=4)
        root[rest] = res.root
    return root


def _solve_block(A, B, D, r0, lo, hi, method, cap, kirkham, xtol):
    """One block: estimate, one cheap Halley step, then Halley to convergence."""
    from .._solve import newton_block

    n = A.size
    root = np.empty(n)               # cases left out are not done: the fallback fills them
    done = np.zeros(n, dtype=bool)
    pr = _PI * r0
    L_D = np.sqrt((8.0 / _PI) * A * D + B)
    gamma = np.log(D / pr)
    # d reaches D only for a barrier within about pi r0 of the drains (or no
    # barrier depth at all), or spacings within a few radii: those go to the
    # bracketed solver.
    if not cap or (gamma.min() > 0.05 and L_D.min() > 12.0 * r0.max()):
        ok = None                    # all of them (checked on the extremes first)
    else:
        ok = (gamma > 0.05) & (L_D > 12.0 * r0)
    L0 = np.maximum(_spacing_estimate(A, B, D, pr, gamma, L_D), lo)
    small = (2.0 * _PI * D <= _X_SWITCH * L0) if method == "series" else (D <= 0.3 * L0)
    for branch in (True, False):
        sel = small if branch else ~small
        if ok is not None:
            sel = sel & ok
        if sel.all():
            idx = slice(None)
        else:
            idx = np.flatnonzero(sel)
            if not idx.size:
                continue
        Ab, Bb, x = A[idx], B[idx], L0[idx]
        Db = D[idx]
        if method == "series" and not kirkham:
            if branch:
                p = np.divide(1.0, Db)
                q = gamma[idx]
                k2 = np.multiply(p, p)
                k2 *= -0.25 * _PI * _PI
            else:
                p = np.multiply(Db, 2.0 * _PI)
                q = np.log(pr[idx])
                k2 = None
            L, good = _two_halley_steps(branch, x, Ab, Bb, p, q, k2, xtol)
        else:
            wargs = _w_args(branch, method, kirkham, Db, r0[idx], gamma[idx])
            func = _w_func(branch, method, kirkham)
            L, good, _ = newton_block(lambda L, A, B, *wa: _g(func, L, A, B, wa), x, None,
                                      None, (Ab, Bb, *wargs), xtol=xtol, rtol=0.0,
                                      maxiter=8)
        # the series chosen from the estimate must still be exact at the root
        if method == "series":
            if branch:
                good &= (-0.5 * _PI) * L <= _LN_T_VALID * Db
            else:
                good &= (-4.0 * _PI) * Db <= _LN_T_VALID * L
        else:
            good &= (Db <= 0.3 * L) == branch
        root[idx] = L
        done[idx] = good
    # d = pi (L^2 - B) / (8 A) at the root of G: above D if L passes L_D, and then
    # the root is L_D itself (the bracketed solver finds it)
    done &= (root >= lo) & (root <= (L_D if hi is None else hi))
    if method == "moody":
        # Moody's d jumps up where D/L passes 0.3 (W drops by 0.021); when the
        # equation changes sign down across that jump it has a root on each
        # side, and the bracketed solver picks one as it always did.
        Lj = D / 0.3
        u = Lj - B / Lj
        w_deep = np.log(Lj / r0) - 1.15
        w_shallow = (0.125 * _PI) * (1.0 / 0.3 + (8.0 / _PI) * np.log(D / r0) - 3.55
                                     + 1.6 * 0.3 - 2.0 * 0.09)
        done &= ~((Lj > lo) & (Lj < (L_D if hi is None else hi)) & (w_deep * u > A)
                  & (w_shallow * u < A))
    return root, done


# The series method's Halley step, fused: W, W' and W''/2 of one branch with the
# constants folded into the coefficients, then G, G' and G''/2 and the step, with as
# few array operations as the formulas allow (each costs Python's fixed price per
# operation and a pass over the block).
_SMALL_W = tuple(2.0 * e for e in _E[:9])                          # 2 sum e_m t^m
_SMALL_W1 = tuple(_PI * m * e for m, e in enumerate(_E[:4], 1))     # pi sum m e_m t^m
_LARGE_W = tuple(4.0 * c for c in _C[:9])                          # F = 4 sum c_m t^m
_LARGE_W1 = tuple(8.0 * m * c for m, c in enumerate(_C[:4], 1))     # 8 sum m c_m t^m
_LARGE_W2 = tuple(8.0 * m * m * c for m, c in enumerate(_C[:3], 1))  # 8 sum m^2 c_m t^m


def _series_step(small, L, A, B, p, q, k2, full):
    """Halley's step G / (G' - G G'' / (2 G')) for G = W (L - B/L) - A, series method.

    ``small`` (x <= switch): p = 1/D, q = ln(D/(pi r0)), k2 = -(pi^2/4)/D^2, with
    W = q + pi L/(8 D) - 2 sum e_m t^m, t = exp(-pi L/(2 D)); otherwise p = 2 pi D,
    q = ln(pi r0), W = ln L - q + 4 sum c_m t^m, t = exp(-2x), x = p/L (the series of
    :func:`molen_wesseling_f`). ``full``: nine terms for W (four for W', three for W'');
    else two (one for the derivatives), for the first step.
    """
    inv_l = np.divide(1.0, L)
    if small:
        s = np.multiply(L, p)
        t = np.multiply(s, -0.5 * _PI)
        np.exp(t, out=t)
        w = np.multiply(s, 0.125 * _PI, out=s)
        w += q
        if full:
            w -= _horner(t, _SMALL_W)
            w1 = _horner(t, _SMALL_W1)
        else:
            r = np.subtract(t, 2.0)
            r *= t
            w += r                                  # - 2 (t - t^2 / 2)
            w1 = np.multiply(t, _PI)
        w1 += 0.125 * _PI
        w1 *= p                                     # W'
        h = np.multiply(t, k2, out=t)               # W'' / 2 (first term)
    else:
        x = np.multiply(p, inv_l)
        t = np.multiply(x, -2.0)
        np.exp(t, out=t)
        w = np.log(L)
        w -= q
        if full:
            w += _horner(t, _LARGE_W)
            xq = _horner(t, _LARGE_W1)
            h = _horner(t, _LARGE_W2)
        else:
            f = np.add(t, 1.0)
            f *= t
            f *= 4.0
            w += f
            xq = np.multiply(t, 8.0)
            h = xq.copy()
        xq *= x                                     # 8 x sum m c_m t^m
        h *= x
        h *= x
        h -= 0.5
        h -= xq                                     # (L^2 / 2) W''
        w1 = np.add(xq, 1.0, out=xq)
        w1 *= inv_l                                 # W'
        h *= inv_l
        h *= inv_l                                  # W'' / 2
    bl = np.multiply(B, inv_l)
    u = np.subtract(L, bl)                          # u = L - B / L
    bl *= inv_l
    u1 = np.add(bl, 1.0)                            # u' = 1 + B / L^2
    g = np.multiply(w, u)
    g -= A                                          # G
    g1 = np.multiply(w, u1)
    h *= u
    bl *= inv_l
    bl *= w
    h -= bl                                         # W'' u / 2 + W u'' / 2
    u1 *= w1
    h += u1                                         # G'' / 2
    w1 *= u
    g1 += w1                                        # G'
    h *= g
    h /= g1
    np.subtract(g1, h, out=h)
    g /= h
    return g


def _two_halley_steps(small, x, A, B, p, q, k2, xtol):
    """The root of G for one branch of the series method: one Halley step with two
    terms of the series (within about 1e-4 m of the root from the estimate), one with
    all of them; then the stop rule of :func:`drainplan._solve.newton_block` (the
    error the second step's size predicts), which ends practically every case; the
    cases it does not end carry on in ``newton_block``."""
    from .._solve import newton_block

    step = _series_step(small, x, A, B, p, q, k2, False)
    x = np.subtract(x, step)
    prev = np.abs(step, out=step)
    step = _series_step(small, x, A, B, p, q, k2, True)
    x -= step
    a = np.abs(step, out=step)
    c = 0.25 * xtol
    # newton_block's stop, case by case (Halley: a^3 <= c x^2, a^4 <= c prev^3,
    # a <= prev / 4; or a <= xtol)
    e = np.multiply(a, a)
    e *= a
    stop = e <= c * (x * x)
    e *= a
    p3 = np.multiply(prev, prev)
    p3 *= prev
    p3 *= c
    stop &= e <= p3
    prev *= 0.25
    stop &= a <= prev
    stop |= a <= xtol
    rest = np.flatnonzero(~stop)
    if rest.size:
        func = _w_func(small, "series", False)
        L, good, _ = newton_block(lambda L, A, B, *wa: _g(func, L, A, B, wa), x[rest], None,
                                  None, (A[rest], B[rest], p[rest], q[rest], 0.0, 0.0),
                                  xtol=xtol, rtol=0.0, maxiter=7, prev=a[rest])
        x[rest] = L
        stop[rest] = good
    return x, stop


def _g(wfun, L, A, B, wargs):
    """G = W (L - B/L) - A and its first two derivatives (the first only if wfun
    gives W and W' only)."""
    out = wfun(L, *wargs)
    w, w1 = out[0], out[1]
    inv_l = np.divide(1.0, L)
    bl = np.multiply(B, inv_l)                  # B / L
    u = np.subtract(L, bl)                      # L - B / L
    bl *= inv_l                                 # B / L^2
    u1 = np.add(bl, 1.0)                        # u' = 1 + B / L^2
    g = np.multiply(w, u)
    g -= A
    g1 = np.multiply(w, u1)
    if len(out) == 2:
        w1 *= u
        g1 += w1
        return g, g1
    g2 = np.multiply(out[2], u)
    bl *= inv_l
    bl *= w
    bl *= 2.0                                   # 2 W B / L^3 = -W u''
    g2 -= bl
    u1 *= w1
    u1 *= 2.0
    g2 += u1                                    # W'' u + 2 W' u' + W u''
    w1 *= u
    g1 += w1
    return g, g1, g2


def _w_args(small, method, kirkham, D, r0, gamma):
    if method == "moody":
        return (1.0 / D, (8.0 / _PI) * np.log(D / r0) - 3.55) if small else (np.log(r0),)
    extra = (D, r0) if kirkham else (0.0, 0.0)
    if small:
        return (1.0 / D, gamma, *extra)
    return (2.0 * _PI * D, np.log(_PI * r0), *extra)


def _w_func(small, method, kirkham):
    """W(L, *args) -> (W, W', W'') for one branch of one method."""
    if method == "moody":
        if small:                    # D/L <= 0.3: W = (pi/8)(L/D + (8/pi) ln(D/r0) - alpha)
            def wfun(L, inv_d, c):
                inv_s = 1.0 / (L * inv_d)
                inv_s2 = inv_s * inv_s
                inv_s3 = inv_s2 * inv_s
                k = 0.125 * _PI
                w = k * (L * inv_d + c + 1.6 * inv_s - 2.0 * inv_s2)
                w1 = k * inv_d * (1.0 - 1.6 * inv_s2 + 4.0 * inv_s3)
                w2 = k * inv_d * inv_d * (3.2 * inv_s3 - 12.0 * (inv_s2 * inv_s2))
                return w, w1, w2
        else:                        # D/L > 0.3: W = ln(L/r0) - 1.15
            def wfun(L, ln_r):
                inv_l = 1.0 / L
                return np.log(L) - ln_r - 1.15, inv_l, -inv_l * inv_l
        return wfun
    if small:
        def wfun(L, inv_d, gamma, D, r0):
            w, w1, w2 = _w_small(L, inv_d, gamma)
            if kirkham:           # Newton: W' in closed form, W'' not needed
                e2, e2s, _ = _kirkham_e2_small(L, D, r0)
                return w - e2, w1 - e2s
            return w, w1, w2
    else:
        def wfun(L, two_pi_d, ln_pr, D, r0):
            w, w1, w2 = _w_large(L, two_pi_d, ln_pr)
            if kirkham:
                e2, e2s, _ = _kirkham_e2_large(L, D, r0)
                return w - e2, w1 - e2s
            return w, w1, w2
    return wfun
