"""Input checks shared by the design-core functions, and the one table of allowed
ranges for every quantity a user can give (private)."""

from __future__ import annotations

import math as _math
from dataclasses import dataclass as _dataclass

import numpy as np

from .errors import InputError


def as_float_arrays(*values):
    """Convert inputs to float arrays broadcast to one shape; reject non-finite values."""
    arrays = [np.asarray(v, dtype=float) for v in values]
    try:
        arrays = np.broadcast_arrays(*arrays)
    except ValueError as exc:
        raise InputError(f"input arrays cannot be broadcast together: {exc}") from None
    return arrays


def _first_bad(bad, values):
    i = np.flatnonzero(np.asarray(bad).ravel())[0]
    return float(np.broadcast_to(values, np.shape(bad)).ravel()[i])


def _reduced(values):
    """A float array's distinct values as a view (a broadcast input's repeated axes
    dropped), or None for anything else; for the one-pass checks below."""
    if not isinstance(values, np.ndarray) or values.dtype.kind != "f" or not values.size:
        return None
    if values.ndim and 0 in values.strides:
        values = values[tuple(0 if st == 0 else slice(None) for st in values.strides)]
    return values


def _all_within(values, lo, lo_open):
    """True when every value is finite and above ``lo`` (or at least ``lo``): one
    min and one max (NaN spreads into both), so valid inputs pass in two passes.
    False means "look case by case" (the detailed checks find the culprit)."""
    a = _reduced(values)
    if a is None:
        return False
    mn, mx = a.min(), a.max()
    return bool((mn > lo if lo_open else mn >= lo) and mx < np.inf)


def require_finite(values, param, label, unit):
    bad = ~np.isfinite(values)
    if np.any(bad):
        raise InputError(f"{label} must be a finite number, got {_first_bad(bad, values)}",
                         param=param)


def require_positive(values, param, label, unit):
    """Raise InputError naming ``label`` if any value is not a finite number > 0."""
    if _all_within(values, 0.0, True):
        return
    require_finite(values, param, label, unit)
    bad = values <= 0
    if np.any(bad):
        u = f" {unit}" if unit not in ("", "-") else ""
        raise InputError(f"{label} must be greater than 0{u}, got {_first_bad(bad, values):g}{u}",
                         param=param)


def require_nonnegative(values, param, label, unit):
    """Raise InputError naming ``label`` if any value is negative or not finite."""
    if _all_within(values, 0.0, False):
        return
    require_finite(values, param, label, unit)
    bad = values < 0
    if np.any(bad):
        u = f" {unit}" if unit not in ("", "-") else ""
        raise InputError(f"{label} must be 0{u} or more, got {_first_bad(bad, values):g}{u}",
                         param=param)


def refuse_where(bad, first, second, param, message):
    """Raise InputError with ``message.format(first_value, second_value)`` taken at the
    first case where ``bad`` holds (arrays broadcast together)."""
    bad = np.asarray(bad)
    if np.any(bad):
        raise InputError(message.format(_first_bad(bad, first), _first_bad(bad, second)),
                         param=param)


def scalar_or_array(a):
    a = np.asarray(a, dtype=float)
    return a[()] if a.ndim == 0 else a


def require_radius_below_barrier(depth_to_barrier, drain_radius):
    """The drain must fit above the barrier: r0 < D wherever D > 0."""
    d, r = _reduced(depth_to_barrier), _reduced(drain_radius)
    if d is not None and r is not None and d.min() > r.max():
        return                                   # every radius below every depth
    bad = (depth_to_barrier > 0) & (drain_radius >= depth_to_barrier)
    if np.any(bad):
        raise InputError(
            f"drain radius {_first_bad(bad, drain_radius):g} m must be smaller than the depth "
            f"to the barrier below drain level {_first_bad(bad, depth_to_barrier):g} m",
            param="drain_radius")


# ---------------------------------------------------------------------------
# One table of user-facing quantities with their allowed ranges.
#
# Every quantity a user can give -- on the command line or in a project file --
# is checked here, once, by ``check_quantity``: the CLI option types
# (``drainplan.cli.options``) and the project reader (``drainplan.project``)
# both call it, so the two ways in accept exactly the same values. Ranges are
# what is physical or practical for subsurface drainage; the messages say so.
# New keys (a new project section, a new option) add a row here.
# ---------------------------------------------------------------------------

