"""One validation for every way in: each bad value is refused the same way whether it
comes from a command-line option or from a project-file key.

Each row of BAD names the quantity, the option (with the command it belongs to), the
project-file key, the bad value in each form, and a fragment the one-line message must
hold. Every case must exit with code 2, print exactly one line on stderr starting
``drainplan: error:`` that names the option or the key, write nothing, and never show a
traceback. The ranges themselves are drainplan's own (practical limits of subsurface
drainage: common practice, no single source); what is tested here is that both ways
in share them.
"""

import json
import math
import tomllib
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drainplan._validate import QUANTITIES, check_quantity, range_text
from drainplan.errors import InputError
from drainplan.project import load_project

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_fields"
FIELDS = DEMO / "fields.geojson"

LAYOUT = ["layout", str(FIELDS), "--spacing", "18 m", "-o", "{tmp}/o.gpkg"]
# pipes options are refused while parsing, before the layout is read; cross-checks
# come right after the layout file's existence check, so any existing file will do
PIPES = ["pipes", str(FIELDS), "--coefficient", "10 mm/d", "-o", "{tmp}/s.csv"]
SPACING = ["spacing", "--k", "0.5", "--drain-depth", "1", "--barrier-depth", "3",
           "--drain-radius", "0.05", "--recharge", "0.01", "--water-table-depth", "0.5"]

