"""`drainplan batch`: per-field soil from a soil map, spacing, layout quantities,
engines, resume.

The reference for every spacing is the `drainplan spacing` command run on the
field's own soil values; the soil values come from an area weighting written
here independently with shapely (intersection areas), following the weighting
the issue asks for: geometric mean of K and arithmetic mean of the barrier
depth, each weighted by the area of the field inside each soil polygon.
"""

import json
import math
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import shapely

gpd = pytest.importorskip("geopandas")
from geopandas.testing import assert_geodataframe_equal  # noqa: E402

CRS = "EPSG:32615"
X0, Y0 = 500_000.0, 4_500_000.0     # an invented place in UTM 15N

PROJECT = """\
# invented criteria for the batch tests
[criteria]
method = "hooghoudt"
recharge = "7 mm/d"
water_table_depth = "0.5 m"

[drains]
depth = "1.2 m"
radius = "0.1 m"
spacing_increment = "1 m"

[layout]
setback = "6 m"

[pipes]
coefficient = "10 mm/d"
"""

# soil map: west unit (K 0.3 m/d, barrier 3 m), east unit (K 1.2 m/d, barrier 5 m),
# boundary at x = 1000 m; nothing north of y = 2000 m
SOIL = [
    (shapely.box(0, 0, 1000, 2000), 0.3, 3.0, 0.05),
    (shapely.box(1000, 0, 2000, 2000), 1.2, 5.0, 0.08),
]


def box(x0, y0, x1, y1):
    return shapely.box(X0 + x0, Y0 + y0, X0 + x1, Y0 + y1)


def shifted(g):
    return shapely.transform(g, lambda c: c + [X0, Y0])


FIELDS = {
    "W1": box(100, 100, 450, 400),            # inside the west unit
    "E1": box(1300, 100, 1700, 380),          # inside the east unit
    "X1": box(800, 600, 1150, 900),           # across the boundary, 200 m west / 150 m east
    "X2": shapely.Polygon([(X0 + 700, Y0 + 1100), (X0 + 1300, Y0 + 1150),
                           (X0 + 1250, Y0 + 1500), (X0 + 750, Y0 + 1450)]),  # irregular
    "OUT": box(300, 2300, 700, 2600),         # north of the soil map
    "N1": box(100, 1700, 115, 1950),          # 15 m wide: narrower than its spacing
}


def write_inputs(folder, fields=FIELDS, soil=SOIL, project=PROJECT):
    folder.mkdir(exist_ok=True)
    gpd.GeoDataFrame({"field_id": list(fields)}, geometry=list(fields.values()),
                     crs=CRS).to_file(folder / "fields.gpkg")
    gpd.GeoDataFrame({"k": [s[1] for s in soil], "barrier_depth": [s[2] for s in soil],
                      "drainable_porosity": [s[3] for s in soil]},
                     geometry=[shifted(s[0]) for s in soil], crs=CRS).to_file(
        folder / "soil.gpkg")
    (folder / "project.toml").write_text(project)
    return folder


def weighted_soil(field):
    """Independent area weighting: shapely intersection areas with each soil polygon."""
    areas = np.array([shapely.intersection(field, shifted(s[0])).area for s in SOIL])
    k = np.array([s[1] for s in SOIL])
    zb = np.array([s[2] for s in SOIL])
    w = areas / areas.sum()
    return math.exp(float(np.sum(w * np.log(k)))), float(np.sum(w * zb)), \
        float(areas.sum() / field.area)


def read_fields(path):
    return gpd.read_file(path, layer="fields").set_index("field_id")


@pytest.fixture
def inputs(tmp_path):
    return write_inputs(tmp_path / "in")


def batch_args(d, out, *extra):
    return ["batch", d / "fields.gpkg", "--soil", d / "soil.gpkg", "--project",
            d / "project.toml", "-o", out, *extra]


def test_spacing_equals_the_spacing_command_for_each_fields_soil(run, inputs, tmp_path):
    out = tmp_path / "b.gpkg"
    r = run(*batch_args(inputs, out, "--workers", "1"))
    assert r.exit_code == 0, r.output
    got = read_fields(out)
    for fid in ("W1", "E1", "X1", "X2"):
        k, zb, cover = weighted_soil(FIELDS[fid])
        assert got.loc[fid, "soil_k_m_d"] == pytest.approx(k, rel=1e-4)
        assert got.loc[fid, "soil_barrier_depth_m"] == pytest.approx(zb, rel=1e-4)
        assert got.loc[fid, "soil_cover"] == pytest.approx(cover, abs=1e-4)
        ref = run("spacing", "--method", "hooghoudt", "--k", repr(k), "--drain-depth", "1.2",
                  "--barrier-depth", repr(zb), "--drain-radius", "0.1", "--recharge",
                  "7 mm/d", "--water-table-depth", "0.5", "--json")
        assert ref.exit_code == 0, ref.output
        want = json.loads(ref.stdout)["spacing_m"]
        # the layer keeps 4 decimals of a metre
        assert got.loc[fid, "spacing_calc_m"] == pytest.approx(want, abs=6e-5)
        assert got.loc[fid, "spacing_m"] == math.floor(want)       # 1 m increment
        assert got.loc[fid, "status"] == "designed"
        assert got.loc[fid, "laterals"] > 0
    # fields across two units lie between the two units' spacings
    s = got["spacing_calc_m"]
    assert s["W1"] < s["X1"] < s["E1"] and s["W1"] < s["X2"] < s["E1"]


