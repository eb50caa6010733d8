"""Drain-pipe hydraulics: design flow, full-pipe capacity and size selection.

Plain numpy functions, SI units: diameters in metres, flows in m3/s, grades
in m/m, drainage coefficients in m/d, areas in m2. Data tables (pipe size
series, Manning's n by material) live in ``drainplan/templates`` with their
sources and can be replaced by edited copies.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._templates import template_rows
from ..errors import InputError
from .._validate import as_float_arrays, require_positive, scalar_or_array

__all__ = ["design_flow", "manning_full_capacity", "manning_diameter", "power_law_capacity",
           "full_velocity", "PipeSeries", "pipe_series", "manning_n", "select_size",
           "MATERIALS", "CAPACITY_METHODS", "DEFAULT_CAPACITY_FACTOR", "VELOCITY_LIMITS",
           "POWER_LAW_RANGE", "power_law_outside", "pipe_capacity", "outside_diameter"]

SECONDS_PER_DAY = 86400.0
MATERIALS = ("corrugated", "smooth", "clay")
CAPACITY_METHODS = ("manning", "power-law")
#: Share of the full-pipe capacity used in design: an allowance for sediment and
#: partial clogging [PRACTICE: designs use 60-75 % of the theoretical capacity
#: where sediment is expected, more where it is not].
DEFAULT_CAPACITY_FACTOR = 0.75
#: Full-flow velocity limits [m/s]: minimum 0.15 (0.5 ft/s) where no fine sand or
#: silt can enter, 0.43 (1.4 ft/s) where it can (lesson text citing Schwab,
#: Fangmeier & Elliot); maximum without protection by soil, from NRCS NEH-650
#: ch. 14 (recalled).
VELOCITY_LIMITS = {
    "min_clean": 0.15, "min_fine_sand": 0.43,
    "max": {"sand": 1.07, "sandy-loam": 1.07, "silt": 1.52, "silt-loam": 1.52,
            "silty-clay-loam": 1.83, "clay": 2.13, "clay-loam": 2.13, "gravel": 2.74},
}


def design_flow(coefficient, area):
    """Design flow Q = DC x A of a pipe draining ``area``.

    Parameters
    ----------
    coefficient : array_like
        Drainage coefficient [m/d] (e.g. 10 mm/d = 0.010 m/d).
    area : array_like
        Drained area [m2].

    Returns
    -------
    numpy.ndarray or float
        Q [m3/s].

    Notes
    -----
    Q = q A / 86400. In practical units 1 mm/d over 1 ha gives 0.1157 L/s, and
    1 in/d over 1 acre gives 0.0420 ft3/s (= 1/23.8).

    Examples
    --------
    >>> round(float(design_flow(0.010, 16e4)) * 1000, 3)   # 10 mm/d on 16 ha, L/s
    18.519
    """
    q, a = as_float_arrays(coefficient, area)
    require_positive(q, "coefficient", "drainage coefficient", "m/d")
    return scalar_or_array(q * a / SECONDS_PER_DAY)


def manning_full_capacity(diameter, grade, n):
    """Full-flow capacity of a circular pipe by Manning's formula.

    Parameters
    ----------
    diameter : array_like
        Inside diameter d [m].
    grade : array_like
        Hydraulic gradient, equal to the pipe grade for uniform full flow [m/m].
    n : array_like
        Manning roughness coefficient [s/m^(1/3)].

    Returns
    -------
    numpy.ndarray or float
        Q [m3/s] = (1/n) A R^(2/3) s^(1/2), A = pi d^2 / 4, R = d / 4.

    References
    ----------
    .. [1] Manning, R. (1891). On the flow of water in open channels and pipes.
       Transactions of the Institution of Civil Engineers of Ireland 20, 161-207.
    .. [2] USDA-NRCS (2001). National Engineering Handbook, part 650, ch. 14,
       Water management (drainage).

    Examples
    --------
    >>> round(float(manning_full_capacity(0.2303, 0.002, 0.015)) * 1000, 2)
    18.52
    """
    d, s, nn = as_float_arrays(diameter, grade, n)
    area = np.pi * d * d / 4.0
    return scalar_or_array(area * (d / 4.0) ** (2.0 / 3.0) * np.sqrt(np.maximum(s, 0.0)) / nn)


def manning_diameter(flow, grade, n):
    """Inside diameter that carries ``flow`` full at ``grade``: d = (Q n / (0.3117 s^0.5))^(3/8).

    Examples
    --------
    >>> round(float(manning_diameter(0.018519, 0.002, 0.015)), 4)
    0.2303
    """
    Q, s, nn = as_float_arrays(flow, grade, n)
    k = np.pi / 4.0 * 4.0 ** (-2.0 / 3.0)   # 0.3117
    return scalar_or_array((Q * nn / (k * np.sqrt(s))) ** 0.375)


def power_law_capacity(diameter, grade, *, wall="corrugated", uniform_inflow=False):
    """Capacity from the drain-pipe power laws used in metric practice.

    Parameters
    ----------
    diameter : array_like
        Inside diameter d [m].
    grade : array_like
        Hydraulic gradient s [m/m] (for a lateral: total head drop / length).
    wall : {"corrugated", "smooth"}
    uniform_inflow : bool
        True for a lateral collecting water uniformly along its length (its
        outlet discharge), False for a transport pipe carrying a constant flow.

    Returns
    -------
    numpy.ndarray or float
        Q [m3/s]:

        =========== ============================ ==============================
        wall        transport pipe               lateral (uniform inflow)
        =========== ============================ ==============================
        smooth      50 d^2.714 s^0.572            89 d^2.714 s^0.572
        corrugated  22 d^2.667 s^0.5              38 d^2.667 s^0.5
        =========== ============================ ==============================

    Validity: inside diameters of about 40-200 mm (``POWER_LAW_RANGE``), the field
    drain pipes the laws were fitted to; outside it use Manning (the network
    design says where a chosen size lies outside the range).

    Notes
    -----
    Coefficients as recalled from Cavelaars, Vlotman & Spoor (1994), ch. 21 in
    ILRI Publication 16 [MEMORY]; they are mutually consistent: uniform inflow
    multiplies the transport capacity by (1 + 1/a)^a for Q ~ s^a (1.783 for
    a = 0.572, sqrt(3) = 1.732 for a = 0.5).

    References
    ----------
    .. [1] Cavelaars, J.C., Vlotman, W.F. and Spoor, G. (1994). Subsurface
       drainage systems. Chapter 21 in Drainage Principles and Applications,
       ILRI Publication 16, 2nd ed., Wageningen.

    Examples
    --------
    >>> round(float(power_law_capacity(0.1, 0.002, uniform_inflow=True)) * 1000, 2)
    3.66
    """
    if wall not in ("corrugated", "smooth"):
        raise InputError(f"wall {wall!r} is unknown; choose corrugated or smooth",
                         param="material")
    d, s = as_float_arrays(diameter, grade)
    s = np.maximum(s, 0.0)
    if wall == "smooth":
        c = 89.0 if uniform_inflow else 50.0
        q = c * d**2.714 * s**0.572
    else:
        c = 38.0 if uniform_inflow else 22.0
        q = c * d**2.667 * s**0.5
    return scalar_or_array(q)


def full_velocity(flow, diameter):
    """Mean velocity of ``flow`` filling a pipe of inside diameter ``diameter`` [m/s]."""
    Q, d = as_float_arrays(flow, diameter)
    return scalar_or_array(Q / (np.pi * d * d / 4.0))


def _wall(material):
    return "smooth" if material in ("smooth", "clay") else "corrugated"


def pipe_capacity(diameter, grade, material, *, method="manning", uniform_inflow=False):
    """Full-flow capacity of a pipe by the chosen method [m3/s].

    Manning's equation with n by material and size (:func:`manning_n`), or the
    drain-pipe power law for the material's wall (:func:`power_law_capacity`).
    No sediment allowance: multiply by the capacity factor for the usable share.

    Parameters
    ----------
    diameter : array_like
        Inside diameter [m].
    grade : array_like
        Hydraulic grade [m/m].
    material : str
        One of :data:`MATERIALS`.
    method : {"manning", "power-law"}
    uniform_inflow : bool
        Power law only: inflow along the pipe (a lateral) rather than at its head.

    Examples
    --------
    >>> round(float(pipe_capacity(0.2303, 0.002, "corrugated")) * 1000, 1) > 0
    True
    """
    if method == "manning":
        d = np.asarray(diameter, float)
        return manning_full_capacity(d, grade, manning_n(material, d))
    return power_law_capacity(diameter, grade, wall=_wall(material),
                              uniform_inflow=uniform_inflow)


def outside_diameter(diameter, material):
    """Outside diameter estimate from the inside diameter [m]: corrugated walls add
    about 15 %, other walls about 10 % [PRACTICE]."""
    return np.asarray(diameter, float) * (1.15 if material == "corrugated" else 1.1)


@dataclass(frozen=True)
class PipeSeries:
    """Nominal sizes of one material, smallest first."""

    material: str
    series: str
    nominal: tuple
    inner_diameter: np.ndarray     # m
    source: tuple


def pipe_series(material, series="metric", *, path=None):
    """Standard sizes of ``material`` in the ``series`` ("metric" or "inch").

    Reads ``templates/pipe_sizes.csv`` (or ``path``, an edited copy with the
    same columns).
    """
    if material not in MATERIALS:
        raise InputError(f"material {material!r} is unknown; choose one of "
                         + ", ".join(MATERIALS), param="material")
    rows = template_rows("pipe_sizes.csv", path, param="sizes")
    try:
        sel = [r for r in rows if r["material"] == material and r["series"] == series]
        d = np.array([float(r["inner_diameter_mm"]) for r in sel]) / 1000.0
    except (KeyError, ValueError):
        raise InputError("pipe size file needs columns series, material, nominal, "
                         "inner_diameter_mm, source", param="sizes") from None
    if not sel:
        raise InputError(f"no {series} sizes of {material} pipe in the size table",
                         param="material")
    order = np.argsort(d)
    return PipeSeries(material, series, tuple(sel[i]["nominal"] for i in order), d[order],
                      tuple(sel[i].get("source", "") for i in order))


def manning_n(material, diameter, *, with_source=False):
    """Manning's n for ``material`` at inside diameter ``diameter`` [m].

    ``templates/manning_n.csv`` gives n at anchor diameters for each material
    with its source and confidence; between anchors n is interpolated linearly in
    log(diameter), beyond the first and last anchor it is held constant. So n
    changes smoothly with size instead of jumping between size bands (the
    handbooks give one value per band of sizes; the anchors sit inside the bands).

    Parameters
    ----------
    material : {"corrugated", "smooth", "clay"}
    diameter : array_like
        Inside diameter [m].
    with_source : bool
        Also return the sources and the lowest confidence of the anchors used.

    Examples
    --------
    >>> round(float(manning_n("corrugated", 0.100)), 4)
    0.015
    >>> a, b = manning_n("corrugated", 0.229), manning_n("corrugated", 0.231)
    >>> bool(abs(b - a) / a < 0.005)       # 2 mm apart: no jump in n
    True
    """
    rows = [r for r in template_rows("manning_n.csv") if r["material"] == material]
    if not rows:
        raise InputError(f"no Manning n for material {material!r}", param="material")
    d_anchor = np.array([float(r["inner_diameter_mm"]) for r in rows]) / 1000.0
    n_anchor = np.array([float(r["n"]) for r in rows])
    o = np.argsort(d_anchor)
    d_anchor, n_anchor = d_anchor[o], n_anchor[o]
    d = np.asarray(diameter, float)
    n = np.interp(np.log(np.maximum(d, 1e-6)), np.log(d_anchor), n_anchor)
    out = scalar_or_array(n)
    if with_source:
        conf = {"published": 0, "derived": 1, "practice": 2, "memory": 3}
        worst = max((r.get("confidence", "memory") for r in rows),
                    key=lambda c: conf.get(c, 3))
        srcs = sorted({r["source"] for r in rows if r["source"] != "same"})
        return out, "; ".join(srcs), worst
    return out


#: Inside-diameter range [m] of the drain pipes the power laws were fitted to
#: (corrugated and smooth plastic drain pipes of metric practice, about 40-200 mm)
#: [MEMORY: the range of the field-pipe sizes behind Cavelaars, Vlotman & Spoor
#: 1994, ch. 21; applied to large corrugated pipe they give up to about 40 % more
#: capacity than Manning with this package's n].
POWER_LAW_RANGE = {"corrugated": (0.040, 0.200), "smooth": (0.040, 0.200)}


def power_law_outside(diameter, wall="corrugated"):
    """True where ``diameter`` [m] lies outside the range the power law was fitted to.

    Examples
    --------
    >>> power_law_outside([0.1, 0.3]).tolist()
    [False, True]
    """
    lo, hi = POWER_LAW_RANGE[wall]
    d = np.asarray(diameter, float)
    return (d < lo - 1e-9) | (d > hi + 1e-9)


def select_size(flow, grade, series, *, method="manning", uniform_inflow=False,
                capacity_factor=DEFAULT_CAPACITY_FACTOR):
    """Smallest size of ``series`` whose design capacity carries ``flow`` at ``grade``.

    Parameters
    ----------
    flow : array_like
        Design flow [m3/s].
    grade : array_like
        Grade [m/m], > 0.
    series : PipeSeries
    method : {"manning", "power-law"}
    uniform_inflow : bool
        Laterals (power-law method only; Manning uses the outlet flow full).
    capacity_factor : float
        Share of the full capacity available (sediment allowance), 0-1.

    Returns
    -------
    index : numpy.ndarray of int
        Index into ``series`` (-1 where no size is large enough).
    capacity : numpy.ndarray
        Design capacity of the chosen size [m3/s] (NaN where none).

    Examples
    --------
    >>> s = pipe_series("corrugated", "inch")
    >>> i, cap = select_size(0.840 * 0.0283168, 0.001, s)   # 0.84 ft3/s at 0.1 %
    >>> s.nominal[int(i)]
    '15 in'
    """
    if method not in CAPACITY_METHODS:
        raise InputError(f"capacity method {method!r} is unknown; choose one of "
                         + ", ".join(CAPACITY_METHODS), param="method")
    if not 0 < capacity_factor <= 1:
        raise InputError("capacity factor must lie in (0, 1]", param="capacity_factor")
    Q, s = as_float_arrays(flow, grade)
    d = series.inner_diameter
    cap = np.asarray(pipe_capacity(d[None, :], s.ravel()[:, None], series.material,
                                   method=method, uniform_inflow=uniform_inflow))
    cap = cap * capacity_factor
    ok = cap >= Q.ravel()[:, None]
    idx = np.where(ok.any(axis=1), ok.argmax(axis=1), -1)
    chosen = np.where(idx >= 0, cap[np.arange(idx.size), np.maximum(idx, 0)], np.nan)
    return idx.reshape(Q.shape), chosen.reshape(Q.shape)
