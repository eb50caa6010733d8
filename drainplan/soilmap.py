"""Soil values per field from a soil map: area-weighted overlay of soil polygons.

Each field gets the values of the soil polygons it overlaps, weighted by the
area of the overlap: the geometric mean for the hydraulic conductivity (K is
log-normally distributed in the field, so its areal mean is taken on log K),
the arithmetic mean for the barrier depth and the drainable porosity; and the
share of its area that polygons with a usable K cover. Fields the map does not
cover get NaN, never a guessed value.

Shapely 2 arrays in metres of one projected CRS (the caller reprojects); no
files here. Column units are read from the column name ("k_in_h",
"barrier_cm", "porosity_pct") or given by the caller; bare columns are SI
(m/d, m, fraction).
"""

from __future__ import annotations

import numpy as np

from .errors import InputError

__all__ = ["SOIL_PROPERTIES", "column_unit", "column_to_si", "parse_soil_units",
           "area_weighted_soil"]

#: Soil properties a map can give: name -> (quantity kind, SI unit, short option name).
SOIL_PROPERTIES = {
    "k": ("rate", "m/d", "k"),
    "barrier_depth": ("length", "m", "barrier"),
    "drainable_porosity": ("fraction", "", "porosity"),
}

_LENGTHS = {"m": "m", "cm": "cm", "mm": "mm", "um": "um", "ft": "ft", "in": "inch",
            "inch": "inch"}
_TIMES = {"d": "day", "day": "day", "h": "hour", "hr": "hour", "s": "second", "sec": "second"}
_FRACTIONS = {"pct": "percent", "percent": "percent"}


def column_unit(column, kind):
    """The unit a column name states by its ending, or None.

    Recognised endings: ``_<length>_<time>`` for a rate (``k_m_d``, ``ksat_um_s``,
    ``k_in_h``), ``_<length>`` for a length (``barrier_cm``, ``depth_ft``) and
    ``_pct`` or ``_percent`` for a fraction.

    Examples
    --------
    >>> column_unit("ksat_um_s", "rate")
    'um/second'
    >>> column_unit("barrier_ft", "length"), column_unit("barrier_depth", "length")
    ('ft', None)
    """
    parts = str(column).lower().split("_")
    if kind == "rate" and len(parts) >= 3 and parts[-2] in _LENGTHS and parts[-1] in _TIMES:
        return f"{_LENGTHS[parts[-2]]}/{_TIMES[parts[-1]]}"
    if kind == "length" and len(parts) >= 2 and parts[-1] in _LENGTHS:
        return _LENGTHS[parts[-1]]
    if kind == "fraction" and len(parts) >= 2 and parts[-1] in _FRACTIONS:
        return _FRACTIONS[parts[-1]]
    return None


def parse_soil_units(text):
    """Parse ``"k=in/h,barrier=ft,porosity=%"`` into ``{"k": "in/h", ...}`` (property names).

    Examples
    --------
    >>> parse_soil_units("k=in/h, barrier=ft")
    {'k': 'in/h', 'barrier_depth': 'ft'}
    """
    out = {}
    if not text:
        return out
    short = {v[2]: name for name, v in SOIL_PROPERTIES.items()}
    for item in str(text).split(","):
        if not item.strip():
            continue
        key, sep, unit = item.partition("=")
        key, unit = key.strip().lower(), unit.strip()
        prop = short.get(key, key if key in SOIL_PROPERTIES else None)
        if not sep or prop is None or not unit:
            raise InputError(f"soil units {text!r}: give items like k=in/h, barrier=ft, "
                             "porosity=%", param="soil_units")
        out[prop] = unit
    return out


def column_to_si(values, column, prop, unit=None):
    """Convert a soil column to SI (m/d, m, fraction).

    Parameters
    ----------
    values : array_like
        Column values; text that is not a number becomes NaN.
    column : str
        Column name (its ending may state the unit).
    prop : {"k", "barrier_depth", "drainable_porosity"}
    unit : str, optional
        Unit of the values, overriding the column name ("in/h", "ft", "%").

    Returns
    -------
    numpy.ndarray of float

    Examples
    --------
    >>> column_to_si([1.0, 2.0], "k_in_h", "k").round(4).tolist()
    [0.6096, 1.2192]
    >>> column_to_si([6.0], "porosity_pct", "drainable_porosity").tolist()
    [0.06]
    """
    from .units import parse_quantity

    kind, si, short = SOIL_PROPERTIES[prop]
    v = np.array([_number(x) for x in np.asarray(values, dtype=object).ravel()], float)
    unit = unit or column_unit(column, kind)
    if unit is None:
        return v
    if unit.strip() == "%":
        unit = "percent"
    try:
        factor = parse_quantity(f"1 {unit}", kind, name=f"unit of soil column {column!r}")
    except InputError as exc:
        raise InputError(f"{exc} (soil {short} unit {unit!r})", param="soil_units") from None
    return v * factor