def test_layout_quantities_match_the_layout_command(run, inputs, tmp_path):
    """A field's laterals and lengths equal `drainplan layout` at the field's spacing."""
    out = tmp_path / "b.gpkg"
    assert run(*batch_args(inputs, out, "--workers", "1")).exit_code == 0
    got = read_fields(out)
    one = tmp_path / "x1.geojson"
    gpd.GeoDataFrame({"field_id": ["X1"]}, geometry=[FIELDS["X1"]], crs=CRS).to_file(one)
    lay = tmp_path / "x1.gpkg"
    r = run("layout", one, "--spacing", got.loc["X1", "spacing_m"], "--setback", "6 m",
            "-o", lay)
    assert r.exit_code == 0, r.output
    ref = gpd.read_file(lay, layer="field").iloc[0]
    assert got.loc["X1", "laterals"] == ref["laterals"]
    assert got.loc["X1", "lateral_length_m"] == pytest.approx(ref["lateral_length_m"],
                                                              abs=0.01)
    assert got.loc["X1", "main_length_m"] == pytest.approx(ref["main_length_m"], abs=0.01)
    # outlet flow = drainage coefficient x lateral length x spacing (Q = q A)
    q = 0.010 * got.loc["X1", "lateral_length_m"] * got.loc["X1", "spacing_m"] / 86400.0
    assert got.loc["X1", "outlet_flow_l_s"] == pytest.approx(q * 1000, rel=1e-3)
    sizes = [c for c in got.columns if c.startswith("lateral_") and c.endswith("mm_m")]
    assert got.loc["X1", sizes].sum() == pytest.approx(got.loc["X1", "lateral_length_m"],
                                                       abs=0.05)
    mains = [c for c in got.columns if c.startswith("main_") and c.endswith("mm_m")]
    assert got.loc["X1", mains].sum() == pytest.approx(got.loc["X1", "main_length_m"],
                                                       abs=0.05)


def test_fields_outside_the_soil_map_are_reported_not_guessed(run, inputs, tmp_path):
    out = tmp_path / "b.gpkg"
    r = run(*batch_args(inputs, out, "--workers", "1", "--json"))
    assert r.exit_code == 0, r.output
    got = read_fields(out)
    assert got.loc["OUT", "status"] == "not designed"
    assert "not covered by the soil map" in got.loc["OUT", "warnings"]
    assert np.isnan(got.loc["OUT", "spacing_m"]) and np.isnan(got.loc["OUT", "soil_k_m_d"])
    summary = {row["item"]: row["value"] for row in json.loads(r.stdout)["summary"]}
    assert summary["fields not covered by the soil map"] == 1
    assert summary["fields designed"] == 5
    csv = (tmp_path / "b_summary.csv").read_text()
    assert "fields not covered by the soil map,1," in csv


def test_soil_values_out_of_range_are_reported(run, tmp_path):
    soil = [(shapely.box(0, 0, 1000, 2000), 250.0, 3.0, 0.05),     # cm/d typed as m/d?
            (shapely.box(1000, 0, 2000, 1000), -1.0, 5.0, 0.08),   # a no-data code
            (shapely.box(1000, 1000, 2000, 2000), 1.0, 4.0, 0.05)]
    d = write_inputs(tmp_path / "in", soil=soil)
    out = tmp_path / "b.gpkg"
    r = run(*batch_args(d, out, "--workers", "1"))
    assert r.exit_code == 0, r.output
    got = read_fields(out)
    assert "outside the plausible" in got.loc["W1", "warnings"]
    assert "K of zero or less" in got.loc["E1", "warnings"]
    assert (got.loc[["W1", "E1"], "status"] == "not designed").all()
    assert got.loc["X2", "status"] != "designed" or got.loc["X2", "warnings"] == ""


