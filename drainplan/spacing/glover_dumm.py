"""Glover-Dumm falling water table: spacing for a required drop in a given time,
and the midway water-table height over time (full series)."""

from __future__ import annotations

import numpy as np

from .._validate import (as_float_arrays, require_positive, require_nonnegative,
                        require_radius_below_barrier, scalar_or_array)
from .equivalent_depth import (EQUIVALENT_DEPTH_METHODS, _equivalent_depth_unchecked, _flat,
                               _solve_spacing, _take)
from ..errors import InputError

__all__ = ["INITIAL_SHAPES", "FLOW_DEPTHS", "DUMM_COEFFICIENT", "GLOVER_COEFFICIENT",
           "reaction_factor", "glover_dumm_head", "glover_dumm_profile", "glover_dumm_flow_depth",
           "glover_dumm_spacing"]

#: Published first-term coefficient for Dumm's fourth-degree-parabola initial
#: water table (the exact first series coefficient is 192 (pi^2 - 8) / pi^5 = 1.173).
DUMM_COEFFICIENT = 1.16
#: First-term coefficient for a flat (horizontal) initial water table, 4 / pi.
GLOVER_COEFFICIENT = 4.0 / np.pi

#: Initial water-table shapes and their one-term coefficients.
INITIAL_SHAPES = {"parabolic": DUMM_COEFFICIENT, "flat": GLOVER_COEFFICIENT}
#: Flow-depth choices: the equivalent depth d, or d plus half the initial head.
FLOW_DEPTHS = ("equivalent", "equivalent-plus-half-head")


def _check_choice(value, choices, param, what):
    if value not in choices:
        raise InputError(f"{what} {value!r} is unknown; choose one of " + ", ".join(choices),
                         param=param)


def reaction_factor(*, k, flow_depth, drainable_porosity, spacing):
    """Reaction factor alpha = pi^2 K D / (mu L^2) of a drain system.

    Parameters
    ----------
    k : array_like
        Saturated hydraulic conductivity K [m/d].
    flow_depth : array_like
        Depth D of the flow region used in the linearised equation [m].
    drainable_porosity : array_like
        Drainable porosity (specific yield) mu [-].
    spacing : array_like
        Drain spacing L [m].

    Returns
    -------
    numpy.ndarray or float
        alpha [1/d].

    References
    ----------
    .. [1] Dumm, L.D. (1964). Transient-flow concept in subsurface drainage:
       its validity and use. Transactions of the ASAE 7(2), 142-146.

    Examples
    --------
    >>> round(float(reaction_factor(k=0.5, flow_depth=3.0, drainable_porosity=0.05,
    ...                             spacing=40.0)), 6)
    0.185055
    """
    K, D, mu, L = as_float_arrays(k, flow_depth, drainable_porosity, spacing)
    return scalar_or_array(np.pi**2 * K * D / (mu * L * L))


