"""`drainplan pipes` end to end: demo, DEM, outputs, bad input."""

import csv
import json
from pathlib import Path

import geopandas as gpd
import numpy as np
import pytest

DEMO = Path(__file__).resolve().parents[1] / "demo_fields"


@pytest.fixture(scope="module")
def layout_gpkg(tmp_path_factory):
    from click.testing import CliRunner

    from drainplan.cli import cli

    out = tmp_path_factory.mktemp("lay") / "layout.gpkg"
    r = CliRunner().invoke(cli, ["layout", str(DEMO / "fields.geojson"), "--spacing", "18 m",
                                 "--direction", "auto", "--setback", "6 m", "--exclude",
                                 str(DEMO / "exclusions.geojson"), "--outlet",
                                 str(DEMO / "outlet.geojson"), "-o", str(out)])
    assert r.exit_code == 0, r.output
    return out


def _pipes(run, layout, out, *extra):
    return run("pipes", layout, "--coefficient", "10 mm/d", "-o", out, *extra)


SURVEY = ["--survey", str(DEMO / "survey.csv"), "--survey-crs", "EPSG:4326"]


def test_demo_schedule(run, layout_gpkg, tmp_path):
    out = tmp_path / "schedule.csv"
    gp = tmp_path / "pipes.gpkg"
    png = tmp_path / "profile.png"
    r = _pipes(run, layout_gpkg, out, *SURVEY, "--gpkg", gp, "--plot", png, "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    rows = list(csv.DictReader(out.open()))
    assert len(rows) == len(data["reaches"])
    assert {"reach_id", "flow_l_s", "grade", "size", "capacity_l_s", "velocity_m_s",
            "capacity_used_pct", "invert_up_m", "invert_down_m", "cover_min_m",
            "warnings"} <= set(rows[0])
    lat = [r for r in data["reaches"] if r["kind"] == "lateral"]
    # mass balance at the outlet: coefficient x total drained area
    area = sum(r["drained_area_ha"] for r in lat)
    assert data["totals"]["outlet_flow_l_s"] == pytest.approx(0.010 * area * 1e4 / 86400 * 1e3)
    for fid in {r["field_id"] for r in lat}:
        mn = [r for r in data["reaches"] if r["kind"] == "main" and r["field_id"] == fid]
        fa = sum(r["drained_area_ha"] for r in lat if r["field_id"] == fid)
        last_in = sum(r["flow_l_s"] for r in lat if r["field_id"] == fid)
        assert mn[-1]["drained_area_ha"] + max(
            r["drained_area_ha"] for r in lat if r["field_id"] == fid) >= fa - 1e-9
        assert last_in == pytest.approx(0.010 * fa * 1e4 / 86400 * 1e3)
    # every reach carries its flow within the design capacity
    for r in data["reaches"]:
        assert r["capacity_l_s"] >= r["flow_l_s"]
    # layers with attributes, profile picture
    lp = gpd.read_file(gp, layer="lateral_pipes")
    assert {"size", "grade", "flow_l_s"} <= set(lp.columns)
    assert png.stat().st_size > 10_000
    kinds = {t["kind"] for t in data["takeoff"]}
    assert {"lateral", "main", "fitting", "outlet"} <= kinds


def test_dem_in_another_crs(run, layout_gpkg, tmp_path):
    rasterio = pytest.importorskip("rasterio")
    from rasterio.transform import from_origin

    # a DEM in Web Mercator over the demo farm: a plane falling to the south-west
    fld = gpd.read_file(layout_gpkg, layer="field").to_crs(3857)
    x0, y0, x1, y1 = fld.total_bounds
    res = 5.0
    cols, rows = int((x1 - x0) / res) + 40, int((y1 - y0) / res) + 40
    ox, oy = x0 - 100, y1 + 100
    X, Y = np.meshgrid(ox + res * (np.arange(cols) + 0.5), oy - res * (np.arange(rows) + 0.5))
    Z = (300 + 0.004 * (X - ox) + 0.004 * (Y - (oy - rows * res))).astype("float32")
    dem = tmp_path / "dem.tif"
    with rasterio.open(dem, "w", driver="GTiff", width=cols, height=rows, count=1,
                       dtype="float32", crs="EPSG:3857",
                       transform=from_origin(ox, oy, res, res)) as ds:
        ds.write(Z, 1)
    out = tmp_path / "s.csv"
    r = _pipes(run, layout_gpkg, out, "--dem", dem, "--json")
    assert r.exit_code == 0, r.output
    grades = [x["grade"] for x in json.loads(r.stdout)["reaches"]]
    assert min(grades) >= 0.001 - 1e-9


def _write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text)
    return p