def test_soil_units_from_column_names_and_option(run, tmp_path):
    """K in in/h in the fields' own attributes: 1 in/h = 0.6096 m/d (1 in = 0.0254 m)."""
    d = tmp_path / "in"
    d.mkdir()
    gpd.GeoDataFrame({"field_id": ["A", "B"], "ksat_in_h": [0.5, 0.5],
                      "barrier_ft": [10.0, 10.0]},
                     geometry=[FIELDS["W1"], FIELDS["E1"]], crs=CRS).to_file(
        d / "fields.gpkg")
    (d / "project.toml").write_text(PROJECT)
    out = tmp_path / "b.gpkg"
    r = run("batch", d / "fields.gpkg", "--project", d / "project.toml", "-o", out,
            "--soil-k-column", "ksat_in_h", "--soil-barrier-column", "barrier_ft",
            "--workers", "1")
    assert r.exit_code == 0, r.output
    got = read_fields(out)
    assert got.loc["A", "soil_k_m_d"] == pytest.approx(0.3048, rel=1e-6)
    assert got.loc["A", "soil_barrier_depth_m"] == pytest.approx(3.048, rel=1e-6)
    # the same numbers given with --soil-units
    gpd.GeoDataFrame({"field_id": ["A"], "k": [0.5], "zb": [10.0]},
                     geometry=[FIELDS["W1"]], crs=CRS).to_file(d / "f2.gpkg")
    out2 = tmp_path / "c.gpkg"
    r = run("batch", d / "f2.gpkg", "--project", d / "project.toml", "-o", out2,
            "--soil-k-column", "k", "--soil-barrier-column", "zb", "--soil-units",
            "k=in/h,barrier=ft", "--workers", "1")
    assert r.exit_code == 0, r.output
    assert read_fields(out2).loc["A", "spacing_calc_m"] == got.loc["A", "spacing_calc_m"]


def test_bad_options_name_the_option(run, inputs, tmp_path):
    r = run(*batch_args(inputs, tmp_path / "b.gpkg", "--soil-k-column", "ksat"))
    assert r.exit_code == 2 and "--soil-k-column" in r.output and "ksat" in r.output
    r = run(*batch_args(inputs, tmp_path / "b.gpkg", "--soil-units", "k"))
    assert r.exit_code == 2 and "--soil-units" in r.output
    r = run(*batch_args(inputs, tmp_path / "b.gpkg", "--workers", "0"))
    assert r.exit_code == 2 and "--workers" in r.output


def test_empty_input_gives_an_empty_layer(run, tmp_path):
    d = write_inputs(tmp_path / "in")
    gpd.GeoDataFrame({"field_id": []}, geometry=gpd.GeoSeries([], crs=CRS)).to_file(
        d / "fields.gpkg")
    out = tmp_path / "b.gpkg"
    r = run(*batch_args(d, out, "--json"))
    assert r.exit_code == 0, r.output
    assert len(gpd.read_file(out, layer="fields")) == 0
    summary = {row["item"]: row["value"] for row in json.loads(r.stdout)["summary"]}
    assert summary["fields"] == 0


def _frame(path):
    return gpd.read_file(path, layer="fields")


def test_same_results_with_one_and_two_workers(run, inputs, tmp_path):
    a, b = tmp_path / "a.gpkg", tmp_path / "b.gpkg"
    assert run(*batch_args(inputs, a, "--workers", "1", "--partition-size", "1")).exit_code == 0
    # all fields in one partition on two workers: the narrow field N1 shares its layout
    # call with W1 (same spacing) instead of having one of its own
    r = run(*batch_args(inputs, b, "--workers", "2", "--with-lines"))
    assert r.exit_code == 0, r.output
    fa, fb = _frame(a), _frame(b)
    assert list(fa["field_id"]) == list(FIELDS)                  # input order
    assert_geodataframe_equal(fa, fb)
    lat = gpd.read_file(b, layer="laterals")
    assert lat.groupby("field_id")["length_m"].sum().round(1).to_dict() == \
        fb.set_index("field_id")["lateral_length_m"][lambda s: s > 0].round(1).to_dict()


def test_same_results_on_a_local_dask_cluster(run, inputs, tmp_path):
    distributed = pytest.importorskip("distributed")
    a, b = tmp_path / "a.gpkg", tmp_path / "b.gpkg"
    assert run(*batch_args(inputs, a, "--workers", "1")).exit_code == 0
    with distributed.LocalCluster(host="127.0.0.1", n_workers=1, threads_per_worker=2,
                                  processes=False, protocol="tcp://",
                                  dashboard_address=None) as cluster:
        r = run(*batch_args(inputs, b, "--scheduler", cluster.scheduler_address,
                            "--partition-size", "2"))
    assert r.exit_code == 0, r.output
    assert_geodataframe_equal(_frame(a), _frame(b))
    assert a.read_bytes() == b.read_bytes()