def glover_dumm_head(*, time, initial_head, reaction_factor, shape="parabolic"):
    """Midway water-table height over time after a sudden rise, full series.

    Parameters
    ----------
    time : array_like
        Time since the water table stood at ``initial_head`` [d], >= 0.
    initial_head : array_like
        Initial midway height above drain level y0 [m].
    reaction_factor : array_like
        alpha = pi^2 K D / (mu L^2) [1/d] (see :func:`reaction_factor`).
    shape : {"parabolic", "flat"}
        Initial water-table shape: Dumm's fourth-degree parabola
        ``y0 [1 - (1 - 2x/L)^4]`` or flat at y0.

    Returns
    -------
    numpy.ndarray or float
        Midway height y(t) [m].

    Notes
    -----
    Solution of the linearised Boussinesq equation without recharge, at
    x = L/2 (n = 2m + 1 odd)::

        parabolic:  y = y0 (192/pi^5) sum (-1)^m (n^2 pi^2 - 8) / n^5 exp(-n^2 alpha t)
        flat:       y = y0 (4/pi)     sum (-1)^m (1 / n)          exp(-n^2 alpha t)

    The first terms give the one-term coefficients 1.173 (published as 1.16)
    and 4/pi = 1.273; the one-term forms hold once alpha t exceeds about 0.2.
    Terms are summed until exp(-n^2 alpha t) < 1e-17; at t = 0 the result is
    y0.

    References
    ----------
    .. [1] Dumm, L.D. (1964). Transient-flow concept in subsurface drainage:
       its validity and use. Transactions of the ASAE 7(2), 142-146.
    .. [2] Dumm, L.D. (1954). Drain spacing formula. Agricultural Engineering
       35, 726-730.

    Examples
    --------
    >>> round(float(glover_dumm_head(time=1.0, initial_head=1.0, reaction_factor=1.0)), 4)
    0.4315
    """
    _check_choice(shape, INITIAL_SHAPES, "shape", "initial water-table shape")
    t, y0, a = as_float_arrays(time, initial_head, reaction_factor)
    require_nonnegative(t, "time", "time", "d")
    require_positive(a, "reaction_factor", "reaction factor", "1/d")
    at = (a * t).ravel()
    out = np.ones(at.size)
    pos = at > 0
    if np.any(pos):
        n_max = int(np.ceil(np.sqrt(40.0 / at[pos].min()))) + 1
        n = np.arange(1, min(n_max, 200001) + 1, 2, dtype=float)
        sign = np.where(((n - 1) / 2) % 2 == 0, 1.0, -1.0)
        if shape == "parabolic":
            coef = 192.0 / np.pi**5 * sign * (n**2 * np.pi**2 - 8.0) / n**5
        else:
            coef = 4.0 / np.pi * sign / n
        ratio = np.empty(int(pos.sum()))
        at_pos = at[pos]
        for start in range(0, at_pos.size, 4096):
            blk = at_pos[start:start + 4096, None]
            ratio[start:start + 4096] = np.exp(-n * n * blk) @ coef
        out[pos] = ratio
    return scalar_or_array(y0 * out.reshape(t.shape))


def glover_dumm_profile(x, *, spacing, time, initial_head, reaction_factor,
                        shape="parabolic"):
    """Water-table height above drain level across the spacing at one time (full series).

    Parameters
    ----------
    x : array_like
        Distance from a drain, 0 <= x <= L [m].
    spacing : float
        Drain spacing L [m].
    time : float
        Time since the start of the drawdown [d].
    initial_head, reaction_factor, shape
        As in :func:`glover_dumm_head`.

    Returns
    -------
    numpy.ndarray
        y(x, t) [m]; at x = L/2 it equals :func:`glover_dumm_head`.

    Examples
    --------
    >>> y = glover_dumm_profile([0.0, 20.0, 40.0], spacing=40.0, time=1.0, initial_head=1.0,
    ...                         reaction_factor=1.0)
    >>> [round(float(v), 4) for v in y]
    [0.0, 0.4315, 0.0]
    """
    _check_choice(shape, INITIAL_SHAPES, "shape", "initial water-table shape")
    x = np.asarray(x, float)
    L, t, y0, a = (float(v) for v in (spacing, time, initial_head, reaction_factor))
    if t <= 0:
        xi = np.clip(x / L, 0.0, 1.0)
        base = 1.0 - (1.0 - 2.0 * xi) ** 4 if shape == "parabolic" else np.where(
            (xi > 0) & (xi < 1), 1.0, 0.0)
        return y0 * base
    n_max = int(np.ceil(np.sqrt(40.0 / (a * t)))) + 1
    n = np.arange(1, n_max + 1, 2, dtype=float)
    if shape == "parabolic":
        coef = 192.0 / np.pi**5 * (n**2 * np.pi**2 - 8.0) / n**5
    else:
        coef = 4.0 / np.pi / n
    amp = coef * np.exp(-n * n * a * t)
    return y0 * (np.sin(np.pi * np.outer(np.clip(x, 0.0, L) / L, n)) @ amp)


