"""`drainplan layout` end to end: formats, CRS handling, outputs and bad input."""

import json
import zipfile
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely
from pyproj import Geod

DEMO = Path(__file__).resolve().parents[1] / "demo_fields"
FIELDS = DEMO / "fields.geojson"
EXCL = DEMO / "exclusions.geojson"


def _layout(run, fields, out, *extra):
    return run("layout", fields, "--spacing", "18 m", "--direction", "auto", "--setback",
               "6 m", "-o", out, *extra)


def test_demo_layout_and_layers(run, tmp_path):
    out = tmp_path / "plan.gpkg"
    png = tmp_path / "plan.png"
    r = _layout(run, FIELDS, out, "--exclude", EXCL, "--outlet", DEMO / "outlet.geojson",
                "--plot", png, "--json")
    assert r.exit_code == 0, r.output
    summary = json.loads(r.stdout)
    layers = {row[0] for row in pyogrio.list_layers(out)}
    from drainplan.layout_plan import LAYER_NAMES

    assert set(LAYER_NAMES) == layers
    lat = gpd.read_file(out, layer="laterals")
    assert {"field_id", "lateral_id", "length_m", "spacing_m"} <= set(lat.columns)
    assert lat.crs.to_epsg() == 4326                        # written in the input CRS
    assert summary["totals"]["laterals"] > 40
    assert png.stat().st_size > 10_000
    # lengths (computed in UTM) agree with geodesic lengths on the ellipsoid: the UTM point
    # scale factor lies in 0.9996-1.0010 inside a zone (Snyder 1987, USGS Prof. Paper 1395,
    # ch. 8 -- recalled), so 0.15 % covers it.
    geod = Geod(ellps="WGS84")
    geo = np.array([geod.geometry_length(g) for g in lat.geometry])
    np.testing.assert_allclose(lat["length_m"], geo, rtol=1.5e-3)
    # field areas: geodesic area of the lon/lat polygons
    fld = gpd.read_file(out, layer="field")
    geo_area = np.array([abs(geod.geometry_area_perimeter(g)[0]) for g in fld.geometry])
    np.testing.assert_allclose(fld["area_ha"] * 1e4, geo_area, rtol=3e-3)


def test_round_trip_reprojection(run, tmp_path):
    out = tmp_path / "plan.gpkg"
    assert _layout(run, FIELDS, out).exit_code == 0
    src = gpd.read_file(FIELDS)
    back = gpd.read_file(out, layer="field")
    for a, b in zip(src.geometry, back.geometry):
        assert shapely.equals_exact(shapely.normalize(a), shapely.normalize(b), tolerance=1e-9)
    # keep the metric CRS on request
    out2 = tmp_path / "metric.gpkg"
    assert _layout(run, FIELDS, out2, "--keep-metric-crs").exit_code == 0
    assert gpd.read_file(out2, layer="field").crs.to_epsg() == 32615


@pytest.mark.parametrize("fmt", ["gpkg", "shp", "zip", "fgb"])
def test_input_formats(run, tmp_path, fmt):
    src = gpd.read_file(FIELDS).to_crs(32615)
    if fmt == "gpkg":
        path = tmp_path / "in.gpkg"
        src.to_file(path, layer="boundaries", engine="pyogrio")
        src.iloc[:1].to_file(path, layer="other", engine="pyogrio")
        extra = ["--layer", "boundaries"]
    elif fmt in ("shp", "zip"):
        path = tmp_path / "in.shp"
        src.to_file(path, engine="pyogrio")
        extra = []
        if fmt == "zip":
            z = tmp_path / "in.zip"
            with zipfile.ZipFile(z, "w") as zf:
                for p in tmp_path.glob("in.*"):
                    if p.suffix != ".zip":
                        zf.write(p, p.name)
            path = z
    else:
        path = tmp_path / "in.fgb"
        src.to_file(path, driver="FlatGeobuf", engine="pyogrio")
        extra = []
    out = tmp_path / "o.gpkg"
    r = _layout(run, path, out, "--json", *extra)
    assert r.exit_code == 0, r.output
    assert len(json.loads(r.stdout)["fields"]) == 3


def test_deterministic_files(run, tmp_path):
    a, b = tmp_path / "a.gpkg", tmp_path / "b.gpkg"
    assert _layout(run, FIELDS, a, "--exclude", EXCL).exit_code == 0
    assert _layout(run, FIELDS, b, "--exclude", EXCL).exit_code == 0
    assert a.read_bytes() == b.read_bytes()


def test_refuses_overwrite(run, tmp_path):
    out = tmp_path / "o.gpkg"
    assert _layout(run, FIELDS, out).exit_code == 0
    before = out.read_bytes()
    r = _layout(run, FIELDS, out)
    assert r.exit_code == 2 and "--overwrite" in r.stderr
    assert out.read_bytes() == before
    assert _layout(run, FIELDS, out, "--overwrite").exit_code == 0