# (id, cli base, cli args, project edits {(section, key): value}, message fragment)
BAD = [
    ("direction 1e300", LAYOUT, ["--direction", "1e300"], {("layout", "direction"): 1e300},
     "lateral bearing must be between -360 deg and 360 deg"),
    ("offset negative", LAYOUT, ["--offset", "-1 m"], {("layout", "offset"): "-1 m"},
     "offset of the first lateral must be between 0 m"),
    ("setback negative", LAYOUT, ["--setback", "-5 m"], {("layout", "setback"): "-5 m"},
     "headland setback must be between 0 m"),
    ("min_length negative", LAYOUT, ["--min-length", "-1 m"],
     {("layout", "min_length"): "-1 m"}, "minimum lateral length must be between 0 m"),
    ("exclusion setback negative", LAYOUT, ["--exclude-setback", "-1 m"],
     {("fields", "exclusion_setback"): "-1 m"}, "exclusion setback must be between 0 m"),
    ("herringbone angle", LAYOUT, ["--herringbone-angle", "89"],
     {("layout", "herringbone_angle"): 89}, "herringbone angle must be between 15 deg"),
    ("outlet nan", LAYOUT, ["--outlet", "nan,nan"], {("fields", "outlet"): [math.nan, math.nan]},
     "coordinates must be finite numbers"),
    ("outlet inf", LAYOUT, ["--outlet", "inf,0"], {("fields", "outlet"): [math.inf, 0.0]},
     "coordinates must be finite numbers"),
    ("outlet 1e15", LAYOUT, ["--outlet", "1e15,5000000"],
     {("fields", "outlet"): [1e15, 5e6]}, "cannot be a real position"),
    ("outlet far away", LAYOUT, ["--outlet", "1,2"], None, "the outlet is not near the fields"),
    ("outlet far away, metres", LAYOUT, ["--outlet", "500000,4000000"], None,
     "the outlet is not near the fields"),
    ("capacity factor denormal", PIPES, ["--capacity-factor", "1e-320"],
     {("pipes", "capacity_factor"): 1e-320}, "capacity factor must be between 0.1 and 1"),
    ("min velocity inf", PIPES, ["--min-velocity", "inf"], {("pipes", "min_velocity"): math.inf},
     "minimum velocity must be between 0.01 m/s and 10 m/s"),
    ("min velocity nan", PIPES, ["--min-velocity", "nan"], {("pipes", "min_velocity"): math.nan},
     "minimum velocity must be between 0.01 m/s and 10 m/s"),
    ("min velocity 0", PIPES, ["--min-velocity", "0"], {("pipes", "min_velocity"): 0},
     "minimum velocity must be between 0.01 m/s and 10 m/s"),
    ("max velocity negative", PIPES, ["--max-velocity", "-1"],
     {("pipes", "max_velocity"): -1}, "maximum velocity must be between 0.01 m/s and 10 m/s"),
    ("velocities crossed", PIPES, ["--min-velocity", "1.2", "--max-velocity", "0.5"],
     {("pipes", "min_velocity"): 1.2, ("pipes", "max_velocity"): 0.5},
     "must be less than"),
    ("max grade inf", PIPES, ["--max-grade", "inf"], {("pipes", "max_grade"): math.inf},
     "finite"),
    ("max grade above 100 %", PIPES, ["--max-grade", "150 %"],
     {("pipes", "max_grade"): "150 %"}, "maximum grade must be between 0.001 % and 100 %"),
    ("min grade negative", PIPES, ["--min-grade", "-0.1 %"], {("pipes", "min_grade"): "-0.1 %"},
     "minimum grade must be at least 0.001 % and less than 100 %"),
    ("grades crossed", PIPES, ["--min-grade", "6 %", "--max-grade", "5 %"],
     {("pipes", "min_grade"): "6 %", ("pipes", "max_grade"): "5 %"}, "must be less than"),
    ("assumed grade inf", PIPES, ["--assumed-grade", "inf"], None, "finite"),
    ("assumed grade 0", PIPES, ["--assumed-grade", "0"], None,
     "assumed grade must be at least 0.001 %"),
    ("outfall margin -1", PIPES, ["--outfall-margin", "-1"],
     {("pipes", "outfall_margin"): "-1 m"}, "outfall margin must be between 0 m"),
    ("capacity factor 0", PIPES, ["--capacity-factor", "0"], {("pipes", "capacity_factor"): 0},
     "capacity factor must be between 0.1 and 1"),
    ("capacity factor 2", PIPES, ["--capacity-factor", "2"], {("pipes", "capacity_factor"): 2},
     "capacity factor must be between 0.1 and 1"),
    ("coefficient negative", PIPES, ["--coefficient", "-1 mm/d"],
     {("pipes", "coefficient"): "-1 mm/d"},
     "drainage coefficient must be between 0.0001 m/d and 1 m/d"),
    ("min cover negative", PIPES, ["--min-cover", "-0.1 m"], {("pipes", "min_cover"): "-0.1 m"},
     "minimum cover must be between 0 m"),
    ("max depth 0", PIPES, ["--max-depth", "0 m"], {("pipes", "max_depth"): "0 m"},
     "maximum trench depth must be between 0.1 m and 10 m"),
    ("ditch level absurd", PIPES, ["--ditch-water-level", "1e9"],
     {("pipes", "ditch_water_level"): "1e9 m"}, "ditch water level"),
    ("spacing increment 0", None, None, {("drains", "spacing_increment"): "0 m"},
     "spacing increment must be between 0.01 m and 50 m"),
    ("spacing increment negative", None, None, {("drains", "spacing_increment"): "-1 m"},
     "spacing increment must be between 0.01 m and 50 m"),
    ("drain depth negative", SPACING, ["--drain-depth", "-1 m"], {("drains", "depth"): ["-1 m"]},
     "drain depth must be between 0.1 m and 10 m"),
    ("drain radius 0", None, None, {("drains", "radius"): "0 m"},
     "drain radius must be between 0.001 m and 1 m"),
    ("recharge 0", SPACING, ["--recharge", "0"], {("criteria", "recharge"): "0 mm/d"},
     "recharge"),
    ("recharge negative", SPACING, ["--recharge", "-0.01"],
     {("criteria", "recharge"): "-1 mm/d"}, "recharge"),
    ("days 0", SPACING, ["--days", "0"],
     {("criteria", "days"): 0}, "drawdown time must be between 0.01 d and 365 d"),
    ("days negative", SPACING, ["--days", "-1 d"], {("criteria", "days"): -1},
     "drawdown time must be between 0.01 d and 365 d"),
    ("porosity 0", SPACING, ["--drainable-porosity", "0"], {("soil", "drainable_porosity"): 0},
     "drainable porosity must be between 0.001 and 0.6"),
    ("porosity 1", SPACING, ["--drainable-porosity", "1"], {("soil", "drainable_porosity"): 1},
     "drainable porosity must be between 0.001 and 0.6"),
    ("final above initial", None, None, {("criteria", "initial_depth"): "0.5 m",
                                         ("criteria", "final_depth"): "0.3 m"},
     "criteria.initial_depth (0.5 m) must be less than criteria.final_depth (0.3 m)"),
    ("final equals initial", None, None, {("criteria", "final_depth"): "0 m"},
     "final water-table depth must be greater than 0 m"),
    ("initial depth negative", SPACING, ["--initial-depth", "-0.1 m"],
     {("criteria", "initial_depth"): "-0.1 m"},
     "initial water-table depth must be between 0 m"),
    ("water-table depth negative", SPACING, ["--water-table-depth", "-1 m"],
     {("criteria", "water_table_depth"): "-1 m"},
     "water-table depth must be between 0 m"),
    ("k_vertical 0", SPACING, ["--k-vertical", "0 m/d"], {("soil", "k_vertical"): "0 m/d"},
     "vertical conductivity must be between 1e-07 m/d and 1000 m/d"),
    ("interface depth negative", SPACING, ["--interface-depth", "-1 m"],
     {("soil", "interface_depth"): "-1 m"},
     "depth of the layer interface must be between 0 m"),
    ("k negative", SPACING, ["--k-above", "-0.8 m/d"], {("soil", "k_above"): "-0.8 m/d"},
     "conductivity above drain level must be between 1e-07 m/d"),
    ("barrier depth 0", SPACING, ["--barrier-depth", "0 m"], {("soil", "barrier_depth"): "0 m"},
     "depth to the barrier must be between 0.1 m and 1000 m"),
    ("logo is a device", None, None, {("report", "logo"): "/dev/zero"},
     "not a regular file"),
    ("logo is text", None, None, {("report", "logo"): "notes.txt"},
     "not a PNG, JPEG or GIF image"),
    ("logo missing", None, None, {("report", "logo"): "nothing.png"}, "file not found"),
    ("fields zero bytes", LAYOUT[:1], ["{tmp}/empty.geojson", "--spacing", "18 m", "-o",
                                       "{tmp}/o.gpkg"],
     {("fields", "file"): "empty.geojson"}, "is empty (0 bytes)"),
    ("fields a folder", LAYOUT[:1], ["{tmp}/folder.geojson", "--spacing", "18 m", "-o",
                                     "{tmp}/o.gpkg"],
     {("fields", "file"): "folder.geojson"}, "is a "),
    ("spacing 1e-9", LAYOUT, ["--spacing", "1e-9"], None,
     "lateral spacing must be between 1 m and 2000 m"),
    ("spacing 0.01", LAYOUT, ["--spacing", "0.01"], None,
     "lateral spacing must be between 1 m and 2000 m"),
]

