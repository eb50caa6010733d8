"""Options and parameter types shared by several commands."""

from __future__ import annotations

import click

from ..errors import InputError
from ..units import parse_quantity


class Quantity(click.ParamType):
    """A number or a quantity with units, converted to SI (m, m/d, d)."""

    def __init__(self, kind):
        self.kind = kind
        self.name = {"length": "LENGTH", "rate": "RATE", "time": "TIME",
                     "fraction": "FRACTION", "area": "AREA"}[kind]

    def convert(self, value, param, ctx):
        if isinstance(value, float):
            return value
        name = f"--{param.name.replace('_', '-')}" if param is not None else "value"
        try:
            return parse_quantity(value, self.kind, name=name)
        except InputError as exc:
            raise click.BadParameter(str(exc).split(": ", 1)[-1], ctx=ctx, param=param) from None


LENGTH = Quantity("length")
RATE = Quantity("rate")
TIME = Quantity("time")
FRACTION = Quantity("fraction")

units_option = click.option(
    "--units", type=click.Choice(["metric", "us"]), default="metric", show_default=True,
    help="Units of the printed results (JSON is always SI).")
json_option = click.option("--json", "as_json", is_flag=True,
                           help="Print one JSON object (SI units) on stdout.")


#: Display factors from SI for text tables: (unit label, factor).
DISPLAY = {
    "metric": {"length": ("m", 1.0), "area": ("ha", 1.0), "density": ("m/ha", 1.0),
               "flow": ("L/s", 1.0)},
    "us": {"length": ("ft", 1 / 0.3048), "area": ("acre", 2.4710538),
           "density": ("ft/acre", (1 / 0.3048) / 2.4710538),
           "flow": ("ft3/s", 1 / 28.316846592)},
}


def shown(value, role, units, digits=0):
    """Format an SI value (m, ha, m/ha or L/s) in the display unit system, with its unit."""
    label, factor = DISPLAY[units][role]
    return f"{value * factor:.{digits}f} {label}"
