"""Hydraulic conductivity from field tests in auger holes.

Two classic field methods, each a formula function (vectorised over cases) and
a reduction of one test's readings to K with the method's conditions checked:

* the **auger-hole method** below the water table (Ernst's formula):
  :func:`ernst_auger_hole` and :func:`auger_hole_test`;
* the **inverse auger-hole (Porchet) method** above the water table:
  :func:`porchet_inverse_auger_hole` and :func:`inverse_auger_hole_test`.

Pure numpy, SI inside: lengths in metres (depths below the ground surface),
times in seconds for the readings, K in m/d. Reading a readings file is done
at the edge (command line, project file), not here.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ._validate import as_float_arrays, require_nonnegative, require_positive, scalar_or_array
from .errors import InputError

__all__ = ["AUGER_HOLE_LIMITS", "ernst_auger_hole", "porchet_inverse_auger_hole",
           "auger_hole_test", "inverse_auger_hole_test", "FieldTestResult"]

#: Conditions of validity of Ernst's auger-hole formula (van Beers 1983; Oosterbaan &
#: Nijland 1994, ILRI Publ. 16 ch. 12), as recalled [MEMORY]; the radius range and the
#: lower bound on H were read on a teaching page (drainplan METHODS section 7).
AUGER_HOLE_LIMITS = {
    "hole_radius_m": (0.03, 0.07),        # 3 cm < r < 7 cm
    "depth_below_water_table_m": (0.20, 2.00),   # 20 cm < H < 200 cm
    "min_drawdown_fraction": 0.2,         # y > 0.2 H
    "max_rise_fraction": 0.25,            # use readings while the rise <= y0 / 4
    "deep_barrier_fraction": 0.5,         # barrier "deep" when S >= H / 2
}

_S_PER_D = 86400.0
# Ernst's constants, published for r, H, y in cm and dy/dt in cm/s giving K in m/d.
# 1 cm/s = 864 m/d, so in consistent units K = (C / 864) * shape * dy/dt.
_ERNST_DEEP = (4000.0, 20.0)       # Eq. (7.1) of the method notes: S >= H/2
_ERNST_BOTTOM = (3600.0, 10.0)     # Eq. (7.2): barrier at the hole bottom (S = 0)
_SURFACE_TOL = 0.01                # barrier within 1 cm of the hole bottom counts as S = 0


def _ernst_factor(constants, r, H, y):
    c, a = constants
    # K [m/d] = c r / ((H + a r)(2 - y/H)) * (r / y) * dy/dt [cm/s]; ratios are unit-free
    return (c / 864.0) * r / ((H + a * r) * (2.0 - y / H)) * (r / y)


def ernst_auger_hole(*, hole_radius, depth_below_water_table, drawdown, rise_rate,
                     barrier_below_hole=np.inf, intermediate_barrier="refuse"):
    """Hydraulic conductivity by the auger-hole method (Ernst's formula).

    Parameters
    ----------
    hole_radius : array_like
        Radius r of the auger hole [m].
    depth_below_water_table : array_like
        Depth H of the hole bottom below the static water table [m].
    drawdown : array_like
        Mean depth y of the water level in the hole below the static water
        table over the interval used [m], 0 < y <= H.
    rise_rate : array_like
        Rate of rise of the water level dy/dt over that interval [m/d], > 0.
    barrier_below_hole : array_like
        Depth S of the impermeable layer below the hole bottom [m]; ``inf``
        (default) for a barrier far below, 0 for a hole that reaches it.
    intermediate_barrier : {"refuse", "interpolate"}
        For 0 < S < H/2, where neither limit of Ernst's formula holds:
        refuse (default), or interpolate the factor linearly in S between the
        two limits (an approximation, not the published charts).

    Returns
    -------
    float or numpy.ndarray
        Hydraulic conductivity K [m/d] (mainly horizontal K of the soil
        between the water table and the hole bottom).

    Raises
    ------
    drainplan.errors.InputError
        For non-positive inputs, a drawdown larger than H, or a barrier at an
        intermediate depth with ``intermediate_barrier="refuse"``.

    Notes
    -----
    Ernst's formula as given by van Beers [2] and in ILRI Publ. 16 ch. 12 [3]
    (Eqs. 7.1 and 7.2 of drainplan's method notes), with r, H, y in cm and
    dy/dt in cm/s giving K in m/d::

        S >= H/2:  K = 4000 r / ((H + 20 r)(2 - y/H)) * (r / y) * dy/dt
        S = 0:     K = 3600 r / ((H + 10 r)(2 - y/H)) * (r / y) * dy/dt

    Only the ratios r/H and r/y enter, so SI lengths are used directly and
    the constants are divided by 864 (1 cm/s = 864 m/d). The conditions of
    validity [3] (recalled): 3 cm < r < 7 cm, 20 cm < H < 200 cm, y > 0.2 H,
    readings used only while the rise is under a quarter of the initial
    drawdown; :func:`auger_hole_test` checks them on a test's readings. The
    constants and conditions are from memory of [2, 3]; confirm against the
    publication before relying on them for a critical design.

    References
    ----------
    .. [1] Ernst, L.F. (1950). Een nieuwe formule voor de berekening van de
       doorlaatfactor met de boorgatenmethode. Rapport LEI, Groningen.
    .. [2] van Beers, W.F.J. (1983). The auger-hole method. ILRI Bulletin 1,
       Wageningen.
    .. [3] Oosterbaan, R.J. and Nijland, H.J. (1994). Determining the
       saturated hydraulic conductivity. Chapter 12 in Ritzema (ed.), Drainage
       Principles and Applications, ILRI Publication 16, 2nd ed., Wageningen.

    Examples
    --------
    r = 4 cm, H = 70 cm, y = 30 cm, a rise of 6 cm in 30 s (0.2 cm/s):

    >>> v = 0.06 / 30 * 86400        # m/d
    >>> round(float(ernst_auger_hole(hole_radius=0.04, depth_below_water_table=0.70,
    ...                              drawdown=0.30, rise_rate=v)), 2)
    1.81
    >>> round(float(ernst_auger_hole(hole_radius=0.04, depth_below_water_table=0.70,
    ...                              drawdown=0.30, rise_rate=v, barrier_below_hole=0)), 2)
    2.22
    """
    if intermediate_barrier not in ("refuse", "interpolate"):
        raise InputError(f"intermediate_barrier {intermediate_barrier!r} is unknown; choose "
                         "refuse or interpolate", param="intermediate_barrier")
    r, H, y, v, S = as_float_arrays(hole_radius, depth_below_water_table, drawdown,
                                    rise_rate, barrier_below_hole)
    require_positive(r, "hole_radius", "hole radius", "m")
    require_positive(H, "depth_below_water_table",
                     "depth of the hole bottom below the water table", "m")
    require_positive(y, "drawdown", "drawdown in the hole below the water table", "m")
    require_positive(v, "rise_rate", "rate of rise of the water in the hole", "m/d")
    if np.any(np.isnan(S)) or np.any(S < 0):
        raise InputError("barrier below the hole bottom must be 0 m or more (a hole that "
                         "goes through the barrier is not an auger-hole test)",
                         param="barrier_below_hole")
    if np.any(y > H * (1 + 1e-9)):
        raise InputError("drawdown y must not exceed the depth of the hole below the water "
                         "table H", param="drawdown")
    half = AUGER_HOLE_LIMITS["deep_barrier_fraction"] * H
    deep = _ernst_factor(_ERNST_DEEP, r, H, y)
    bottom = _ernst_factor(_ERNST_BOTTOM, r, H, y)
    at_bottom = S <= _SURFACE_TOL
    middle = ~at_bottom & (S < half)
    if np.any(middle) and intermediate_barrier == "refuse":
        i = np.flatnonzero(middle.ravel())[0]
        raise InputError(
            f"the barrier {S.ravel()[i]:.2f} m below the hole bottom is neither at the bottom "
            f"nor at least H/2 = {half.ravel()[i]:.2f} m below it; Ernst's formula covers only "
            "those two cases: deepen the hole to the barrier, or accept a linear "
            "interpolation between them (intermediate_barrier='interpolate')",
            param="barrier_depth")
    w = np.clip(S / np.where(half > 0, half, 1.0), 0.0, 1.0)
    factor = np.where(at_bottom, bottom, np.where(middle, bottom + w * (deep - bottom), deep))
    return scalar_or_array(factor * v)


def porchet_inverse_auger_hole(*, hole_radius, initial_height, final_height, elapsed):
    """Hydraulic conductivity by the inverse auger-hole (Porchet) method.

    Parameters
    ----------
    hole_radius : array_like
        Radius r of the hole [m].
    initial_height, final_height : array_like
        Height of the water above the hole bottom at the start and the end of
        the interval [m], ``final_height < initial_height``.
    elapsed : array_like
        Length of the interval [d].

    Returns
    -------
    float or numpy.ndarray
        Hydraulic conductivity K [m/d].

    Notes
    -----
    Water infiltrates through the wall (2 pi r h) and the bottom (pi r^2) of
    a hole in unsaturated soil under a unit gradient, so
    ``pi r^2 dh/dt = -K (2 pi r h + pi r^2)``, and integrating::

        K = (r / 2) ln[(h0 + r/2) / (ht + r/2)] / (t - t0)
          = 1.15 r [log10(h0 + r/2) - log10(ht + r/2)] / (t - t0)

    (Porchet's formula as given in ILRI Publ. 16 ch. 12 [1], recalled;
    1.15 is ln(10)/2 rounded, used exactly here). Valid above the water
    table, after the soil round the hole has been wetted; it gives a K of
    the layer the hole stands in, usually taken as the horizontal K.

    References
    ----------
    .. [1] Oosterbaan, R.J. and Nijland, H.J. (1994). Determining the
       saturated hydraulic conductivity. Chapter 12 in Ritzema (ed.), Drainage
       Principles and Applications, ILRI Publication 16, 2nd ed., Wageningen.

    Examples
    --------
    >>> round(float(porchet_inverse_auger_hole(hole_radius=0.04, initial_height=0.60,
    ...                                        final_height=0.50, elapsed=600 / 86400)), 3)
    0.507
    """
    r, h0, ht, t = as_float_arrays(hole_radius, initial_height, final_height, elapsed)
    require_positive(r, "hole_radius", "hole radius", "m")
    require_positive(h0, "initial_height", "water height in the hole at the start", "m")
    require_nonnegative(ht, "final_height", "water height in the hole at the end", "m")
    require_positive(t, "elapsed", "time between readings", "d")
    if np.any(ht >= h0):
        raise InputError("the water level in an inverse auger hole must fall between the "
                         "readings", param="readings")
    return scalar_or_array(0.5 * r * np.log((h0 + 0.5 * r) / (ht + 0.5 * r)) / t)


@dataclass(frozen=True)
class FieldTestResult:
    """K from one field test, with what was used and why.

    Attributes
    ----------
    method : str
        ``"auger-hole"`` or ``"inverse-auger-hole"``.
    k : float
        Hydraulic conductivity [m/d].
    readings_used : int
        Number of readings that entered K.
    readings_total : int
    interval_k : tuple of float
        K from each pair of successive readings used [m/d] (their spread
        shows how steady the test was).
    details : dict
        Method-specific quantities (SI).
    notes : tuple of str
    """

    method: str
    k: float
    readings_used: int
    readings_total: int
    interval_k: tuple
    details: dict = field(default_factory=dict)
    notes: tuple = ()


def _readings(times, depths):
    t = np.asarray(times, float).ravel()
    z = np.asarray(depths, float).ravel()
    if t.size != z.size:
        raise InputError("readings need one time and one water depth each", param="readings")
    if t.size < 2:
        raise InputError("at least two readings (time, depth to water) are needed",
                         param="readings")
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(z))):
        raise InputError("readings must be finite numbers", param="readings")
    step = np.diff(t)
    if np.any(step <= 0):
        i = int(np.flatnonzero(step <= 0)[0])
        raise InputError(f"reading times must increase: {t[i + 1]:g} s follows {t[i]:g} s",
                         param="readings")
    return t, z


def _check_range(value, limits, label, param):
    lo, hi = limits
    if not lo - 1e-9 <= value <= hi + 1e-9:
        raise InputError(f"{label} {value * 100:.1f} cm is outside the range of the "
                         f"auger-hole method ({lo * 100:g} to {hi * 100:g} cm)", param=param)


def auger_hole_test(*, hole_radius, hole_depth, water_table_depth, times, water_depths,
                    barrier_depth=None, intermediate_barrier="refuse"):
    """Reduce one auger-hole test (readings of the rising water level) to K.

    Parameters
    ----------
    hole_radius : float
        Radius of the hole [m].
    hole_depth : float
        Depth of the hole bottom below the surface [m].
    water_table_depth : float
        Depth of the static water table below the surface [m] (measured after
        the level in the hole has come to rest, before bailing).
    times : array_like
        Time of each reading [s], increasing (the first is usually 0).
    water_depths : array_like
        Depth to the water in the hole below the surface at each reading [m];
        it decreases as the hole refills.
    barrier_depth : float, optional
        Depth of the impermeable layer below the surface [m]; default: far
        below the hole (at least H/2 below its bottom).
    intermediate_barrier : {"refuse", "interpolate"}
        See :func:`ernst_auger_hole`.

    Returns
    -------
    FieldTestResult
        K over the readings used (from the first reading to the last one
        before the rise exceeds a quarter of the first drawdown), the K of
        each interval, and ``details``: ``depth_below_water_table_m`` (H),
        ``initial_drawdown_m`` (y0), ``mean_drawdown_m`` (y), ``rise_m``,
        ``elapsed_s``, ``barrier_below_hole_m`` (S).

    Raises
    ------
    drainplan.errors.InputError
        When the hole bottom is not below the water table, times do not
        increase, the level falls, a reading lies outside the hole or above
        the water table, fewer than two readings remain within the quarter
        rule, or the hole is outside the method's range (r, H, y > 0.2 H).

    Notes
    -----
    K is computed with :func:`ernst_auger_hole` from the rise between the
    first reading and the last one used, with y the mean of their drawdowns
    (the usual reduction, ILRI Publ. 16 ch. 12, recalled).

    Examples
    --------
    >>> r = auger_hole_test(hole_radius=0.04, hole_depth=1.70, water_table_depth=0.90,
    ...                     times=[0, 40, 80], water_depths=[1.40, 1.34, 1.285])
    >>> round(r.k, 2), r.readings_used
    (0.9, 3)
    """
    r, zh, zw = float(hole_radius), float(hole_depth), float(water_table_depth)
    for value, name, label in ((r, "hole_radius", "hole radius"),
                               (zh, "hole_depth", "hole depth"),
                               (zw, "water_table_depth", "water-table depth")):
        if not (np.isfinite(value) and value > 0):
            raise InputError(f"{label} must be greater than 0 m, got {value:g}", param=name)
    if zh <= zw:
        raise InputError(f"the hole bottom ({zh:g} m) is not below the water table ({zw:g} m): "
                         "the auger-hole method needs a hole below the water table; use the "
                         "inverse auger-hole method above it", param="hole_depth")
    t, z = _readings(times, water_depths)
    if np.any(z > zh + 1e-9):
        raise InputError(f"a depth to water of {z[z > zh + 1e-9][0]:g} m is below the hole "
                         f"bottom ({zh:g} m)", param="readings")
    if np.any(z <= zw):
        raise InputError(f"a depth to water of {z[z <= zw][0]:g} m is at or above the static "
                         f"water table ({zw:g} m): the hole had refilled", param="readings")
    dz = np.diff(z)
    if np.any(dz >= 0):
        i = int(np.flatnonzero(dz >= 0)[0])
        raise InputError(f"the water level in an auger hole must rise between readings: "
                         f"{z[i + 1]:g} m at {t[i + 1]:g} s is not above {z[i]:g} m at "
                         f"{t[i]:g} s", param="readings")
    H = zh - zw
    y = z - zw
    _check_range(r, AUGER_HOLE_LIMITS["hole_radius_m"], "hole radius", "hole_radius")
    _check_range(H, AUGER_HOLE_LIMITS["depth_below_water_table_m"],
                 "depth of the hole below the water table H", "hole_depth")
    if barrier_depth is None:
        S = np.inf
    else:
        zb = float(barrier_depth)
        if not np.isfinite(zb) or zb < zh - _SURFACE_TOL:
            raise InputError(f"barrier depth {zb:g} m is above the hole bottom ({zh:g} m): "
                             "the hole must stop at the barrier", param="barrier_depth")
        S = max(zb - zh, 0.0)
    notes = []
    limit = AUGER_HOLE_LIMITS["max_rise_fraction"] * y[0]
    used = (y[0] - y) <= limit * (1 + 1e-9)
    n_used = int(np.argmin(used)) if not np.all(used) else y.size
    if n_used < 2:
        raise InputError(f"the water rose {y[0] - y[1]:.3f} m by the second reading, more than a "
                         f"quarter of the initial drawdown ({y[0]:.3f} m): read sooner or more "
                         "often", param="readings")
    if n_used < y.size:
        notes.append(f"{y.size - n_used} later reading(s) left out: the rise exceeded a quarter "
                     "of the initial drawdown")
    tu, yu = t[:n_used], y[:n_used]
    ybar = 0.5 * (yu[0] + yu[-1])
    if ybar < AUGER_HOLE_LIMITS["min_drawdown_fraction"] * H:
        raise InputError(f"mean drawdown {ybar:.3f} m is below 0.2 H = {0.2 * H:.3f} m: bail "
                         "the hole deeper before reading", param="readings")
    rise = yu[0] - yu[-1]
    elapsed = tu[-1] - tu[0]
    kw = dict(hole_radius=r, depth_below_water_table=H, barrier_below_hole=S,
              intermediate_barrier=intermediate_barrier)
    k = float(ernst_auger_hole(drawdown=ybar, rise_rate=rise / elapsed * _S_PER_D, **kw))
    ymid = 0.5 * (yu[:-1] + yu[1:])
    rates = -np.diff(yu) / np.diff(tu) * _S_PER_D
    interval = ernst_auger_hole(drawdown=ymid, rise_rate=rates, **kw)
    if np.isinf(S):
        notes.append("barrier assumed at least H/2 below the hole bottom (Ernst, deep barrier)")
    elif S <= _SURFACE_TOL:
        notes.append("hole reaches the barrier (Ernst, S = 0)")
    elif S < 0.5 * H:
        notes.append(f"barrier {S:.2f} m below the hole, less than H/2: factor interpolated "
                     "linearly between Ernst's two cases (approximate)")
    else:
        notes.append("barrier at least H/2 below the hole bottom (Ernst, deep barrier)")
    details = {"depth_below_water_table_m": H, "initial_drawdown_m": float(y[0]),
               "mean_drawdown_m": float(ybar), "rise_m": float(rise),
               "elapsed_s": float(elapsed),
               "barrier_below_hole_m": None if np.isinf(S) else float(S)}
    return FieldTestResult("auger-hole", k, n_used, int(y.size),
                           tuple(float(v) for v in np.atleast_1d(interval)), details,
                           tuple(notes))


def inverse_auger_hole_test(*, hole_radius, hole_depth, times, water_depths,
                            water_table_depth=None):
    """Reduce one inverse auger-hole (Porchet) test to K.

    Parameters
    ----------
    hole_radius : float
        Radius of the hole [m].
    hole_depth : float
        Depth of the hole bottom below the surface [m].
    times : array_like
        Time of each reading [s], increasing.
    water_depths : array_like
        Depth to the water in the hole below the surface [m]; it increases as
        the water infiltrates.
    water_table_depth : float, optional
        Depth of the water table [m], if known; it must be below the hole.

    Returns
    -------
    FieldTestResult
        K from the least-squares slope of ln(h + r/2) against time over all
        readings (a straight line when the soil round the hole is wet), the
        K of each interval, and ``details``: ``initial_height_m``,
        ``final_height_m``, ``elapsed_s``, ``k_first_last_m_per_d`` (from the
        first and last readings alone).

    Raises
    ------
    drainplan.errors.InputError
        When the hole reaches the water table, times do not increase, the
        level rises or stands, or a reading lies outside the hole.

    Examples
    --------
    >>> r = inverse_auger_hole_test(hole_radius=0.04, hole_depth=1.0,
    ...                             times=[0, 300, 600], water_depths=[0.40, 0.452, 0.50])
    >>> round(r.k, 3)
    0.507
    """
    r, zh = float(hole_radius), float(hole_depth)
    for value, name, label in ((r, "hole_radius", "hole radius"),
                               (zh, "hole_depth", "hole depth")):
        if not (np.isfinite(value) and value > 0):
            raise InputError(f"{label} must be greater than 0 m, got {value:g}", param=name)
    if water_table_depth is not None and float(water_table_depth) <= zh:
        raise InputError(f"the hole ({zh:g} m deep) reaches the water table "
                         f"({float(water_table_depth):g} m): use the auger-hole method below "
                         "the water table", param="water_table_depth")
    t, z = _readings(times, water_depths)
    if np.any(z < 0) or np.any(z >= zh):
        raise InputError(f"depths to water must lie between the surface and the hole bottom "
                         f"({zh:g} m)", param="readings")
    dz = np.diff(z)
    if np.any(dz <= 0):
        i = int(np.flatnonzero(dz <= 0)[0])
        raise InputError(f"the water level in an inverse auger hole must fall between "
                         f"readings: {z[i + 1]:g} m at {t[i + 1]:g} s is not below {z[i]:g} m "
                         f"at {t[i]:g} s", param="readings")
    h = zh - z
    u = np.log(h + 0.5 * r)
    td = t / _S_PER_D
    slope = np.polyfit(td, u, 1)[0] if t.size > 2 else (u[1] - u[0]) / (td[1] - td[0])
    k = float(-0.5 * r * slope)                                   # Porchet, fitted slope
    interval = porchet_inverse_auger_hole(hole_radius=r, initial_height=h[:-1],
                                          final_height=h[1:], elapsed=np.diff(td))
    k_fl = float(porchet_inverse_auger_hole(hole_radius=r, initial_height=h[0],
                                            final_height=h[-1], elapsed=td[-1] - td[0]))
    notes = ["K from the least-squares slope of ln(h + r/2) against time (Porchet)"]
    iv = np.atleast_1d(interval)
    if iv.size >= 3 and iv[-1] > 0 and iv[0] / iv[-1] > 1.5:
        notes.append("K falls markedly during the test: the soil round the hole may not have "
                     "been wetted long enough; use the later readings")
    details = {"initial_height_m": float(h[0]), "final_height_m": float(h[-1]),
               "elapsed_s": float(t[-1] - t[0]), "k_first_last_m_per_d": k_fl}
    return FieldTestResult("inverse-auger-hole", k, int(t.size), int(t.size),
                           tuple(float(v) for v in iv), details, tuple(notes))
