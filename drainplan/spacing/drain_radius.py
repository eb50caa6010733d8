"""Effective drain radius: documented values for common pipes and envelopes.

The table lives in ``drainplan/templates/drain_radius.csv`` (one row a pipe type,
with its source and a confidence tag: published, derived or memory); a user
may always give a radius directly instead.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from .._templates import template_rows
from .._validate import as_float_arrays, require_positive, scalar_or_array
from ..errors import InputError

__all__ = ["drain_radius_table", "effective_radius", "ditch_radius", "square_envelope_radius"]

#: Logarithmic-capacity radius of a square of unit side, Gamma(1/4)^2 / (4 pi^(3/2)).
_SQUARE_CAPACITY = 0.5901702995


@lru_cache(maxsize=1)
def drain_radius_table():
    """Rows of the effective-radius table as a tuple of dicts (name, description,
    radius_m, source, confidence)."""
    rows = template_rows("drain_radius.csv")
    for row in rows:
        row["radius_m"] = float(row["radius_m"])
    return tuple(rows)


def effective_radius(name):
    """Effective radius [m] of a named pipe/envelope type from the table.

    Raises
    ------
    drainplan.errors.InputError
        If the name is not in the table (the message lists the names).

    Examples
    --------
    >>> effective_radius("sock-4in")
    0.059
    """
    for row in drain_radius_table():
        if row["name"] == name:
            return row["radius_m"]
    names = ", ".join(r["name"] for r in drain_radius_table())
    raise InputError(f"drain type {name!r} is unknown; choose one of {names} "
                     "or give a radius such as '5 cm'", param="drain_radius")


def ditch_radius(wet_perimeter):
    """Effective radius of an open ditch, r0 = u / pi [m], from its wet perimeter u [m].

    References
    ----------
    .. [1] Ritzema, H.P. (1994). Subsurface flow to drains. Chapter 8 in
       Drainage Principles and Applications, ILRI Publication 16, 2nd ed.

    Examples
    --------
    >>> round(float(ditch_radius(1.92)), 2)
    0.61
    """
    (u,) = as_float_arrays(wet_perimeter)
    require_positive(u, "wet_perimeter", "wet perimeter", "m")
    return scalar_or_array(u / np.pi)


def square_envelope_radius(side):
    """Effective radius of a drain in a square envelope of side s: 0.5902 s [m].

    Notes
    -----
    The radius of the circle with the same logarithmic capacity as a square
    (conformal mapping), Gamma(1/4)^2 / (4 pi^(3/2)) = 0.5902 times the side.

    Examples
    --------
    >>> round(float(square_envelope_radius(0.3)), 3)
    0.177
    """
    (s,) = as_float_arrays(side)
    require_positive(s, "side", "envelope side", "m")
    return scalar_or_array(_SQUARE_CAPACITY * s)