def glover_dumm_flow_depth(*, spacing, initial_head, depth_to_barrier, drain_radius,
                           flow_depth="equivalent", equivalent_depth_method="series"):
    """Depth of the flow region used by the falling-water-table formulas.

    Parameters
    ----------
    spacing : array_like
        Drain spacing L [m].
    initial_head : array_like
        Initial midway height above drain level y0 [m].
    depth_to_barrier : array_like
        Depth D of the barrier below drain level [m].
    drain_radius : array_like
        Effective drain radius r0 [m].
    flow_depth : {"equivalent", "equivalent-plus-half-head"}
        ``"equivalent"``: Hooghoudt's equivalent depth d (radial flow folded
        in; the conservative choice). ``"equivalent-plus-half-head"``: d + y0/2,
        adding the mean saturated thickness above the drains.
    equivalent_depth_method : {"series", "moody"}

    Returns
    -------
    numpy.ndarray or float
        Flow depth [m].

    Notes
    -----
    Compared with a numerical solution of the non-linear (Boussinesq)
    problem, the linear formula behaves as if the flow depth were
    d + (0.28 to 0.51) y0: d alone underestimates the spacing (safe),
    d + y0/2 overestimates it.

    Examples
    --------
    >>> round(float(glover_dumm_flow_depth(spacing=28.66, initial_head=1.0,
    ...     depth_to_barrier=4.0, drain_radius=0.1)), 2)
    2.1
    """
    _check_choice(flow_depth, FLOW_DEPTHS, "flow_depth", "flow-depth choice")
    _check_choice(equivalent_depth_method, EQUIVALENT_DEPTH_METHODS,
                  "equivalent_depth_method", "equivalent-depth method")
    L, y0, D, r0 = as_float_arrays(spacing, initial_head, depth_to_barrier, drain_radius)
    d = _equivalent_depth_unchecked(L, D, r0, equivalent_depth_method)
    if flow_depth == "equivalent-plus-half-head":
        d = d + 0.5 * y0
    return scalar_or_array(d)


