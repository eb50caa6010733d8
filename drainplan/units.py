"""Units at the edge: parse quantities typed by users, format results for display.

Inside drainplan everything is SI with the day as time unit: metres, metres per
day, days. Text such as ``"3/8 in/d"``, ``"0.6 m/d"``, ``"90 cm"`` or ``"3 ft"`` is
parsed once here by a strict grammar (a number, then a unit; nothing is ever
evaluated), checked for its dimension and converted: common units from a table,
other unit words by pint, which is loaded only then. A bare number means the SI
unit of the quantity (m, m/d, d) unless the caller names another default.
"""

from __future__ import annotations

import re
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

    A rate in inches per day keeps at least three decimals (an inch is 25.4 mm: a
    tenth of an inch a day would hide 3/8 in/d):

    >>> show(0.375 * 0.0254, "recharge", "us", 1)
    '0.375 in/d'
    """
    if value is None or value != value:
        return "–"
    label, factor = _display(role, system)
    if role == "recharge" and system == "us":
        digits = max(digits, 3)
    return f"{float(value) * factor:.{digits}f} {label}"


@lru_cache(maxsize=1)
def _registry():
    import pint

    ureg = pint.UnitRegistry()
    return ureg


# ---------------------------------------------------------------------------
# Strict grammar: a number (decimal, exponent or a simple fraction such as 3/8)
# optionally followed by a unit made of unit words, each with an optional small
# power of one digit (m2, m**2, m^2, m²), joined by '/', '*', '·' or
# a space. Nothing is ever evaluated: "9**9**9 m/d" does not match and is
# refused at once. Common units are converted from the table below without
# loading pint; pint reads only the unit words of a text that passed the
# grammar.
# ---------------------------------------------------------------------------
_NUMBER = r"[+-]?(?:\d+/\d+|(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)"
_WORD = r"(?:%|[^\W\d]+)"
_POWER = r"(?:(?:\*\*|\^)?-?[1-9]|[²³])"
_FACTOR = _WORD + _POWER + "?"
_UNIT = _FACTOR + r"(?:(?:\s*[/*·]\s*|\s+)" + _FACTOR + ")*"
_QUANTITY_RE = re.compile(rf"\s*(?P<number>{_NUMBER})?\s*(?P<unit>{_UNIT})?\s*")
#: Longest text read as a quantity (a longer one is refused before matching).
_MAX_CHARS = 64

# Common units as factors to drainplan's SI-with-days units. Each is checked
# against pint's definition in tests/test_units.py.
_LENGTH_UNITS = {
    "m": 1.0, "metre": 1.0, "metres": 1.0, "meter": 1.0, "meters": 1.0,
    "cm": 0.01, "centimetre": 0.01, "centimetres": 0.01, "centimeter": 0.01,
    "centimeters": 0.01, "mm": 0.001, "millimetre": 0.001, "millimetres": 0.001,
    "millimeter": 0.001, "millimeters": 0.001, "km": 1000.0,
    "ft": 0.3048, "foot": 0.3048, "feet": 0.3048,
    "in": 0.0254, "inch": 0.0254, "inches": 0.0254,
    "yd": 0.9144, "yard": 0.9144, "yards": 0.9144,
}
_TIME_UNITS = {
    "d": 1.0, "day": 1.0, "days": 1.0,
    "h": 1.0 / 24.0, "hr": 1.0 / 24.0, "hour": 1.0 / 24.0, "hours": 1.0 / 24.0,
    "min": 1.0 / 1440.0, "minute": 1.0 / 1440.0, "minutes": 1.0 / 1440.0,
    "s": 1.0 / 86400.0, "second": 1.0 / 86400.0, "seconds": 1.0 / 86400.0,
    "week": 7.0, "weeks": 7.0,
}
#: pint's acre (the US survey acre, 4046.8726 m2); kept so that a value reads the
#: same with and without pint.
_PINT_ACRE = 4046.872609874252
_AREA_UNITS = {"ha": 1e4, "hectare": 1e4, "hectares": 1e4,
               "acre": _PINT_ACRE, "acres": _PINT_ACRE}
for _name in ("m", "cm", "mm", "km", "ft", "in", "yd"):
    for _sq in ("2", "**2", "^2", "²"):
        _AREA_UNITS[_name + _sq] = _LENGTH_UNITS[_name] ** 2
_FAST_UNITS = {
    "length": _LENGTH_UNITS,
    "time": _TIME_UNITS,
    "area": _AREA_UNITS,
    "fraction": {"%": 0.01, "percent": 0.01},
    "rate": {f"{a}/{b}": fa / fb for a, fa in _LENGTH_UNITS.items()
             for b, fb in _TIME_UNITS.items()},
}
_FAST_KIND = {u: k for k, table in _FAST_UNITS.items() for u in table}


def _normalise_unit(unit):
    """'mm / d' -> 'mm/d', 'm^2' -> 'm**2', 'kg·m' -> 'kg*m'."""
    unit = re.sub(r"\s*([/*·])\s*", r"\1", unit.strip())
    return re.sub(r"\s+", " ", unit.replace("·", "*"))


def _split_quantity(s, name, example):
    """(number, unit or None) of a text that follows the strict grammar, or InputError."""
    if len(s) > _MAX_CHARS:
        raise InputError(f"{name}: cannot read a {len(s)}-character text as a quantity; "
                         f"expected {example}", param=name)
    m = _QUANTITY_RE.fullmatch(s)
    if m is None or not s.strip():
        raise InputError(f"{name}: cannot read {s!r}; expected a number and a unit, such as "
                         f"{example}", param=name)
    number, unit = m.group("number"), m.group("unit")
    if number is None:
        if _normalise_unit(unit) in _FAST_KIND:
            raise InputError(f"{name}: {s!r} has a unit but no number; expected {example}",
                             param=name)
        raise InputError(f"{name}: cannot read {s!r}; expected a number and a unit, such as "
                         f"{example}", param=name)
    if "/" in number:
        num, den = number.split("/")
        if float(den) == 0:
            raise InputError(f"{name}: {s!r} divides by zero; expected {example}", param=name)
        value = float(num) / float(den)
    else:
        value = float(number)
    return value, (_normalise_unit(unit) if unit else None)


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
        When the text is not a number optionally followed by a unit (a
        decimal, an exponent or a simple fraction such as ``3/8``; nothing is
        evaluated), is a unit without a number, has the wrong dimension, or is
        not finite. The message is one line and names the input.

    Notes
    -----
    Common units (m, cm, mm, km, ft, in, yd; d, h, min, s, week; their
    quotients; ha, acre, squared lengths; %) are converted from a table
    without loading pint; other unit words are read by pint.

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
            value, unit = _split_quantity(s, name, example)
            if unit is None:
                unit = default_unit
            elif unit not in _FAST_KIND:
                value = _pint_value(value, unit, kind, text, name, example)
                unit = None
            elif _FAST_KIND[unit] != kind:
                raise InputError(f"{name}: {text!r} is not a {kind}; expected {example}",
                                 param=name)
            else:
                value = value * _FAST_UNITS[kind][unit]
                unit = None
    if value != value or value in (float("inf"), float("-inf")):
        raise InputError(f"{name}: expected a finite number, got {text!r}", param=name)
    if unit is None:
        return value
    value = float(convert(value, unit, si or "dimensionless"))
    if value != value or abs(value) == float("inf"):
        raise InputError(f"{name}: expected a finite number, got {text!r}", param=name)
    return value


def _pint_value(value, unit, kind, text, name, example):
    """Convert with pint a unit the table does not hold (the text passed the grammar)."""
    dim, si, _ = KINDS[kind]
    ureg = _registry()
    try:
        units = ureg.parse_units(unit)
    except Exception:
        raise InputError(f"{name}: cannot read {text!r}: unknown unit {unit!r}; expected "
                         f"{example}", param=name) from None
    want = ureg.Quantity(1, si or "dimensionless").dimensionality
    if units.dimensionality != want:
        raise InputError(f"{name}: {text!r} is not a {kind}; expected {example}", param=name)
    return float(ureg.Quantity(value, units).to(si or "dimensionless").magnitude)


def convert(value, from_unit, to_unit):
    """Convert a float or array between two unit strings understood by pint.

    Examples
    --------
    >>> round(float(convert(1.0, "m", "ft")), 4)
    3.2808
    """
    if from_unit == to_unit:
        return value
    a, b = _normalise_unit(from_unit), _normalise_unit(to_unit)
    kind = _FAST_KIND.get(a)
    if kind is not None and _FAST_KIND.get(b) == kind:
        return value * (_FAST_UNITS[kind][a] / _FAST_UNITS[kind][b])
    ureg = _registry()
    return ureg.Quantity(value, from_unit).to(to_unit).magnitude


#: Metric quantities inside notes written by lower layers, and their display roles with
#: the factor from the written unit to the stored SI unit.
_NOTE_UNITS = {"m/s": ("velocity", 1.0), "mm/d": ("recharge", 1e-3), "m/d": ("recharge", 1.0),
               "L/s": ("flow", 1.0), "ha": ("area", 1.0), "mm": ("radius", 1e-3),
               "cm": ("radius", 1e-2), "km": ("length", 1e3), "m": ("length", 1.0)}


def text_in_units(text, units):
    """Notes from the layout, pipe and spacing layers are written in SI; on a US sheet their
    quantities ('2.00 m', '1.50 m/s', '1070 m') are shown in US units, same precision."""
    if units != "us" or not text:
        return text
    pat = re.compile(r"(?<![\w.])(-?\d+(?:\.\d+)?)\s?(m/s|mm/d|m/d|L/s|ha|mm|cm|km|m)"
                     r"(?![\w/²³])")

    def sub(mt):
        num, unit = mt.group(1), mt.group(2)
        role, to_si = _NOTE_UNITS[unit]
        nd = len(num.split(".")[1]) if "." in num else 0
        value = float(to_display(float(num) * to_si, role, units))
        if role == "recharge":
            nd = max(nd, 2)
        return f"{value:.{nd}f} {display_unit(role, units)}"

    return pat.sub(sub, str(text))
