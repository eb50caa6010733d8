"""drainplan check: a contractor's proposal against the project's criteria.

Every field, project and proposal here is invented for the tests.
"""

import json
import math

import numpy as np
import pytest
import shapely

gpd = pytest.importorskip("geopandas")

X0, Y0 = 500000.0, 4700000.0          # UTM 15N, an invented place
CRS = "EPSG:32615"


def _project(tmp_path, *, falling=False, coefficient="12.7 mm/d", outlet=False, well=None,
             ground=None):
    field = shapely.box(X0, Y0, X0 + 300, Y0 + 200)
    gpd.GeoDataFrame({"field_id": ["T1"]}, geometry=[field], crs=CRS).to_file(
        tmp_path / "fields.gpkg", driver="GPKG")
    if well is not None:
        gpd.GeoDataFrame({"kind": ["well"], "setback_m": [30.0]},
                         geometry=[shapely.Point(X0 + well[0], Y0 + well[1])], crs=CRS).to_file(
            tmp_path / "exclusions.gpkg", driver="GPKG")
    if ground is not None:           # a flat surveyed ground at elevation `ground`
        gx, gy = np.meshgrid(np.linspace(X0 - 20, X0 + 320, 8), np.linspace(Y0 - 20, Y0 + 220, 6))
        rows = ["x,y,z"] + [f"{a},{b},{ground}" for a, b in zip(gx.ravel(), gy.ravel())]
        (tmp_path / "survey.csv").write_text("\n".join(rows) + "\n")
    text = f"""
[site]
name = "Invented test field"

[fields]
file = "fields.gpkg"
{'exclusions = "exclusions.gpkg"' if well is not None else ''}
{'outlet = [%r, %r]' % (X0 - 5, Y0 + 2) if outlet else ''}

[soil]
k = "0.6 m/d"
barrier_depth = "3.0 m"
drainable_porosity = 0.05

[criteria]
method = "hooghoudt"
recharge = "7 mm/d"
water_table_depth = "0.5 m"
{'initial_depth = "0.1 m"' if falling else ''}
{'final_depth = "0.4 m"' if falling else ''}
{'days = 2' if falling else ''}

[drains]
depth = "1.0 m"
radius = "sock-4in"

[layout]
setback = "5 m"
direction = 0

[pipes]
coefficient = "{coefficient}"
material = "corrugated"
series = "inch"
{'survey = "survey.csv"' if ground is not None else ''}
{'survey_crs = "EPSG:32615"' if ground is not None else ''}
"""
    (tmp_path / "project.toml").write_text(text)
    return tmp_path / "project.toml"


def _allowed():
    """Widest spacing of the invented project by drainplan's own Hooghoudt (tested against
    published values in test_hooghoudt.py)."""
    from drainplan.spacing import drain_spacing, effective_radius

    r = drain_spacing(method="hooghoudt", drain_depth=1.0, barrier_depth=3.0,
                      drain_radius=effective_radius("sock-4in"), k=0.6, recharge=0.007,
                      water_table_depth=0.5)
    return float(r.spacing)


def _lines_file(tmp_path, xs, *, lateral_size=None, main_size=None, name="proposal.gpkg"):
    geoms = [shapely.LineString([(X0 + x, Y0 + 195), (X0 + x, Y0 + 3)]) for x in xs]
    kinds = ["lateral"] * len(xs)
    sizes = [lateral_size] * len(xs)
    if main_size is not None:
        geoms.append(shapely.LineString([(X0 + 300, Y0 + 2), (X0, Y0 + 2)]))   # drawn to outlet
        kinds.append("main")
        sizes.append(main_size)
    gpd.GeoDataFrame({"kind": kinds, "size": sizes, "colour": ["red"] * len(kinds)},
                     geometry=geoms, crs=CRS).to_file(tmp_path / name, driver="GPKG")
    return tmp_path / name


