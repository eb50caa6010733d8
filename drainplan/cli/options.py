"""Options and parameter types shared by several commands."""

from __future__ import annotations

import click

from ..errors import InputError
from ..units import UNIT_SYSTEMS, parse_quantity


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
    "--units", type=click.Choice(list(UNIT_SYSTEMS)), default="metric", show_default=True,
    help="Units of the printed results (JSON is always SI).")
json_option = click.option("--json", "as_json", is_flag=True,
                           help="Print one JSON object (SI units) on stdout.")