def _no_crs_file(tmp_path, degrees=True):
    src = gpd.read_file(FIELDS)
    if not degrees:
        src = src.to_crs(32615)
    path = tmp_path / "nocrs.shp"
    src.to_file(path, engine="pyogrio")
    (tmp_path / "nocrs.prj").unlink()
    return path


def _mislabelled(tmp_path):
    src = gpd.read_file(FIELDS).set_crs(32615, allow_override=True)
    path = tmp_path / "mislabelled.gpkg"
    src.to_file(path, engine="pyogrio")
    return path


def _bowtie(tmp_path):
    g = gpd.GeoDataFrame({"field_id": ["X"]}, geometry=[shapely.Polygon(
        [(0, 0), (300, 300), (300, 0), (0, 300)])], crs=32615)
    path = tmp_path / "bowtie.gpkg"
    g.to_file(path, engine="pyogrio")
    return path


def _garbage(tmp_path):
    path = tmp_path / "garbage.geojson"
    path.write_text("{ this is not json")
    return path


BAD = {
    "missing file": (lambda p: p / "nope.geojson", [], "not found", None),
    "unreadable file": (_garbage, [], "cannot read", None),
    "unknown layer": (lambda p: FIELDS, ["--layer", "roads"], "layer 'roads' not found",
                      "--layer"),
    "no crs": (lambda p: _no_crs_file(p), [], "--crs EPSG:4326", "--crs"),
    "no crs metres": (lambda p: _no_crs_file(p, degrees=False), [], "no coordinate reference",
                      "--crs"),
    "degrees mislabelled": (_mislabelled, [], "look like degrees", "--crs"),
    "self-intersecting": (_bowtie, [], "invalid boundary", None),
}


@pytest.mark.parametrize("case", list(BAD))
def test_bad_input(run, tmp_path, case):
    make, extra, text, option = BAD[case]
    out = tmp_path / "out.gpkg"
    r = _layout(run, make(tmp_path), out, *extra)
    assert r.exit_code != 0, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("drainplan: error:")
    assert text in lines[0]
    if option:
        assert option in lines[0]
    assert not out.exists()
    assert not list(tmp_path.glob(".out.gpkg*"))         # no temporary left behind
    assert "Traceback" not in r.output


def test_spacing_larger_than_field(run, tmp_path):
    out = tmp_path / "o.gpkg"
    r = run("layout", FIELDS, "--spacing", "2 km", "--direction", "0", "--setback", "0",
            "-o", out)
    assert r.exit_code == 2 and "--spacing" in r.stderr and "larger than every field" in r.stderr
    assert not out.exists()


def test_repair_reports(run, tmp_path):
    out = tmp_path / "o.gpkg"
    r = _layout(run, _bowtie(tmp_path), out, "--repair")
    assert r.exit_code == 0, r.output
    assert "repaired" in r.stderr


def test_bad_options(run, tmp_path):
    out = tmp_path / "o.gpkg"
    for args, opt in ((["--direction", "north"], "--direction"),
                      (["--outlet", "1;2"], "--outlet"),
                      (["--spacing", "3 m/d"], "--spacing")):
        r = run("layout", FIELDS, "--spacing", "18 m", "--setback", "6 m", "-o", out, *args)
        assert r.exit_code == 2 and opt in r.stderr, (args, r.stderr)
    assert not out.exists()


def test_geojson_dir_and_us_units(run, tmp_path):
    out = tmp_path / "o.gpkg"
    gj = tmp_path / "gj"
    r = run("layout", FIELDS, "--spacing", "60 ft", "--setback", "20 ft", "-o", out,
            "--geojson-dir", gj, "--units", "us")
    assert r.exit_code == 0, r.output
    assert "acre" in r.stdout and "ft" in r.stdout
    for name in ("field", "laterals", "mains", "junctions"):
        g = gpd.read_file(gj / f"{name}.geojson")
        assert g.crs.to_epsg() == 4326 and len(g) > 0
    lat = gpd.read_file(gj / "laterals.geojson")
    assert lat["spacing_m"].iloc[0] == pytest.approx(60 * 0.3048)


