"""Parsing quantities with units at the edge."""

import pytest
from numpy.testing import assert_allclose

from drainplan.errors import InputError
from drainplan.units import convert, parse_quantity


@pytest.mark.parametrize("text,kind,si", [
    # conversions by definition: 1 in = 0.0254 m, 1 ft = 0.3048 m (international yard, 1959)
    ("3/8 in/d", "rate", 0.375 * 0.0254), ("0.6 m/d", "rate", 0.6),
    ("1.2 in/h", "rate", 1.2 * 0.0254 * 24), ("10 mm/d", "rate", 0.01),
    ("90 cm", "length", 0.9), ("3 ft", "length", 0.9144), ("1.2", "length", 1.2),
    (1.2, "length", 1.2), ("48 h", "time", 2.0), ("2", "time", 2.0),
    ("6 %", "fraction", 0.06), ("0.06", "fraction", 0.06),
    # pint uses the US survey acre, 4046.8726 m2 (the international acre is 4046.8564 m2)
    ("40 acre", "area", 40 * 4046.8726),
])
def test_parse(text, kind, si):
    assert_allclose(parse_quantity(text, kind), si, rtol=1e-6)


@pytest.mark.parametrize("text,kind,match", [
    ("3 m", "rate", "not a rate"), ("0.5 m/d", "length", "not a length"),
    ("abc", "length", "cannot read"), ("nan", "length", "finite"), ("", "length", "cannot"),
])
def test_parse_errors_name_the_input(text, kind, match):
    with pytest.raises(InputError, match=match) as info:
        parse_quantity(text, kind, name="--drain-depth")
    assert "--drain-depth" in str(info.value)


def test_bare_number_default_unit():
    assert_allclose(parse_quantity("10", "rate", default_unit="mm/d"), 0.01)


def test_convert():
    assert_allclose(convert(1.0, "in/d", "mm/d"), 25.4)