@_dataclass(frozen=True)
class Range:
    """Allowed range of one quantity, in SI (m, m/d, d, m/s, fractions, degrees).

    ``unit``/``factor`` give the unit shown in messages (display = SI * factor).
    ``lo``/``hi`` of None mean unbounded; ``lo_open``/``hi_open`` exclude the bound.
    """

    label: str
    unit: str = ""
    factor: float = 1.0
    lo: float | None = None
    hi: float | None = None
    lo_open: bool = False
    hi_open: bool = False


_M = dict(unit="m")
_MD = dict(unit="m/d")
_DEG = dict(unit="deg")
_PCT = dict(unit="%", factor=100.0)
_MS = dict(unit="m/s")

#: quantity name -> allowed range. Names are the glossary names used by the
#: library, the project-file keys and (with dashes) the CLI options.
QUANTITIES = {
    # soil
    "k": Range("hydraulic conductivity", lo=1e-7, hi=1000, **_MD),
    "k_above": Range("conductivity above drain level", lo=1e-7, hi=1000, **_MD),
    "k_below": Range("conductivity below drain level", lo=1e-7, hi=1000, **_MD),
    "k_vertical": Range("vertical conductivity", lo=1e-7, hi=1000, **_MD),
    "interface_depth": Range("depth of the layer interface", lo=0, hi=100, **_M),
    "barrier_depth": Range("depth to the barrier", lo=0.1, hi=1000, **_M),
    "drainable_porosity": Range("drainable porosity", lo=0.001, hi=0.6),
    "layer_thickness": Range("layer thickness", lo=0, lo_open=True, hi=1000, **_M),
    # criteria
    "recharge": Range("recharge (drainage rate)", lo=1e-5, hi=1, **_MD),
    "water_table_depth": Range("water-table depth", lo=0, hi=10, **_M),
    "initial_depth": Range("initial water-table depth", lo=0, hi=10, **_M),
    "final_depth": Range("final water-table depth", lo=0, lo_open=True, hi=10, **_M),
    "days": Range("drawdown time", unit="d", lo=0.01, hi=365),
    # drains
    "drain_depth": Range("drain depth", lo=0.1, hi=10, **_M),
    "drain_radius": Range("drain radius", lo=0.001, hi=1, **_M),
    "spacing_increment": Range("spacing increment", lo=0.01, hi=50, **_M),
    # layout
    "spacing": Range("lateral spacing", lo=1, hi=2000, **_M),
    "direction": Range("lateral bearing", lo=-360, hi=360, **_DEG),
    "setback": Range("headland setback", lo=0, hi=1000, **_M),
    "min_length": Range("minimum lateral length", lo=0, hi=10000, **_M),
    "offset": Range("offset of the first lateral", lo=0, hi=2000, **_M),
    "exclusion_setback": Range("exclusion setback", lo=0, hi=1000, **_M),
    "herringbone_angle": Range("herringbone angle", lo=15, hi=75, **_DEG),
    # pipes
    "coefficient": Range("drainage coefficient", lo=1e-4, hi=1, **_MD),
    "capacity_factor": Range("capacity factor", lo=0.1, hi=1),
    "main_depth": Range("main depth", lo=0.1, hi=10, **_M),
    "min_grade": Range("minimum grade", lo=1e-5, hi=1, hi_open=True, **_PCT),
    "max_grade": Range("maximum grade", lo=1e-5, hi=1, **_PCT),
    "assumed_grade": Range("assumed grade", lo=1e-5, hi=1, hi_open=True, **_PCT),
    "min_cover": Range("minimum cover", lo=0, hi=10, **_M),
    "max_depth": Range("maximum trench depth", lo=0.1, hi=10, **_M),
    "min_velocity": Range("minimum velocity", lo=0.01, hi=10, **_MS),
    "max_velocity": Range("maximum velocity", lo=0.01, hi=10, **_MS),
    "ditch_water_level": Range("ditch water level (elevation)", lo=-1000, hi=9000, **_M),
    "outfall_margin": Range("outfall margin", lo=0, hi=10, **_M),
    # coordinates typed by users (outlet X,Y), in the file's own units
    "coordinate": Range("coordinate", lo=-1e8, hi=1e8),
}

#: Most laterals (scan lines over all fields) one layout may produce; a layout
#: that would need more is refused before any geometry is built.
MAX_LATERALS = 250_000


def _fmt(v, unit):
    text = f"{v:.6g}"
    return f"{text} {unit}" if unit else text