def test_exclusion_setback_attribute(run, tmp_path):
    ex = gpd.read_file(EXCL)
    ex["setback_m"] = ex["setback_m"].astype(object)
    ex.loc[0, "setback_m"] = "thirty"
    bad = tmp_path / "bad.gpkg"
    ex.to_file(bad, engine="pyogrio")
    r = run("layout", FIELDS, "--spacing", "18 m", "--exclude", bad, "-o", tmp_path / "o.gpkg")
    assert r.exit_code == 2 and "setback_m" in r.stderr and "thirty" in r.stderr
    ex.loc[0, "setback_m"] = None                       # missing: the default applies
    ok = tmp_path / "ok.gpkg"
    ex.to_file(ok, engine="pyogrio")
    r = run("layout", FIELDS, "--spacing", "18 m", "--exclude", ok, "--exclude-setback",
            "40 m", "-o", tmp_path / "o.gpkg", "--json")
    assert r.exit_code == 0, r.output
    layer = gpd.read_file(tmp_path / "o.gpkg", layer="exclusions")
    assert sorted(layer["setback_m"]) == [5.0, 10.0, 40.0]


def test_drawn_mains_follow_the_lines_drawn(run, tmp_path):
    """`--main`: each field's main follows the drawn lines that touch it (two drawn pieces
    in one field are joined; a line touching no field is ignored). Reference: the
    drawn lines clipped to each field with shapely, computed here line by line."""
    crs = "EPSG:32617"
    a = shapely.box(330_000, 4_650_000, 330_300, 4_650_400)
    b = shapely.box(330_350, 4_650_000, 330_650, 4_650_400)
    fields = tmp_path / "f.gpkg"
    gpd.GeoDataFrame({"name": ["A", "B"]}, geometry=[a, b], crs=crs).to_file(fields)
    drawn = [shapely.LineString([(330_010, 4_650_005), (330_290, 4_650_005)]),   # A's south edge
             shapely.LineString([(330_360, 4_650_395), (330_500, 4_650_395)]),   # B, two
             shapely.LineString([(330_500, 4_650_395), (330_640, 4_650_395)]),   # pieces
             shapely.LineString([(331_000, 4_651_000), (331_100, 4_651_000)])]   # nowhere
    mains = tmp_path / "m.gpkg"
    gpd.GeoDataFrame(geometry=drawn, crs=crs).to_file(mains)
    out = tmp_path / "plan.gpkg"
    r = run("layout", fields, "--spacing", "20 m", "--direction", "0", "--setback", "5 m",
            "--main", mains, "--keep-metric-crs", "-o", out)
    assert r.exit_code == 0, r.output
    got = gpd.read_file(out, layer="mains")
    assert len(got) == 2
    for g in got.geometry:
        ref = [ln for ln in drawn if shapely.intersects(ln, a)] if g.intersects(a) else \
            [ln for ln in drawn if shapely.intersects(ln, b)]
        ref_line = shapely.line_merge(shapely.union_all(ref))
        # the main lies on the drawn line (it may be trimmed to the laterals' reach)
        assert g.hausdorff_distance(ref_line.intersection(g.buffer(0.01))) < 0.05
        assert shapely.buffer(ref_line, 0.01).contains(g)


@pytest.mark.parametrize("fall", [0.0, 1e-5])
def test_level_survey_lays_along_the_long_axis(run, tmp_path, fall):
    """Level ground (or a fall below 0.02 %, within survey precision) gives no direction
    across the slope: the laterals run along the field's long axis, as without a survey,
    and the output says the ground is level (common practice: lay laterals across the
    slope only where there is a slope)."""
    crs = "EPSG:32617"
    field = shapely.box(330_000, 4_650_000, 330_320, 4_650_220)      # long axis east-west
    fields = tmp_path / "f.gpkg"
    gpd.GeoDataFrame({"name": ["F1"]}, geometry=[field], crs=crs).to_file(fields)
    x, y = np.meshgrid(np.linspace(329_990, 330_330, 12), np.linspace(4_649_990, 4_650_230, 9))
    z = 300.0 + fall * (x - 330_000) + 0.7 * fall * (y - 4_650_000)
    survey = tmp_path / "s.csv"
    survey.write_text("x,y,z\n" + "\n".join(f"{a:.3f},{b:.3f},{c:.6f}" for a, b, c in
                                            zip(x.ravel(), y.ravel(), z.ravel())) + "\n")
    common = ["--spacing", "15 m", "--direction", "auto", "--setback", "5 m", "--json"]
    r = run("layout", fields, *common, "--survey", survey, "--survey-crs", crs,
            "-o", tmp_path / "a.gpkg")
    assert r.exit_code == 0, r.output
    assert "ground is level" in json.dumps(json.loads(r.stdout))
    r0 = run("layout", fields, *common, "-o", tmp_path / "b.gpkg")
    a = gpd.read_file(tmp_path / "a.gpkg", layer="laterals")
    b = gpd.read_file(tmp_path / "b.gpkg", layer="laterals")
    assert len(a) == len(b)
    np.testing.assert_allclose(np.sort(a["length_m"]), np.sort(b["length_m"]), atol=1e-6)