def _survey_far(tmp_path):
    return _write(tmp_path, "far.csv", "x,y,z\n0,0,1\n10,0,1\n0,10,1\n10,10,2\n")


def _survey_missing_z(tmp_path):
    return _write(tmp_path, "noz.csv", "lon,lat,z\n-94.45,42.72,300\n-94.44,42.72,\n"
                                       "-94.44,42.73,301\n")


def _small_sizes(tmp_path):
    return _write(tmp_path, "sizes.csv", "series,material,nominal,inner_diameter_mm,source\n"
                                         "metric,corrugated,50 mm,44,test\n")


BAD = {
    "survey not covering": (lambda p: ["--survey", _survey_far(p)], "do not cover", 2),
    "missing z": (lambda p: ["--survey", _survey_missing_z(p), "--survey-crs", "EPSG:4326"],
                  "has no z", 2),
    "negative coefficient": (lambda p: ["--coefficient", "-3 mm/d"], "coefficient", 2),
    "missing survey file": (lambda p: ["--survey", p / "none.csv"], "not found", 2),
    "survey and dem": (lambda p: ["--survey", _survey_far(p), "--dem", p / "x.tif"],
                       "not both", 2),
}


def test_reach_beyond_the_size_table_does_not_stop_the_run(run, layout_gpkg, tmp_path):
    # one table of a single 50 mm size: most reaches need more; the run finishes, marks
    # each such reach with the fix, and sizes the rest
    out = tmp_path / "schedule.csv"
    r = _pipes(run, layout_gpkg, out, "--sizes", _small_sizes(tmp_path), "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    big = [x for x in data["reaches"] if x["size"].startswith("larger than")]
    ok = [x for x in data["reaches"] if x["size"] == "50 mm"]
    assert big and ok
    assert all(x["capacity_l_s"] >= x["flow_l_s"] for x in ok)
    fixes = [v for v in data["violations"] if v["kind"] == "too large"]
    assert len(fixes) == len(big)
    assert all("parallel" in v["fix"] and "second outlet" in v["fix"] for v in fixes)
    assert any("beyond the largest pipe" in p for p in data["problems"])
    rows = list(csv.DictReader(out.open()))
    assert sum(row["size"].startswith("larger than") for row in rows) == len(big)


@pytest.mark.parametrize("case", list(BAD))
def test_bad_input(run, layout_gpkg, tmp_path, case):
    make, text, code = BAD[case]
    out = tmp_path / "schedule.csv"
    r = _pipes(run, layout_gpkg, out, *make(tmp_path))
    assert r.exit_code == code, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and text in lines[0]
    assert not out.exists() and not list(tmp_path.glob(".schedule.csv*"))


def test_missing_layout(run, tmp_path):
    r = run("pipes", tmp_path / "none.gpkg", "--coefficient", "10 mm/d", "-o", tmp_path / "s.csv")
    assert r.exit_code == 2 and "layout file not found" in r.stderr


def test_without_elevations_notes(run, layout_gpkg, tmp_path):
    r = _pipes(run, layout_gpkg, tmp_path / "s.csv")
    assert r.exit_code == 0
    assert "no elevations" in r.stdout