def test_two_spacings_fail_on_the_wide_half(run, tmp_path):
    allowed = _allowed()
    narrow, wide = 0.8 * allowed, 1.25 * allowed
    xs = list(np.arange(narrow / 2, 150.0 + 1e-6, narrow))
    last = xs[-1]
    xs += list(np.arange(last + wide, 300.0 - wide / 2 + 1e-6, wide))
    proj = _project(tmp_path)
    prop = _lines_file(tmp_path, xs)
    r = run("check", proj, "--proposal", prop, "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert out["verdict"] == "fails"
    lats = sorted(out["laterals"], key=lambda x: x["x"])
    assert len(lats) == len(xs)
    # each lateral's local spacing is the drawn one (the lateral between the halves takes
    # the wider of its two sides; edge laterals take their one neighbour's)
    for x, lat in zip(xs, lats):
        expect = narrow if x < last - 1e-6 else wide
        assert lat["local_spacing_m"] == pytest.approx(expect, abs=0.01)
        assert lat["meets"] == (x < last - 1e-6)
    # the drained area: half a spacing on each side of every lateral (edges mirrored)
    west = last - (xs[0] - narrow / 2)          # narrow half strips reach the lateral `last`
    total = (xs[-1] + wide / 2) - (xs[0] - narrow / 2)
    assert out["area_meeting_pct"] == pytest.approx(100 * west / total, abs=0.5)
    steady = next(c for c in out["criteria"] if c["name"] == "steady")
    assert not steady["meets"]
    assert steady["required"] == pytest.approx(allowed, rel=1e-3)
    assert steady["margin_pct"] == pytest.approx(100 * (allowed - wide) / allowed, abs=0.1)
    text = run("check", proj, "--proposal", prop).stdout
    assert "FAILS" in text and "% over" in text


def _manning(d, s, n=0.015):
    """Manning's full-pipe flow, written out: Q = (1/n) A R^(2/3) S^(1/2), A = pi d^2/4,
    R = d/4 (Manning 1891; the form in USDA-NRCS NEH-650 ch. 14). n = 0.015 for
    corrugated plastic tubing 3-8 in, as recalled from NEH-650 ch. 14 (memory)."""
    A = math.pi * d * d / 4
    return A * (d / 4) ** (2 / 3) * math.sqrt(s) / n


def test_main_one_size_too_small_fails_with_the_right_margin(run, tmp_path):
    # 15 laterals 20 m apart over 300 m x 192 m: 5.76 ha drained; 12.7 mm/d on it needs
    # 8.47 L/s at the outlet; 8 in carries it at 0.2 %, 6 in (one size smaller) does not
    xs = list(np.arange(10.0, 300.0, 20.0))
    proj = _project(tmp_path, coefficient="12.7 mm/d")
    flow = 0.0127 * 300 * 192 / 86400                     # m3/s, Q = DC x A
    for size, d_m, meets in (("6 in", 0.1524, False), ("8 in", 0.2032, True)):
        _lines_file(tmp_path, xs, lateral_size="4 in", main_size=size, name=f"p{size[0]}.gpkg")
        (tmp_path / f"p{size[0]}.toml").write_text(
            f'[proposal]\nlines = "p{size[0]}.gpkg"\ngrade = "0.2 %"\n')
        r = run("check", proj, "--proposal", tmp_path / f"p{size[0]}.toml", "--json")
        assert r.exit_code == 0, r.output
        out = json.loads(r.stdout)
        main = next(c for c in out["criteria"] if c["name"] == "main capacity")
        cap = 0.75 * _manning(d_m, 0.002)                  # 75 % usable (project default)
        assert main["meets"] is meets
        assert main["required"] == pytest.approx(flow * 1000, rel=0.01)
        assert main["proposed"] == pytest.approx(cap * 1000, rel=1e-3)
        assert main["margin_pct"] == pytest.approx(100 * (cap - flow) / flow, abs=1.0)
        assert out["verdict"] == ("meets" if meets else "fails")
        if not meets:
            assert all("main downstream" in x["fails"] for x in out["laterals"])
            assert out["area_meeting_pct"] == 0


def test_design_built_proposal_meets_every_criterion(tmp_path):
    """A proposal drawn from drainplan's own design meets every criterion of its project."""
    from drainplan.check import check_proposal, read_proposal
    from drainplan.design import design
    from drainplan.project import load_project

    proj = load_project(_project(tmp_path, falling=True, outlet=True))
    res = design(proj)
    lp, pp = res.layout_plan, res.pipes_plan
    lat = lp.layers["laterals"]
    sizes = {r["reach_id"]: r["size"] for r in pp.design.reaches if r["kind"] == "lateral"}
    main_size = max((r for r in pp.design.reaches if r["kind"] == "main"),
                    key=lambda r: r["flow_l_s"])["size"]
    base = lat["lateral_id"].str.replace(r"\.\d+$", "", regex=True)
    mains = lp.layers["mains"]
    gdf = gpd.GeoDataFrame(
        {"kind": ["lateral"] * len(lat) + ["main"] * len(mains),
         "size": [sizes[b] for b in base] + [main_size] * len(mains),
         "depth": [res.summary["design"]["drain_depth_m"]] * (len(lat) + len(mains))},
        geometry=list(lat.geometry) + list(mains.geometry), crs=lat.crs)
    gdf.to_file(tmp_path / "built.gpkg", driver="GPKG")
    out = check_proposal(proj, read_proposal(tmp_path / "built.gpkg")).summary
    assert out["verdict"] == "meets", [c["text"] for c in out["criteria"] if not c["meets"]]
    names = {c["name"] for c in out["criteria"]}
    assert {"steady", "falling", "lateral capacity", "main capacity"} <= names
    assert all(c["meets"] for c in out["criteria"])
    assert out["area_meeting_pct"] == pytest.approx(100.0)
    spacing = res.summary["design"]["spacing_m"]
    inner = [x for x in out["laterals"] if not x["edge"]]
    assert inner and all(x["local_spacing_m"] == pytest.approx(spacing, abs=0.01)
                         for x in inner)


def test_numbers_proposal(run, tmp_path):
    allowed = _allowed()
    proj = _project(tmp_path)
    (tmp_path / "n.toml").write_text(
        f'[proposal]\nlateral_spacing = "{math.floor(allowed) - 1} m"\ndepth = "1.0 m"\n'
        'lateral_size = "4 in"\nmain_size = "8 in"\ngrade = "0.2 %"\nenvelope = "sock-4in"\n')
    out = json.loads(run("check", proj, "--proposal", tmp_path / "n.toml", "--json").stdout)
    steady = next(c for c in out["criteria"] if c["name"] == "steady")
    assert steady["meets"]
    assert steady["margin_pct"] == pytest.approx(
        100 * (allowed - (math.floor(allowed) - 1)) / allowed, abs=0.1)
    for key in ("verdict", "area_meeting_pct", "criteria", "laterals"):
        assert key in out
    for c in out["criteria"]:
        assert set(c) >= {"name", "required", "proposed", "margin_pct", "meets"}
    assert all(set(x) >= {"lateral_id", "local_spacing_m", "meets"} for x in out["laterals"])


@pytest.mark.parametrize("case, match", [
    ("points", "holds no lines"),
    ("outside", "lies in a field"),
    ("size", "is not a corrugated pipe size"),
    ("toml_key", "unknown key proposal.spacing"),
    ("kind", "kind 'ditch' is unknown"),
])
def test_bad_proposals(run, tmp_path, case, match):
    proj = _project(tmp_path)
    if case == "points":
        gpd.GeoDataFrame({"a": [1]}, geometry=[shapely.Point(X0 + 5, Y0 + 5)], crs=CRS).to_file(
            tmp_path / "bad.gpkg", driver="GPKG")
        bad = tmp_path / "bad.gpkg"
    elif case == "outside":
        gpd.GeoDataFrame({"a": [1]}, geometry=[shapely.LineString(
            [(X0 + 5000, Y0), (X0 + 5000, Y0 + 100)])], crs=CRS).to_file(
            tmp_path / "bad.gpkg", driver="GPKG")
        bad = tmp_path / "bad.gpkg"
    elif case == "size":
        bad = _lines_file(tmp_path, [10.0, 30.0], lateral_size="7 in")
    elif case == "kind":
        gpd.GeoDataFrame({"kind": ["ditch"]}, geometry=[shapely.LineString(
            [(X0 + 5, Y0 + 5), (X0 + 5, Y0 + 100)])], crs=CRS).to_file(
            tmp_path / "bad.gpkg", driver="GPKG")
        bad = tmp_path / "bad.gpkg"
    else:
        bad = tmp_path / "bad.toml"
        bad.write_text('[proposal]\nspacing = "20 m"\n')
    r = run("check", proj, "--proposal", bad)
    assert r.exit_code == 2, r.output
    assert match in r.stderr and r.stderr.count("\n") == 1 and "Traceback" not in r.stderr


# ---- spacing --check-spacing: margin, ponding, physical range (issues 9 and 14)

SITE = ["spacing", "--k", "0.14", "--drain-depth", "1.2", "--barrier-depth", "6.0",
        "--drain-radius", "0.1", "--recharge", "1 mm/d", "--water-table-depth", "0.2"]


def test_check_spacing_margin(run):
    # ILRI Publ. 16 Example 8.1 site (inputs quoted second-hand): widest spacing 64 m
    c = json.loads(run(*SITE, "--json", "--check-spacing", "50 m").stdout)["check"]
    assert c["required_spacing_m"] == pytest.approx(64.0, abs=0.05)
    assert c["margin_pct"] == pytest.approx(100 * (c["required_spacing_m"] - 50) /
                                            c["required_spacing_m"])
    text = run(*SITE, "--check-spacing", "70 m").stdout
    assert "allowed 64.0 m" in text and "too wide" in text


def test_check_spacing_ponding_never_a_negative_depth(run):
    # Kirkham, K 0.6 in/h, drains 3.5 ft, barrier 8 ft, sock, 3/8 in/d, 1 ft, 60 ft: the
    # steady formula puts the water table above the ground
    args = ["spacing", "--method", "kirkham", "--k", "0.6 in/h", "--drain-depth", "3.5 ft",
            "--barrier-depth", "8 ft", "--drain-radius", "sock-4in", "--recharge", "3/8 in/d",
            "--water-table-depth", "1 ft", "--check-spacing", "60 ft"]
    r = run(*args, "--units", "us")
    assert r.exit_code == 0
    assert "ponding" in r.stdout and "above the ground" in r.stdout
    assert " -0." not in r.stdout and "depth           -" not in r.stdout
    c = json.loads(run(*args, "--json").stdout)["check"]
    assert c["ponding"] and c["midway_water_table_depth_m"] == 0.0
    assert c["height_above_surface_m"] > 0 and not c["meets"]


@pytest.mark.parametrize("extra, option", [
    (["--check-spacing", "10 km"], "--check-spacing"),
    (["--check-spacing", "0.01"], "--check-spacing"),
    (["--sweep-k", ""], "--sweep-k"),
])
def test_check_spacing_physical_range(run, extra, option):
    r = run(*SITE, *extra)
    assert r.exit_code == 2 and option in r.stderr


def test_ernst_geometry_factor_range(run):
    r = run("spacing", "--method", "ernst", "--k", "0.5", "--drain-depth", "1.2",
            "--barrier-depth", "6", "--drain-radius", "0.1", "--recharge", "1 mm/d",
            "--water-table-depth", "0.2", "--geometry-factor", "1e-9")
    assert r.exit_code == 2 and "--geometry-factor" in r.stderr and "1-100" in r.stderr
    ok = run("spacing", "--method", "ernst", "--k", "0.5", "--drain-depth", "1.2",
             "--barrier-depth", "6", "--drain-radius", "0.1", "--recharge", "1 mm/d",
             "--water-table-depth", "0.2", "--geometry-factor", "2", "--json")
    assert ok.exit_code == 0
    assert json.loads(ok.stdout)["details"]["head_loss_radial_m"] > 0


# ---- outputs, elevations and geometry details

def test_output_folder(run, tmp_path):
    import pyogrio

    allowed = _allowed()
    xs = list(np.arange(10.0, 300.0, 20.0))
    assert 20.0 < allowed
    proj = _project(tmp_path)
    prop = _lines_file(tmp_path, xs, lateral_size="4 in", main_size="10 in")
    out = tmp_path / "chk"
    r = run("check", proj, "--proposal", prop, "-o", out)
    assert r.exit_code == 0, r.output
    assert (out / "check_sheet.pdf").read_bytes()[:5] == b"%PDF-"
    layers = {row[0] for row in pyogrio.list_layers(out / "check.gpkg")}
    assert {"proposal_laterals", "proposal_mains", "drained_strips", "field"} <= layers
    lat = gpd.read_file(out / "check.gpkg", layer="proposal_laterals")
    assert set(lat["verdict"]) <= {"meets", "fails"} and len(lat) == len(xs)
    first = json.loads((out / "check.json").read_text())
    assert first["verdict"] == "meets"
    # same input, same files; an existing folder is refused without --overwrite
    r = run("check", proj, "--proposal", prop, "-o", out)
    assert r.exit_code == 2 and "--overwrite" in r.stderr
    pdf = (out / "check_sheet.pdf").read_bytes()
    r = run("check", proj, "--proposal", prop, "-o", out, "--overwrite")
    assert r.exit_code == 0
    assert (out / "check_sheet.pdf").read_bytes() == pdf
    assert json.loads((out / "check.json").read_text()) == first


def test_grades_from_surveyed_inverts(run, tmp_path):
    """Z values of the drawn lines are pipe inverts: grade = fall / length."""
    proj = _project(tmp_path)
    for fall, meets in ((0.05, False), (0.40, True)):
        geoms = [shapely.LineString([(X0 + x, Y0 + 195, 100.0 + fall), (X0 + x, Y0 + 3, 100.0)])
                 for x in np.arange(10.0, 300.0, 20.0)]
        gpd.GeoDataFrame({"kind": ["lateral"] * len(geoms)}, geometry=geoms, crs=CRS).to_file(
            tmp_path / "z.gpkg", driver="GPKG")
        out = json.loads(run("check", proj, "--proposal", tmp_path / "z.gpkg", "--json").stdout)
        g = next(c for c in out["criteria"] if c["name"] == "lateral minimum grade")
        assert g["proposed"] == pytest.approx(fall / 192.0, rel=1e-3)
        assert g["required"] == pytest.approx(0.001)          # project default 0.1 %
        assert g["meets"] is meets
        assert all(x["grade"] == pytest.approx(fall / 192.0, rel=1e-3) for x in out["laterals"])


def test_measure_laterals_edges_and_exclusions():
    from drainplan.geometry.proposal import measure_laterals

    field = np.array([shapely.box(0, 0, 100, 100)])
    xs = [10.0, 30.0, 50.0, 90.0]
    lats = np.array([shapely.LineString([(x, 5), (x, 95)]) for x in xs])
    g = measure_laterals(lats, field)
    # edge laterals mirror their one neighbour; the lateral at 50 m has 20 m and 40 m sides
    assert g.local_spacing.tolist() == pytest.approx([20.0, 20.0, 40.0, 40.0])
    assert g.edge.tolist() == [True, False, False, True]
    assert g.edge_left[-1] == pytest.approx(10.0) or g.edge_right[-1] == pytest.approx(10.0)
    assert g.strip_area == pytest.approx([20 * 90, 20 * 90, 30 * 90, 30 * 90])
    # an excluded strip between x = 60 and 80 m: the laterals either side are edges
    region = np.array([field[0].difference(shapely.box(60, 0, 80, 100))])
    g2 = measure_laterals(lats, field, regions=region)
    assert np.isnan(g2.spacing_left[2]) or np.isnan(g2.spacing_right[2])
    assert g2.local_spacing[2] == pytest.approx(20.0)
    assert g2.local_spacing[3] == pytest.approx(20.0)          # alone: twice 10 m to the edge
    # a cross lateral is no neighbour
    cross = np.append(lats, shapely.LineString([(0, 50), (100, 50)]))
    g3 = measure_laterals(cross, field)
    assert g3.local_spacing[:4].tolist() == pytest.approx([20.0, 20.0, 40.0, 40.0])


def test_us_units_text(run, tmp_path):
    proj = _project(tmp_path)
    prop = _lines_file(tmp_path, list(np.arange(10.0, 300.0, 20.0)), lateral_size="4 in",
                       main_size="6 in")
    text = run("check", proj, "--proposal", prop, "--units", "us").stdout
    assert "ft" in text and "ft³/s" in text and " L/s" not in text


@pytest.mark.filterwarnings("ignore")
def test_local_spacing_is_rotation_invariant():
    """Parallel laterals at spacing s in a field turned by any bearing: every interior
    lateral measures s (geometry checked against the construction itself)."""
    from hypothesis import given, settings
    from hypothesis import strategies as st

    from drainplan.geometry.proposal import measure_laterals

    @settings(max_examples=25, deadline=None)
    @given(st.floats(8.0, 40.0), st.floats(0.0, 180.0))
    def check(s, bearing):
        n = 9
        field = shapely.box(-10, -10, (n - 1) * s + 10, 200)
        lats = [shapely.LineString([(i * s, 0), (i * s, 190)]) for i in range(n)]
        rot = lambda g: shapely.affinity.rotate(g, bearing, origin=(0, 0))  # noqa: E731
        g = measure_laterals(np.array([rot(x) for x in lats]), np.array([rot(field)]))
        assert g.local_spacing == pytest.approx(np.full(n, s), rel=1e-6)
        assert g.strip_area[1:-1] == pytest.approx(np.full(n - 2, s * 190), rel=1e-6)

    import shapely.affinity  # noqa: F401
    check()


def test_perforated_lateral_in_a_well_setback_fails(run, tmp_path):
    """A drawn lateral through a well's 30 m setback fails, by the length inside: the chord
    2 sqrt(R^2 - e^2) of a circle of radius R at offset e (elementary geometry)."""
    proj = _project(tmp_path, well=(150.0, 100.0))
    xs = list(np.arange(10.0, 300.0, 20.0))
    prop = _lines_file(tmp_path, xs, lateral_size="4 in", main_size="10 in")
    out = json.loads(run("check", proj, "--proposal", prop, "--json").stdout)
    c = next(c for c in out["criteria"] if c["name"] == "clear of exclusion setbacks")
    assert not c["meets"]
    inside = {x: 2 * math.sqrt(30.0 ** 2 - (x - 150.0) ** 2) for x in xs if abs(x - 150) < 30}
    assert c["proposed"] == pytest.approx(max(inside.values()), rel=0.01)   # 32-gon circle
    failing = {round(x["x"] - X0) for x in out["laterals"]
               if "clear of exclusion setbacks" in x["fails"]}
    assert failing == {round(x) for x in inside}
    assert out["verdict"] == "fails"


def test_depth_from_surveyed_ground_and_inverts(run, tmp_path):
    """Z values under a surveyed ground give each lateral's depth as installed; the
    spacing criterion is then taken at that depth."""
    from drainplan.spacing import drain_spacing, effective_radius

    proj = _project(tmp_path, ground=101.3)
    geoms = [shapely.LineString([(X0 + x, Y0 + 195, 100.2), (X0 + x, Y0 + 3, 100.0)])
             for x in np.arange(10.0, 300.0, 20.0)]
    gpd.GeoDataFrame({"kind": ["lateral"] * len(geoms)}, geometry=geoms, crs=CRS).to_file(
        tmp_path / "z.gpkg", driver="GPKG")
    out = json.loads(run("check", proj, "--proposal", tmp_path / "z.gpkg", "--json").stdout)
    assert all(x["depth_m"] == pytest.approx(1.2, abs=1e-3) for x in out["laterals"])
    expect = float(drain_spacing(method="hooghoudt", drain_depth=1.2, barrier_depth=3.0,
                                 drain_radius=effective_radius("sock-4in"), k=0.6,
                                 recharge=0.007, water_table_depth=0.5).spacing)
    steady = next(c for c in out["criteria"] if c["name"] == "steady")
    assert steady["required"] == pytest.approx(expect, rel=1e-3)
    # inverts above the ground are refused in one line
    bad = [shapely.LineString([(X0 + 10, Y0 + 195, 102.0), (X0 + 10, Y0 + 3, 101.9)])]
    gpd.GeoDataFrame({"kind": ["lateral"]}, geometry=bad, crs=CRS).to_file(
        tmp_path / "zb.gpkg", driver="GPKG")
    r = run("check", proj, "--proposal", tmp_path / "zb.gpkg")
    assert r.exit_code == 2 and "above the surveyed ground" in r.stderr


def test_design_numbers_meet_every_criterion(tmp_path):
    """The numbers of drainplan's own design (spacing, depth, largest lateral and main
    sizes, the radius used) make a proposal that meets every criterion."""
    from drainplan.check import check_proposal, read_proposal
    from drainplan.design import design
    from drainplan.project import load_project

    proj = load_project(_project(tmp_path, falling=True, outlet=True))
    res = design(proj)
    d = res.summary["design"]
    reaches = res.pipes_plan.design.reaches
    lat = max((r for r in reaches if r["kind"] == "lateral"), key=lambda r: r["flow_l_s"])
    main = max((r for r in reaches if r["kind"] == "main"), key=lambda r: r["flow_l_s"])
    (tmp_path / "n.toml").write_text(
        f'[proposal]\nlateral_spacing = "{d["spacing_m"]} m"\ndepth = "{d["drain_depth_m"]} m"\n'
        f'lateral_size = "{lat["size"]}"\nmain_size = "{main["size"]}"\n'
        f'envelope = "sock-4in"\n')
    out = check_proposal(proj, read_proposal(tmp_path / "n.toml")).summary
    assert out["verdict"] == "meets", [c["text"] for c in out["criteria"] if not c["meets"]]
    assert {"steady", "falling", "lateral capacity", "main capacity"} <= {
        c["name"] for c in out["criteria"]}


def test_herringbone_sides_are_not_neighbours():
    """Laterals at +45 and -45 degrees either side of a main: each measures the
    perpendicular spacing of its own side, 20 sin 45 = 14.14 m (plane geometry)."""
    from drainplan.geometry.proposal import measure_laterals

    field = np.array([shapely.box(-20, -110, 340, 110)])
    up = [shapely.LineString([(x, 1), (x + 100, 101)]) for x in np.arange(0.0, 221.0, 20.0)]
    down = [shapely.LineString([(x, -1), (x + 100, -101)]) for x in np.arange(0.0, 221.0, 20.0)]
    g = measure_laterals(np.array(up + down, dtype=object), field)
    inner = [i for i in range(len(up) + len(down)) if i % len(up) not in (0, len(up) - 1)]
    assert g.local_spacing[inner] == pytest.approx(20 * math.sin(math.pi / 4), rel=1e-6)


def test_confidence_criterion(run, tmp_path):
    """--k-cv adds the steady criterion met with 80 % confidence: the spacing at
    K_c = K50 exp(-z sigma), sigma = sqrt(ln(1 + cv^2)) (lognormal moments; z from
    scipy.stats.norm, the reference library)."""
    from scipy.stats import norm

    from drainplan.spacing import drain_spacing, effective_radius

    proj = _project(tmp_path)
    prop = _lines_file(tmp_path, list(np.arange(10.0, 300.0, 20.0)))
    out = json.loads(run("check", proj, "--proposal", prop, "--k-cv", "0.5",
                         "--json").stdout)
    kc = 0.6 * math.exp(-norm.ppf(0.8) * math.sqrt(math.log(1 + 0.5 ** 2)))
    expect = float(drain_spacing(method="hooghoudt", drain_depth=1.0, barrier_depth=3.0,
                                 drain_radius=effective_radius("sock-4in"), k=kc,
                                 recharge=0.007, water_table_depth=0.5).spacing)
    c = next(c for c in out["criteria"] if c["name"] == "steady at 80% confidence")
    assert c["required"] == pytest.approx(expect, rel=1e-3)
    assert c["meets"] is (20.0 <= expect)
    assert expect < next(x for x in out["criteria"] if x["name"] == "steady")["required"]
    r = run("check", proj, "--proposal", prop, "--confidence", "0.9")
    assert r.exit_code == 2 and "--k-cv" in r.stderr


def test_season_criterion_matches_the_simulation(run, tmp_path):
    """--weather/--target-sew30 checks the widest spacing the season simulation allows at
    the proposal's depth (the same answer as 'drainplan simulate --target-sew30')."""
    rng = np.random.default_rng(3)                     # two invented years of weather
    days = np.arange(np.datetime64("2001-01-01"), np.datetime64("2003-01-01"))
    rain = np.where(rng.random(days.size) < 0.3, rng.gamma(1.2, 9.0, days.size), 0.0)
    rows = ["date,rain_mm,pet_mm"] + [f"{d},{r:.1f},2.0" for d, r in zip(days, rain)]
    (tmp_path / "w.csv").write_text("\n".join(rows) + "\n")
    proj = _project(tmp_path)
    prop = _lines_file(tmp_path, list(np.arange(10.0, 300.0, 20.0)))
    out = json.loads(run("check", proj, "--proposal", prop, "--weather", tmp_path / "w.csv",
                         "--target-sew30", "60", "--json").stdout)
    c = next(c for c in out["criteria"] if c["name"] == "season")
    sim = json.loads(run("simulate", "--weather", tmp_path / "w.csv", "--spacing", "3:200:40",
                         "--k", "0.6", "--drain-depth", "1.0", "--barrier-depth", "3.0",
                         "--drain-radius", "sock-4in", "--drainable-porosity", "0.05",
                         "--target-sew30", "60", "--json").stdout)
    assert c["required"] == pytest.approx(sim["target"]["spacing_m"], abs=0.5)
    assert c["meets"] is (20.0 <= c["required"])
    r = run("check", proj, "--proposal", prop, "--target-sew30", "60")
    assert r.exit_code == 2 and "--weather" in r.stderr