def range_text(key):
    """The allowed range of ``key`` in words, e.g. 'between 1 m and 2000 m'."""
    r = QUANTITIES[key]
    lo = None if r.lo is None else _fmt(r.lo * r.factor, r.unit)
    hi = None if r.hi is None else _fmt(r.hi * r.factor, r.unit)
    if lo is not None and hi is not None:
        if not r.lo_open and not r.hi_open:
            return f"between {lo} and {hi}"
        return (f"{'greater than' if r.lo_open else 'at least'} {lo} and "
                f"{'less than' if r.hi_open else 'at most'} {hi}")
    if lo is not None:
        return f"greater than {lo}" if r.lo_open else f"{lo} or more"
    if hi is not None:
        return f"less than {hi}" if r.hi_open else f"{hi} or less"
    return "a finite number"


def check_quantity(key, value, *, name=None):
    """Check one value (SI) against its row of :data:`QUANTITIES`; return it as float.

    Parameters
    ----------
    key : str
        Quantity name (a key of :data:`QUANTITIES`).
    value : float
        The value in SI units.
    name : str, optional
        How the user typed the input (``--spacing``, ``layout.spacing``); the
        message starts with it.

    Raises
    ------
    InputError
        One line: the input, what is allowed, what was given. ``param`` is ``key``.

    Examples
    --------
    >>> check_quantity("spacing", 18.0)
    18.0
    >>> check_quantity("drainable_porosity", 1.2, name="soil.drainable_porosity")
    Traceback (most recent call last):
    ...
    drainplan.errors.InputError: soil.drainable_porosity: drainable porosity must be between 0.001 and 0.6, got 1.2
    """
    r = QUANTITIES[key]
    prefix = f"{name}: " if name else ""
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{prefix}{r.label} must be a number, got {value!r}",
                         param=key) from None
    ok = _math.isfinite(v)
    if ok and r.lo is not None:
        ok = v > r.lo if r.lo_open else v >= r.lo
    if ok and r.hi is not None:
        ok = v < r.hi if r.hi_open else v <= r.hi
    if not ok:
        got = _fmt(v * r.factor, r.unit) if _math.isfinite(v) else str(value)
        raise InputError(f"{prefix}{r.label} must be {range_text(key)}, got {got}", param=key)
    return v


def check_order(low_key, low, high_key, high, *, low_name=None, high_name=None,
                strict=True):
    """Refuse ``low`` >= ``high`` (or > when not ``strict``), naming both inputs."""
    if low is None or high is None:
        return
    bad = low >= high if strict else low > high
    if bad:
        a, b = QUANTITIES[low_key], QUANTITIES[high_key]
        ln, hn = low_name or a.label, high_name or b.label
        rel = "less than" if strict else "at most"
        raise InputError(f"{ln} ({_fmt(low * a.factor, a.unit)}) must be {rel} {hn} "
                         f"({_fmt(high * b.factor, b.unit)})", param=low_key)


def check_point(xy, *, name="outlet"):
    """An (x, y) typed by a user: two finite coordinates of plausible size."""
    try:
        x, y = (float(v) for v in xy)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected two numbers X,Y, got {xy!r}",
                         param="outlet") from None
    for v in (x, y):
        if not _math.isfinite(v):
            raise InputError(f"{name}: coordinates must be finite numbers, got {x:g},{y:g}",
                             param="outlet")
        if abs(v) > QUANTITIES["coordinate"].hi:
            raise InputError(f"{name}: coordinate {v:g} cannot be a real position (more "
                             "than 1e8 units from the CRS origin)", param="outlet")
    return (x, y)


def check_lateral_count(extents, spacing, *, sides=1):
    """Refuse a layout that would need more than :data:`MAX_LATERALS` laterals.

    ``extents`` are the fields' largest widths [m] (e.g. bounding-box diagonals):
    a field of width W holds at most W / spacing + 1 lateral lines per side.
    """
    ext = np.asarray(extents, float)
    ext = ext[np.isfinite(ext)]
    n = int(np.sum(np.floor(ext / spacing) + 1)) * int(sides)
    if n > MAX_LATERALS:
        raise InputError(f"a lateral spacing of {spacing:g} m over these fields would need "
                         f"up to {n:,} laterals, more than drainplan's limit of "
                         f"{MAX_LATERALS:,} laterals per layout (MAX_LATERALS); use a wider "
                         "spacing or lay out fewer fields at a time", param="spacing")
    return n
