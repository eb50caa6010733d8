"""Units at the edge: parse quantities typed by users, format results for display.

Inside drainplan everything is SI with the day as time unit: metres, metres per
day, days. Text such as ``"3/8 in/d"``, ``"0.6 m/d"``, ``"90 cm"`` or ``"3 ft"`` is
parsed once here with pint, checked for its dimension and converted; a bare
number means the SI unit of the quantity (m, m/d, d) unless the caller names
another default.
"""

from __future__ import annotations

from functools import lru_cache

from .errors import InputError

__all__ = ["KINDS", "parse_quantity", "convert", "DISPLAY", "UNIT_SYSTEMS", "display_unit",
           "to_display", "show"]

#: Quantity kinds: (pint dimensionality, SI unit used inside, example text).
KINDS = {
    "length": ("[length]", "m", "'90 cm', '3 ft' or '1.2' (metres)"),
    "rate": ("[length] / [time]", "m/d", "'0.6 m/d', '1.2 in/h', '3/8 in/d' or '0.5' (m/d)"),
    "time": ("[time]", "d", "'2 d', '48 h' or '2' (days)"),
    "fraction": ("", "", "'0.06' or '6 %'"),
    "area": ("[length] ** 2", "m**2", "'16 ha', '40 acre' or '1000' (m2)"),
}

#: Display units by unit system and quantity role: (label, factor from the SI
#: value drainplan stores). Stored values are metres for lengths, m/d for
#: conductivity and recharge, days, hectares for areas, m/ha for drain density
#: L/s for flows and m/s for velocities. Factors are exact from 1 ft = 0.3048 m and 1 in = 0.0254 m;
#: the acre is the international acre (4046.8564224 m2).
DISPLAY = {
    "metric": {"length": ("m", 1.0), "spacing": ("m", 1.0), "radius": ("cm", 100.0),
               "conductivity": ("m/d", 1.0), "recharge": ("mm/d", 1000.0), "time": ("d", 1.0),
               "area": ("ha", 1.0), "density": ("m/ha", 1.0), "flow": ("L/s", 1.0),
               "velocity": ("m/s", 1.0)},
    "us": {"length": ("ft", 1 / 0.3048), "spacing": ("ft", 1 / 0.3048),
           "radius": ("in", 1 / 0.0254), "conductivity": ("in/h", 1 / 0.0254 / 24.0),
           "recharge": ("in/d", 1 / 0.0254), "time": ("d", 1.0),
           "area": ("acre", 1e4 / 4046.8564224),
           "density": ("ft/acre", (1 / 0.3048) / (1e4 / 4046.8564224)),
           "flow": ("ft³/s", 1 / 28.316846592), "velocity": ("ft/s", 1 / 0.3048)},
}
#: Unit systems accepted by ``--units`` and the report options.
UNIT_SYSTEMS = tuple(DISPLAY)


def _display(role, system):
    try:
        return DISPLAY[system][role]
    except KeyError:
        raise InputError(f"unit system {system!r} is unknown; choose one of "
                         + ", ".join(UNIT_SYSTEMS), param="units") from None


def display_unit(role, system="metric"):
    """Label of the display unit for a quantity role in a unit system.

    Examples
    --------
    >>> display_unit("recharge", "us")
    'in/d'
    """
    return _display(role, system)[0]


def to_display(value, role, system="metric"):
    """A stored SI value (float or array) in the display unit of ``role``."""
    return value * _display(role, system)[1]


def show(value, role, system="metric", digits=2):
    """Format a stored SI value with its display unit; '–' for None or NaN.

    Examples
    --------
    >>> show(1.2, "length", "us")
    '3.94 ft'
    >>> show(0.01, "recharge", "metric", 1)
    '10.0 mm/d'
    """
    if value is None or value != value:
        return "–"
    label, factor = _display(role, system)
    return f"{float(value) * factor:.{digits}f} {label}"


@lru_cache(maxsize=1)
def _registry():
    import pint

    ureg = pint.UnitRegistry()
    return ureg


def parse_quantity(text, kind, *, name="value", default_unit=None):
    """Parse a number or a quantity with units into the SI value of ``kind``.

    Parameters
    ----------
    text : str or float
        For example ``"3/8 in/d"``, ``"90 cm"``, ``"1.2"`` or ``1.2``.
    kind : {"length", "rate", "time", "fraction", "area"}
        What the value must be.
    name : str
        Name used in error messages (an option or key name).
    default_unit : str, optional
        Unit of a bare number (default: the SI unit of ``kind``).

    Returns
    -------
    float
        The value in m, m/d, d, m2 or as a plain fraction.

    Raises
    ------
    drainplan.errors.InputError
        When the text is not a number or quantity, has the wrong dimension,
        or is not finite.

    Examples
    --------
    >>> round(parse_quantity("3/8 in/d", "rate"), 6)
    0.009525
    >>> parse_quantity("90 cm", "length")
    0.9
    >>> parse_quantity(2, "time")
    2.0
    """
    dim, si, example = KINDS[kind]
    if isinstance(text, bool):
        raise InputError(f"{name}: expected {example}, got {text!r}", param=name)
    if isinstance(text, (int, float)):
        value = float(text)
        unit = default_unit
    else:
        s = str(text).strip()
        try:
            value = float(s)
            unit = default_unit
        except ValueError:
            value = None
    if value is not None:
        if value != value or value in (float("inf"), float("-inf")):
            raise InputError(f"{name}: expected a finite number, got {text!r}", param=name)
        if unit is None:
            return value
        return convert(value, unit, si or "dimensionless")
    ureg = _registry()
    try:
        q = ureg.Quantity(s)
    except Exception:
        raise InputError(f"{name}: cannot read {text!r}; expected {example}", param=name) from None
    if not hasattr(q, "dimensionality"):
        raise InputError(f"{name}: cannot read {text!r}; expected {example}", param=name)
    want = ureg.Quantity(1, si or "dimensionless").dimensionality
    if q.dimensionality != want:
        raise InputError(f"{name}: {text!r} is not a {kind}; expected {example}", param=name)
    value = float(q.to(si or "dimensionless").magnitude)
    if value != value or abs(value) == float("inf"):
        raise InputError(f"{name}: expected a finite number, got {text!r}", param=name)
    return value


def convert(value, from_unit, to_unit):
    """Convert a float or array between two unit strings understood by pint.

    Examples
    --------
    >>> round(float(convert(1.0, "m", "ft")), 4)
    3.2808
    """
    if from_unit == to_unit:
        return value
    ureg = _registry()
    return ureg.Quantity(value, from_unit).to(to_unit).magnitude