def test_unreachable_scheduler_is_one_line(run, inputs, tmp_path, monkeypatch):
    pytest.importorskip("distributed")
    monkeypatch.setattr("drainplan.engines.CONNECT_TIMEOUT", "1s")
    r = run(*batch_args(inputs, tmp_path / "b.gpkg", "--scheduler", "tcp://127.0.0.1:9"))
    assert r.exit_code == 2 and "--scheduler" in r.output


def test_kill_in_the_middle_then_resume(tmp_path):
    """SIGKILL a run after a few partitions: no GeoPackage is left; --resume finishes it
    without redoing them, and the result equals an uninterrupted run."""
    rng = np.random.default_rng(3)
    fields = {f"F{i:03d}": box(x, y, x + 150 + 40 * rng.random(), y + 120)
              for i, (x, y) in enumerate((x, y) for x in range(0, 1200, 200)
                                         for y in range(0, 1000, 200))}
    d = write_inputs(tmp_path / "in", fields=fields)
    out = tmp_path / "b.gpkg"
    parts = tmp_path / ".b.gpkg.parts"

    def command(target):
        return [sys.executable, "-m", "drainplan", "-q", *map(str, batch_args(
            d, target, "--workers", "1", "--partition-size", "1"))]

    cmd = command(out)
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    t0 = time.time()
    while len(list(parts.glob("part-*.pkl"))) < 3:
        assert proc.poll() is None, proc.stderr.read().decode()
        assert time.time() - t0 < 120
        time.sleep(0.01)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    assert not out.exists()                       # nothing that looks complete
    kept = len(list(parts.glob("part-*.pkl")))
    assert 3 <= kept < len(fields)
    again = subprocess.run(cmd, capture_output=True, text=True)
    assert again.returncode == 2 and "--resume" in again.stderr
    resumed = subprocess.run(cmd + ["--resume", "--json"], capture_output=True, text=True)
    assert resumed.returncode == 0, resumed.stderr
    assert json.loads(resumed.stdout)["resumed_partitions"] >= kept
    assert not parts.exists()
    whole = tmp_path / "whole.gpkg"
    subprocess.run(command(whole), check=True, capture_output=True)
    assert_geodataframe_equal(_frame(out), _frame(whole))
    assert Path(out).read_bytes() == whole.read_bytes()


def test_project_soil_gives_the_design_commands_spacing(run, tmp_path):
    """Without a soil map every field takes the project's [soil]; the demo farm's
    two-layer soil, steady and falling criteria and three drain depths give the depth
    and spacing that `drainplan design` chooses for the same project."""
    from drainplan.design import design
    from drainplan.project import load_project

    root = Path(__file__).resolve().parents[1] / "demo_fields"
    out = tmp_path / "b.gpkg"
    r = run("batch", root / "fields.geojson", "--project", root / "project.toml", "-o", out,
            "--workers", "1")
    assert r.exit_code == 0, r.output
    got = read_fields(out)
    want = design(load_project(root / "project.toml")).summary["design"]
    assert (got["status"] == "designed").all()
    assert (got["drain_depth_m"] == want["drain_depth_m"]).all()
    assert (got["spacing_m"] == want["spacing_m"]).all()
    assert np.allclose(got["spacing_calc_m"], want["spacing_before_rounding_m"], atol=1e-3)
    assert (got["governing"] == want["governing_criterion"]).all()


def test_resume_refuses_other_inputs(run, inputs, tmp_path):
    out = tmp_path / "b.gpkg"
    parts = tmp_path / ".b.gpkg.parts"
    parts.mkdir()
    (parts / "manifest.json").write_text('{"fingerprint": "another run"}')
    r = run(*batch_args(inputs, out, "--resume", "--workers", "1"))
    assert r.exit_code == 2 and "--overwrite" in r.output
    r = run(*batch_args(inputs, out, "--workers", "1"))
    assert r.exit_code == 2 and "--resume" in r.output
    r = run(*batch_args(inputs, out, "--workers", "1", "--overwrite"))
    assert r.exit_code == 0 and not parts.exists()


def test_progress_on_stderr_and_quiet(inputs, tmp_path):
    from click.testing import CliRunner

    from drainplan.cli import cli

    runner = CliRunner()
    r = runner.invoke(cli, [str(a) for a in batch_args(
        inputs, tmp_path / "a.gpkg", "--workers", "1", "--partition-size", "2")])
    assert r.exit_code == 0, r.output
    n = len(FIELDS)
    assert f"fields {n} / {n} (100 %)" in r.stderr and "fields/s" in r.stderr
    assert "fields/s" not in r.stdout
    r = runner.invoke(cli, ["-q", *[str(a) for a in batch_args(
        inputs, tmp_path / "b.gpkg", "--workers", "1")]])
    assert r.exit_code == 0 and r.stderr == ""