def _number(x):
    try:
        v = float(x)
    except (TypeError, ValueError):
        return np.nan
    return v


def area_weighted_soil(fields, soil, values):
    """Area-weighted soil values of every field from soil polygons.

    Parameters
    ----------
    fields : array_like of shapely (Multi)Polygon or None
        Field boundaries [m] (None for a field to skip).
    soil : array_like of shapely (Multi)Polygon
        Soil-map polygons in the same CRS; they should not overlap each other
        (where they do, the overlap counts twice).
    values : dict of str -> array_like
        Per soil polygon: ``"k"`` [m/d] and optionally ``"barrier_depth"`` [m] and
        ``"drainable_porosity"`` [-] (SI; NaN where the map has no value).

    Returns
    -------
    dict of str -> numpy.ndarray
        Per field: each property of ``values`` (NaN where no polygon with a
        value overlaps the field; NaN too where an overlapping polygon holds a
        K that is not positive), ``"soil_cover"`` (share of the field's area
        covered by polygons with a usable K, 0-1), ``"soil_polygons"`` (number of
        such polygons) and ``"soil_bad_k"`` (share covered by polygons whose K is
        zero or negative).

    Notes
    -----
    With a_i the area of the field inside soil polygon i:
    K = exp(sum a_i ln K_i / sum a_i) (geometric mean), and
    x = sum a_i x_i / sum a_i for the barrier depth and the drainable porosity.
    The geometric mean is the usual effective conductivity of a log-normal
    random field in two dimensions (Matheron, 1967; common practice for
    areal means of K).

    References
    ----------
    .. [1] Matheron, G. (1967). Eléments pour une théorie des milieux poreux.
       Masson, Paris.

    Examples
    --------
    >>> import shapely
    >>> f = [shapely.box(0, 0, 100, 100)]
    >>> s = [shapely.box(0, 0, 50, 100), shapely.box(50, 0, 100, 100)]
    >>> r = area_weighted_soil(f, s, {"k": [0.1, 1.0], "barrier_depth": [2.0, 4.0]})
    >>> round(float(r["k"][0]), 4), float(r["barrier_depth"][0]), float(r["soil_cover"][0])
    (0.3162, 3.0, 1.0)
    """
    import shapely

    fields = np.asarray(fields, dtype=object)
    n = fields.size
    present = np.array([g is not None for g in fields], dtype=bool)
    filled = np.where(present, fields, shapely.Polygon())
    soil = np.asarray(soil, dtype=object)
    vals = {k: np.asarray(v, float) for k, v in values.items()}
    if "k" not in vals:
        raise InputError("the soil map needs a K column", param="soil_k_column")
    out = {k: np.full(n, np.nan) for k in vals}
    out["soil_cover"] = np.zeros(n)
    out["soil_polygons"] = np.zeros(n, dtype=int)
    out["soil_bad_k"] = np.zeros(n)
    if n == 0 or soil.size == 0:
        return out
    tree = shapely.STRtree(soil)
    fi, si = tree.query(filled, predicate="intersects")
    if fi.size == 0:
        return out
    a = shapely.area(shapely.intersection(filled[fi], soil[si]))
    keep = a > 0
    fi, si, a = fi[keep], si[keep], a[keep]
    area = shapely.area(filled)
    k = vals["k"][si]
    has_k = np.isfinite(k)
    good_k = has_k & (k > 0)
    bad = has_k & ~good_k
    covered = np.bincount(fi[good_k], weights=a[good_k], minlength=n)
    out["soil_cover"] = np.where(area > 0, np.minimum(covered / np.where(area > 0, area, 1),
                                                      1.0), 0.0)
    out["soil_polygons"] = np.bincount(fi[good_k], minlength=n)
    out["soil_bad_k"] = np.where(area > 0, np.bincount(fi[bad], weights=a[bad], minlength=n)
                                 / np.where(area > 0, area, 1), 0.0)
    for prop, v in vals.items():
        x = v[si]
        ok = np.isfinite(x) & (good_k if prop == "k" else True)
        w = np.bincount(fi[ok], weights=a[ok], minlength=n)
        xx = np.log(x[ok]) if prop == "k" else x[ok]
        s = np.bincount(fi[ok], weights=a[ok] * xx, minlength=n)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(w > 0, s / np.where(w > 0, w, 1.0), np.nan)
        out[prop] = np.exp(mean) if prop == "k" else mean
    out["k"] = np.where(out["soil_bad_k"] > 0, np.nan, out["k"])
    return out
