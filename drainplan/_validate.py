"""Input checks shared by the design-core functions (private)."""

from __future__ import annotations

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


def require_finite(values, param, label, unit):
    bad = ~np.isfinite(values)
    if np.any(bad):
        raise InputError(f"{label} must be a finite number, got {_first_bad(bad, values)}",
                         param=param)


def require_positive(values, param, label, unit):
    """Raise InputError naming ``label`` if any value is not a finite number > 0."""
    require_finite(values, param, label, unit)
    bad = values <= 0
    if np.any(bad):
        u = f" {unit}" if unit not in ("", "-") else ""
        raise InputError(f"{label} must be greater than 0{u}, got {_first_bad(bad, values):g}{u}",
                         param=param)


def require_nonnegative(values, param, label, unit):
    """Raise InputError naming ``label`` if any value is negative or not finite."""
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
    bad = (depth_to_barrier > 0) & (drain_radius >= depth_to_barrier)
    if np.any(bad):
        raise InputError(
            f"drain radius {_first_bad(bad, drain_radius):g} m must be smaller than the depth "
            f"to the barrier below drain level {_first_bad(bad, depth_to_barrier):g} m",
            param="drain_radius")