def _toml(data):
    """A flat TOML writer for the test projects (sections of plain values)."""
    def val(v):
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, float) and not math.isfinite(v):
            return "nan" if v != v else ("inf" if v > 0 else "-inf")
        if isinstance(v, (int, float)):
            return repr(v)
        if isinstance(v, list):
            return "[" + ", ".join(val(x) for x in v) + "]"
        if isinstance(v, dict):            # e.g. [[soil.tests]] as inline tables
            return "{" + ", ".join(f"{k} = {val(x)}" for k, x in v.items()) + "}"
        return json.dumps(v)
    out = []
    for section, keys in data.items():
        out.append(f"[{section}]")
        out += [f"{k} = {val(v)}" for k, v in keys.items()]
        out.append("")
    return "\n".join(out)


def _setup(tmp_path):
    for name in ("fields.geojson", "exclusions.geojson", "outlet.geojson", "survey.csv",
                 "weather.csv"):
        (tmp_path / name).symlink_to(DEMO / name)
    (tmp_path / "empty.geojson").write_bytes(b"")
    (tmp_path / "folder.geojson").mkdir()
    (tmp_path / "notes.txt").write_text("not an image\n")


def project_with(tmp_path, edits):
    data = tomllib.loads((DEMO / "project.toml").read_text())
    for (section, key), value in edits.items():
        data.setdefault(section, {})[key] = value
    path = tmp_path / "project.toml"
    path.write_text(_toml(data))
    return path


def _check_one_line(r, name, fragment, tmp_path):
    assert r.exit_code == 2, (r.exit_code, r.stderr)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("drainplan: error:"), r.stderr
    assert fragment in lines[0], lines[0]
    assert name in lines[0], lines[0]
    assert "Traceback" not in r.output
    written = [p for p in tmp_path.rglob("*") if p.name in ("o.gpkg", "s.csv", "out")]
    assert not written