def glover_dumm_spacing(*, initial_head, final_head, time, k, drainable_porosity,
                        depth_to_barrier, drain_radius, shape="parabolic",
                        flow_depth="equivalent", equivalent_depth_method="series",
                        xtol=1e-6):
    """Drain spacing for a midway water table falling from y0 to yt in time t.

    Parameters
    ----------
    initial_head : array_like
        Initial midway height above drain level y0 [m].
    final_head : array_like
        Required midway height above drain level after ``time``, yt [m];
        0 < yt < y0.
    time : array_like
        Time allowed for the drop t [d].
    k : array_like
        Saturated hydraulic conductivity K [m/d].
    drainable_porosity : array_like
        Drainable porosity mu [-], 0 < mu < 1.
    depth_to_barrier : array_like
        Depth D of the barrier below drain level [m].
    drain_radius : array_like
        Effective drain radius r0 [m].
    shape : {"parabolic", "flat"}
        Initial water-table shape; sets the coefficient c = 1.16 (Dumm) or
        4/pi (Glover, flat).
    flow_depth : {"equivalent", "equivalent-plus-half-head"}
        See :func:`glover_dumm_flow_depth`; the flow depth is iterated with L.
    equivalent_depth_method : {"series", "moody"}
    xtol : float
        Tolerance on the spacing [m].

    Returns
    -------
    numpy.ndarray or float
        L [m]; NaN with a ConvergenceWarning where none exists.

    Raises
    ------
    drainplan.errors.InputError
        For heads not in 0 < yt < y0, non-positive K, time, porosity or radius,
        porosity of 1 or more, a negative barrier depth or a radius not
        smaller than it, or an unknown option; for drains on the barrier with
        ``flow_depth="equivalent"`` (no flow depth at all).

    Notes
    -----
    The one-term Glover-Dumm formula (Eq. 4.1/4.2 of the method notes)::

        L = pi sqrt( K D t / (mu ln(c y0 / yt)) )

    with D = d(L) or d(L) + y0/2, solved for L like Hooghoudt's equation
    (``L^2 = A L / W + B`` with d = pi L / (8 W): a closed-form estimate and
    two Halley steps, the bracketed solver for the few cases they cannot
    finish). It is accurate once alpha t = pi^2 K D t / (mu L^2) exceeds about
    0.2 (yt/y0 below about 0.85); use :func:`glover_dumm_head` to check early
    times.

    References
    ----------
    .. [1] Dumm, L.D. (1964). Transient-flow concept in subsurface drainage:
       its validity and use. Transactions of the ASAE 7(2), 142-146.
    .. [2] Dumm, L.D. (1954). Drain spacing formula. Agricultural Engineering
       35, 726-730.
    .. [3] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.

    Examples
    --------
    >>> round(float(glover_dumm_spacing(initial_head=1.0, final_head=0.5, time=2.0,
    ...     k=1.0, drainable_porosity=0.06, depth_to_barrier=4.0, drain_radius=0.1)), 2)
    28.66
    """
    _check_choice(shape, INITIAL_SHAPES, "shape", "initial water-table shape")
    _check_choice(flow_depth, FLOW_DEPTHS, "flow_depth", "flow-depth choice")
    _check_choice(equivalent_depth_method, EQUIVALENT_DEPTH_METHODS,
                  "equivalent_depth_method", "equivalent-depth method")
    y0, yt, t, K, mu, D, r0 = as_float_arrays(initial_head, final_head, time, k,
                                              drainable_porosity, depth_to_barrier,
                                              drain_radius)
    require_positive(y0, "initial_head", "initial midway height above the drains", "m")
    require_positive(yt, "final_head", "final midway height above the drains", "m")
    if np.any(yt >= y0):
        raise InputError("the final midway height must be below the initial one "
                         "(the water table must fall)", param="final_head")
    require_positive(t, "time", "time allowed for the drop", "d")
    require_positive(K, "k", "hydraulic conductivity", "m/d")
    require_positive(mu, "drainable_porosity", "drainable porosity", "-")
    if np.any(mu >= 1):
        raise InputError("drainable porosity must be a fraction below 1 (e.g. 0.06)",
                         param="drainable_porosity")
    require_positive(r0, "drain_radius", "drain radius", "m")
    require_nonnegative(D, "depth_to_barrier", "depth to the barrier below drain level", "m")
    require_radius_below_barrier(D, r0)
    plus_half = flow_depth == "equivalent-plus-half-head"
    if not plus_half and np.any(D == 0):
        raise InputError("drains on the barrier leave no flow depth for the falling-water-"
                         "table formula; use flow depth 'equivalent-plus-half-head'",
                         param="depth_to_barrier")
    c = INITIAL_SHAPES[shape]
    factor = K * t / (mu * np.log(c * y0 / yt))          # L^2 = pi^2 factor D, Eq. (4.1)
    extra = 0.5 * y0 if plus_half else 0.0
    shape_, inputs = _flat(factor, D, r0, extra)

    def prepare(sel):
        # L^2 = pi^2 factor (d + extra) with d = pi L / (8 W): L^2 = A L / W + B
        factor, D, r0, extra = _take(inputs, sel)
        return (np.pi**3 / 8.0) * factor, np.pi**2 * factor * extra, D, r0, \
            np.pi * r0 * (1.0 + 1e-6), None

    def bracket(sel):
        factor, D, r0, extra = _take(inputs, sel)
        return np.pi * r0 * (1.0 + 1e-6), np.pi * np.sqrt(factor * (D + extra)) * (1.0 + 1e-9)

    def f(L, i):
        factor, D, r0, extra = _take(inputs, i)
        d = _equivalent_depth_unchecked(L, D, r0, equivalent_depth_method)
        return L * L - np.pi**2 * factor * (d + extra)

    n = int(np.prod(shape_))
    L = _solve_spacing(n, prepare, bracket, f, method=equivalent_depth_method, xtol=xtol,
                       what="Glover-Dumm spacing")
    return scalar_or_array(L.reshape(shape_))
