"""Options and parameter types shared by several commands.

Quantities typed on the command line are parsed with
:func:`drainplan.units.parse_quantity` and checked against the one table of
allowed ranges (:data:`drainplan._validate.QUANTITIES`) that the project-file
reader uses too, so an option and its project-file key accept the same values.
"""

from __future__ import annotations

import click

from .._validate import check_quantity
from ..errors import InputError
from ..units import UNIT_SYSTEMS, parse_quantity


def _option(param):
    return f"--{param.name.replace('_', '-')}" if param is not None else "value"


class Quantity(click.ParamType):
    """A number or a quantity with units, converted to SI (m, m/d, d).

    ``check`` names the row of the range table the value must satisfy;
    ``default_unit`` is the unit of a bare number (e.g. "percent" for grades).
    """

    def __init__(self, kind, check=None, default_unit=None):
        self.kind = kind
        self.check = check
        self.default_unit = default_unit
        self.name = {"length": "LENGTH", "rate": "RATE", "time": "TIME",
                     "fraction": "FRACTION", "area": "AREA"}[kind]

    def convert(self, value, param, ctx):
        name = _option(param)
        try:
            if isinstance(value, float):
                v = value
            else:
                v = parse_quantity(value, self.kind, name=name, default_unit=self.default_unit)
            if self.check is not None:
                check_quantity(self.check, v)
            return v
        except InputError as exc:
            raise click.BadParameter(str(exc).split(": ", 1)[-1], ctx=ctx, param=param) from None


class Number(click.ParamType):
    """A plain number in the option's stated unit, checked against the range table."""

    name = "NUMBER"

    def __init__(self, check, scale=1.0):
        self.check = check
        self.scale = scale

    def convert(self, value, param, ctx):
        try:
            v = float(value) * self.scale
        except (TypeError, ValueError):
            raise click.BadParameter(f"expected a number, got {value!r}", ctx=ctx,
                                     param=param) from None
        try:
            return check_quantity(self.check, v)
        except InputError as exc:
            raise click.BadParameter(str(exc), ctx=ctx, param=param) from None


def checked(kind, check, default_unit=None):
    """A :class:`Quantity` checked against the range of ``check``."""
    return Quantity(kind, check=check, default_unit=default_unit)


LENGTH = Quantity("length")
RATE = Quantity("rate")
TIME = Quantity("time")
FRACTION = Quantity("fraction")

units_option = click.option(
    "--units", type=click.Choice(list(UNIT_SYSTEMS)), default="metric", show_default=True,
    help="Units of the printed results (JSON is always SI).")
json_option = click.option("--json", "as_json", is_flag=True,
                           help="Print one JSON object (SI units) on stdout.")