@pytest.mark.parametrize("case,base,args,edits,fragment", [b for b in BAD if b[1]],
                         ids=[b[0] for b in BAD if b[1]])
def test_option_refused(run, tmp_path, case, base, args, edits, fragment):
    _setup(tmp_path)
    argv = [a.replace("{tmp}", str(tmp_path)) for a in base + args]
    r = run(*argv)
    name = args[0] if args[0].startswith("--") else Path(args[0]).name
    _check_one_line(r, name, fragment, tmp_path)


@pytest.mark.parametrize("case,base,args,edits,fragment", [b for b in BAD if b[3]],
                         ids=[b[0] for b in BAD if b[3]])
def test_project_key_refused(run, tmp_path, case, base, args, edits, fragment):
    _setup(tmp_path)
    path = project_with(tmp_path, edits)
    r = run("design", path, "-o", tmp_path / "out")
    section, key = next(iter(edits))
    _check_one_line(r, f"{section}.{key}" if len(edits) == 1 else "project.toml", fragment,
                    tmp_path)


def test_counts_reported(capsys):
    """The counts of bad inputs tried and refused cleanly (printed with -s)."""
    n_cli = sum(1 for b in BAD if b[1])
    n_project = sum(1 for b in BAD if b[3])
    print(f"bad-input table: {n_cli} option cases, {n_project} project-file cases")
    assert n_cli >= 30 and n_project >= 40


# ---------------------------------------------------------------------------
# values that must be accepted the same way
# ---------------------------------------------------------------------------

def test_min_grade_with_percent_on_the_command_line(run, tmp_path):
    """'0.1 %' is read on the command line as in the project file (and a bare number
    stays percent there, as before)."""
    from drainplan.cli.pipes import pipes

    opt = next(p for p in pipes.params if p.name == "min_grade")
    assert opt.type.convert("0.1 %", opt, None) == pytest.approx(0.001)
    assert opt.type.convert("0.1", opt, None) == pytest.approx(0.001)
    assert opt.type.convert(opt.default, opt, None) == pytest.approx(0.001)
    p = load_project(DEMO / "project.toml")
    assert p.pipes["min_grade"] == pytest.approx(0.001)


def _cli_accepts(qty, kind, text):
    import click

    from drainplan.cli.options import Quantity

    try:
        Quantity(kind, check=qty).convert(text, None, None)
        return True
    except click.BadParameter:
        return False


def _project_accepts(tmp_path, section, key, text):
    path = project_with(tmp_path, {(section, key): text})
    try:
        load_project(path, check_files=False)
        return True
    except InputError:
        return False


_SAME = [("setback", "length", "layout", "setback", "m"),
         ("offset", "length", "layout", "offset", "m"),
         ("exclusion_setback", "length", "fields", "exclusion_setback", "m"),
         ("outfall_margin", "length", "pipes", "outfall_margin", "m"),
         ("coefficient", "rate", "pipes", "coefficient", "mm/d"),
         ("drainable_porosity", "fraction", "soil", "drainable_porosity", "")]


@settings(max_examples=25, deadline=None)
@given(v=st.one_of(st.floats(allow_nan=True, allow_infinity=True),
                   st.floats(min_value=-50, max_value=5000)),
       which=st.sampled_from(_SAME))
def test_option_and_key_agree(tmp_path_factory, v, which):
    """Property: for any number, the option and the project key accept or refuse alike,
    and accept exactly when the value lies in the one range table."""
    qty, kind, section, key, unit = which
    text = f"{v!r} {unit}".strip() if math.isfinite(v) else repr(v)
    tmp = tmp_path_factory.mktemp("p")
    cli = _cli_accepts(qty, kind, text)
    proj = _project_accepts(tmp, section, key, text)
    assert cli == proj, (text, cli, proj)
    if math.isfinite(v) and cli:
        from drainplan.units import parse_quantity

        si = parse_quantity(text, kind)
        assert check_quantity(qty, si) == si


