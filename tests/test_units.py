"""Parsing quantities with units at the edge."""

from pathlib import Path

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


# --- strict grammar (a number, then a unit; nothing evaluated) -------------------------

# Each row: the text, its kind, the option that takes it and the project-file key that
# takes it, and the expected one-line message (after the input's name).
BAD_INPUTS = [
    ("9**9**9 m/d", "rate", "--k", ("soil", "k_below"), "cannot read '9**9**9 m/d'"),
    ("2*3 m", "length", "--drain-depth", ("criteria", "water_table_depth"),
     "cannot read '2*3 m'"),
    ("(3) m", "length", "--barrier-depth", ("soil", "barrier_depth"), "cannot read '(3) m'"),
    ("1 m**9**9**9", "length", "--barrier-depth", ("soil", "barrier_depth"),
     "cannot read '1 m**9**9**9'"),
    ("mm/d", "rate", "--k", ("soil", "k_below"), "'mm/d' has a unit but no number"),
    ("m/d", "rate", "--recharge", ("criteria", "recharge"), "'m/d' has a unit but no number"),
    ("cm", "length", "--drain-depth", ("criteria", "water_table_depth"),
     "'cm' has a unit but no number"),
    ("h", "time", "--days", ("criteria", "days"), "'h' has a unit but no number"),
    ("1/0 m", "length", "--barrier-depth", ("soil", "barrier_depth"),
     "'1/0 m' divides by zero"),
    ("1e400 m", "length", "--barrier-depth", ("soil", "barrier_depth"),
     "expected a finite number, got '1e400 m'"),
    ("3 bananas/d", "rate", "--k", ("soil", "k_below"),
     "cannot read '3 bananas/d': unknown unit 'bananas/d'"),
    ("1" * 80 + " m", "length", "--barrier-depth", ("soil", "barrier_depth"),
     "cannot read a 82-character text as a quantity"),
    ("0.5 m", "rate", "--k", ("soil", "k_below"), "'0.5 m' is not a rate"),
]


@pytest.mark.parametrize("text,kind,option,key,message", BAD_INPUTS)
def test_strict_grammar_refuses_in_one_line(text, kind, option, key, message):
    with pytest.raises(InputError) as info:
        parse_quantity(text, kind, name=option)
    msg = str(info.value)
    assert msg.startswith(f"{option}: {message}")
    assert "\n" not in msg and info.value.param == option


@pytest.mark.parametrize("text,kind,option,key,message", BAD_INPUTS)
def test_strict_grammar_from_the_project_file(tmp_path, text, kind, option, key, message):
    from drainplan.project import load_project

    section, name = key
    lines = (Path(__file__).resolve().parents[1] / "demo_fields" / "project.toml").read_text()
    out, current = [], None
    for line in lines.splitlines():
        if line.startswith("["):
            current = line.strip("[] ")
        if current == section and line.split("=")[0].strip() == name:
            line = f"{name} = {text!r}".replace("'", '"')
        out.append(line)
    (tmp_path / "project.toml").write_text("\n".join(out) + "\n")
    with pytest.raises(InputError) as info:
        load_project(tmp_path / "project.toml")
    msg = str(info.value)
    assert f"{section}.{name}: {message}" in msg and "\n" not in msg


@pytest.mark.parametrize("text,option", [
    ("9**9**9 m/d", "--k"), ("mm/d", "--k"), ("h", "--days"), ("cm", "--drain-radius"),
])
def test_strict_grammar_on_the_command_line(text, option):
    """Exit code 2 and one line naming the option, at once (a subprocess with a time
    limit, so an evaluating parser would fail the test instead of hanging it)."""
    import subprocess
    import sys

    args = ["spacing", "--k", "1 m/d", "--drain-depth", "1 m", "--barrier-depth", "3 m",
            "--drain-radius", "5 cm", "--recharge", "7 mm/d", "--water-table-depth", "0.5 m",
            "--days", "2"]
    i = args.index(option)
    args[i + 1] = text
    out = subprocess.run([sys.executable, "-m", "drainplan", *args], capture_output=True,
                         text=True, timeout=60)
    assert out.returncode == 2
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and option in lines[0] and text in lines[0]


@pytest.mark.parametrize("text,kind,si", [
    ("3/8in/d", "rate", 0.375 * 0.0254), ("1e-3 m / d", "rate", 1e-3), ("6%", "fraction", 0.06),
    ("-0.5 m", "length", -0.5), ("+.5 ft", "length", 0.1524), ("2 weeks", "time", 14.0),
    ("1000 m2", "area", 1000.0), ("1000 m²", "area", 1000.0), ("2 km**2", "area", 2e6),
    ("30 min", "time", 30 / 1440),
    # a unit outside the table goes to pint (1 dm = 0.1 m, SI prefix)
    ("1 dm", "length", 0.1), ("12 mm per day", "rate", 0.012),
])
def test_grammar_accepts(text, kind, si):
    assert_allclose(parse_quantity(text, kind), si, rtol=1e-12)


def test_fast_units_agree_with_pint():
    """Every unit read without pint converts exactly as pint converts it (pint is the
    reference library; 1 ft = 0.3048 m, 1 in = 0.0254 m, 1 d = 86400 s by definition)."""
    from drainplan import units

    ureg = units._registry()
    for kind, table in units._FAST_UNITS.items():
        si = units.KINDS[kind][1] or "dimensionless"
        for unit, factor in table.items():
            # pint has no 'm2' spelling; it reads m**2, m^2 and m²
            plain_power = unit.endswith("2") and unit[:-1] in units._LENGTH_UNITS
            pint_unit = unit[:-1] + "**2" if plain_power else unit
            ref = ureg.Quantity(1.0, pint_unit).to(si).magnitude
            assert_allclose(factor, ref, rtol=1e-12, err_msg=unit)


def test_common_units_do_not_load_pint():
    import subprocess
    import sys

    code = ("import sys; from drainplan.units import parse_quantity as p; "
            "v = [p('7 mm/d', 'rate'), p('90 cm', 'length'), p('3/8 in/d', 'rate'), "
            "p('48 h', 'time'), p('16 ha', 'area'), p('6 %', 'fraction'), "
            "p('10', 'rate', default_unit='mm/d')]; "
            "print('pint' in sys.modules, 'numpy' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.split() == ["False", "False"]