@pytest.mark.parametrize("key", sorted(QUANTITIES))
def test_range_table_edges(key):
    """Every row: its bounds are accepted or refused as stated, NaN and inf refused,
    and the message states the range."""
    r = QUANTITIES[key]
    for bad in (math.nan, math.inf, -math.inf):
        with pytest.raises(InputError, match="must be"):
            check_quantity(key, bad, name="x")
    for bound, is_open, step in ((r.lo, r.lo_open, -1), (r.hi, r.hi_open, 1)):
        if bound is None:
            continue
        if is_open:
            with pytest.raises(InputError) as exc:
                check_quantity(key, bound)
            assert range_text(key) in str(exc.value)
        else:
            assert check_quantity(key, bound) == bound
        outside = bound + step * max(1e-6, abs(bound) * 1e-6)
        with pytest.raises(InputError):
            check_quantity(key, outside)


# ---------------------------------------------------------------------------
# any text at all: refused in one line or accepted within its range
# ---------------------------------------------------------------------------

_UNITS = ["", "m", "cm", "mm", "ft", "in", "km", "m/d", "mm/d", "in/d", "in/h", "d", "h",
          "%", "deg", "m/s", "kg", "ha", "m**2"]
_TEXT = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.tuples(st.floats(allow_nan=True, allow_infinity=True, width=32),
              st.sampled_from(_UNITS)).map(lambda t: f"{t[0]!r} {t[1]}".strip()),
    st.sampled_from(["", " ", "m", "cm", "9**9**9 m/d", "1e400", "-0", "3/0 in/d",
                     "1/2/3 m", "0x10", "1_000", "½ in", "nan m", "1 m m", "(1) m",
                     "1e-320 m", "1e308 km"]),
    st.text(max_size=12),
)


def _numeric_options():
    from drainplan.cli.layout import layout
    from drainplan.cli.options import Number, Quantity
    from drainplan.cli.pipes import pipes

    return [(c.name, p) for c in (layout, pipes) for p in c.params
            if isinstance(p.type, (Quantity, Number)) and getattr(p.type, "check", None)]


@settings(max_examples=60, deadline=None)
@given(data=st.data(), text=_TEXT)
def test_any_option_text_is_clean(data, text):
    """Property: any text typed for a checked option is refused with a BadParameter
    (one line, exit 2) or gives a finite value inside the option's range."""
    import click

    cmd, param = data.draw(st.sampled_from(_numeric_options()))
    try:
        v = param.type.convert(text, param, None)
    except click.BadParameter as exc:
        assert "\n" not in exc.format_message()
        return
    r = QUANTITIES[param.type.check]
    assert math.isfinite(v)
    assert (r.lo is None or v >= r.lo) and (r.hi is None or v <= r.hi), (cmd, text, v)


def _numeric_keys():
    from drainplan.project import SCHEMA

    numeric = ("length", "rate", "time", "fraction", "number", "direction", "radius")
    return [(s, k) for s, keys in SCHEMA.items() for k, (kind, _) in keys.items()
            if kind in numeric]


@settings(max_examples=60, deadline=None)
@given(key=st.sampled_from(_numeric_keys()),
       value=st.one_of(_TEXT, st.floats(allow_nan=True, allow_infinity=True),
                       st.integers(-10**30, 10**30), st.booleans()))
def test_any_project_value_is_clean(tmp_path_factory, key, value):
    """Property: any value of a numeric project key is refused with one InputError
    line naming the key, or read as a finite value inside its range."""
    from drainplan.project import CHECKED_AS

    tmp = tmp_path_factory.mktemp("k")
    path = project_with(tmp, {key: value})
    try:
        p = load_project(path, check_files=False)
    except InputError as exc:
        assert "\n" not in str(exc)
        return
    section, name = key
    got = getattr(p, section)[name]
    q = CHECKED_AS.get(key, name)
    if q in QUANTITIES and not isinstance(got, str):
        for v in (got if isinstance(got, list) else [got]):
            assert math.isfinite(v)
            check_quantity(q, v)


def test_outlet_far_from_the_fields_in_a_project(run, tmp_path):
    """An outlet in the wrong CRS is found once the fields are read: one line, exit 2."""
    _setup(tmp_path)
    path = project_with(tmp_path, {("fields", "outlet"): [1.0, 2.0]})
    r = run("-q", "design", path, "-o", tmp_path / "out")
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "the outlet is not near the fields" in lines[0]
    assert not (tmp_path / "out").exists()
