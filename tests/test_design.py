"""`drainplan design` end to end: the sheet, the files, agreement, determinism, errors."""

import hashlib
import json
import shutil
import subprocess
from pathlib import Path

import pypdf
import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_fields"


@pytest.fixture(scope="module")
def demo_design(tmp_path_factory):
    from click.testing import CliRunner

    from drainplan.cli import cli

    out = tmp_path_factory.mktemp("design") / "out"
    r = CliRunner().invoke(cli, ["design", str(DEMO / "project.toml"), "-o", str(out)])
    assert r.exit_code == 0, r.output
    return out, r


def test_outputs_written(demo_design):
    out, r = demo_design
    for name in ("design_sheet.pdf", "design.gpkg", "pipe_schedule.csv", "summary.json"):
        assert (out / name).stat().st_size > 0
    assert "Design sheet:" in r.stdout
    assert "drain spacing" in r.stderr and "design sheet" in r.stderr      # progress


def test_pdf_content(demo_design):
    out, _ = demo_design
    s = json.loads((out / "summary.json").read_text())
    reader = pypdf.PdfReader(out / "design_sheet.pdf")
    assert len(reader.pages) >= 5
    pages = [p.extract_text() for p in reader.pages]
    text = " ".join(pages)
    d = s["design"]
    assert f"{d['spacing_m']:.1f} m" in pages[0]
    assert f"{d['drain_depth_m']:.2f} m" in pages[0]
    names = {"hooghoudt": "Hooghoudt", "glover-dumm": "Glover–Dumm", "ernst": "Ernst",
             "kirkham": "Kirkham"}
    assert names[d["method"]] in pages[0] and d["method"] not in pages[0]   # words, not keys
    assert f"{s['quantities']['lateral_length_m']:.0f} m" in pages[0]
    assert "Cross-section" in text
    eq = next(p for p in pages if "Method and equations" in p)
    assert "References" in text
    assert "Pipe schedule" in text and "Quantity take-off" in text
    cautions = next(p for p in pages if "Cautions" in p)
    for caution in ("Buried utilities", "Trench safety", "Wells, septic", "Wetlands",
                    "Outlet rights", "qualified professional"):
        assert caution in cautions
    assert "Glover–Dumm" in eq


@pytest.mark.skipif(shutil.which("pdftoppm") is None, reason="pdftoppm not installed")
def test_pages_render(demo_design, tmp_path):
    out, _ = demo_design
    subprocess.run(["pdftoppm", "-r", "30", "-png", str(out / "design_sheet.pdf"),
                    str(tmp_path / "p")], check=True)
    pngs = sorted(tmp_path.glob("p-*.png"))
    n = len(pypdf.PdfReader(out / "design_sheet.pdf").pages)
    assert len(pngs) == n and all(p.stat().st_size > 1000 for p in pngs)


def test_summary_agrees_with_separate_commands(demo_design, run, tmp_path):
    out, _ = demo_design
    s = json.loads((out / "summary.json").read_text())
    depth = s["design"]["drain_depth_m"]
    common = ["--drain-depth", str(depth), "--barrier-depth", "3.2 m", "--drain-radius",
              "sock-4in", "--json"]
    steady = json.loads(run("spacing", "--method", "hooghoudt", "--k-above", "0.8 m/d",
                            "--k-below", "0.5 m/d", "--recharge", "3/8 in/d",
                            "--water-table-depth", "0.3 m", *common).stdout)
    falling = json.loads(run("spacing", "--method", "glover-dumm", "--k", "0.5 m/d",
                             "--initial-depth", "0 m", "--final-depth", "0.3 m", "--days", "1",
                             "--drainable-porosity", "0.06", *common).stdout)
    row = next(r for r in s["depth_table"] if r["drain_depth_m"] == depth)
    assert row["steady_spacing_m"] == pytest.approx(steady["spacing_m"], abs=1e-3)
    assert row["falling_spacing_m"] == pytest.approx(falling["spacing_m"], abs=1e-3)
    spacing = s["design"]["spacing_m"]
    lay = tmp_path / "layout.gpkg"
    r = run("layout", DEMO / "fields.geojson", "--spacing", str(spacing), "--direction", "auto",
            "--setback", "6 m", "--min-length", "10 m", "--exclude", DEMO / "exclusions.geojson",
            "--outlet", DEMO / "outlet.geojson", "--survey", DEMO / "survey.csv",
            "--survey-crs", "EPSG:4326", "-o", lay, "--json")
    totals = json.loads(r.stdout)["totals"]
    for key in ("laterals", "lateral_length_m", "main_length_m", "unconnected_pieces"):
        assert s["quantities"][key] == pytest.approx(totals[key], abs=1e-3)
    r = run("pipes", lay, "--coefficient", "1/2 in/d", "--survey", DEMO / "survey.csv",
            "--survey-crs", "EPSG:4326", "--drain-depth", str(depth), "--series", "inch",
            "--ditch-water-level", "298 m", "-o", tmp_path / "s.csv", "--json")
    pipes = json.loads(r.stdout)
    assert s["quantities"]["outlet_flow_l_s"] == pytest.approx(
        pipes["totals"]["outlet_flow_l_s"], abs=1e-3)
    assert [x["size"] for x in s["reaches"]] == [x["size"] for x in pipes["reaches"]]
    assert (tmp_path / "s.csv").read_text() == (out / "pipe_schedule.csv").read_text()


def test_deterministic(run, demo_design, tmp_path, monkeypatch):
    """The same project gives the same files byte for byte, whether the season
    simulation and the GIS files ran beside the rest in a second process (the fixture's
    run, where the machine allows it) or everything ran in this one."""
    from drainplan import _background

    out, _ = demo_design
    monkeypatch.setenv("DRAINPLAN_BACKGROUND", "0")
    assert not _background.available()
    r = run("-q", "design", DEMO / "project.toml", "-o", tmp_path / "again")
    assert r.exit_code == 0, r.output
    for name in ("design_sheet.pdf", "design.gpkg", "pipe_schedule.csv", "summary.json",
                 "plan.png"):
        a = hashlib.sha256((out / name).read_bytes()).hexdigest()
        b = hashlib.sha256((tmp_path / "again" / name).read_bytes()).hexdigest()
        assert a == b, name


def test_refuses_non_empty_output(run, tmp_path):
    out = tmp_path / "o"
    out.mkdir()
    (out / "keep.txt").write_text("x")
    r = run("design", DEMO / "project.toml", "-o", out)
    assert r.exit_code == 2 and "--overwrite" in r.stderr
    assert (out / "keep.txt").exists()


@pytest.mark.parametrize("edit,text", [
    (('file = "fields.geojson"', 'file = "missing.geojson"'), "fields file not found"),
    (('k_above = "0.8 m/d"', 'k_above = "0.8 m/d'), "line"),
    (("barrier_depth", "barrier_dept"), "did you mean"),
    (('k_below = "0.5 m/d"', 'k_below = "0.5 m"'), "soil.k_below"),
])
def test_bad_project_through_cli(run, tmp_path, edit, text):
    src = (DEMO / "project.toml").read_text().replace(*edit)
    for name in ("fields.geojson", "exclusions.geojson", "outlet.geojson", "survey.csv",
                 "weather.csv"):
        (tmp_path / name).symlink_to(DEMO / name)
    (tmp_path / "project.toml").write_text(src)
    out = tmp_path / "out"
    r = run("design", tmp_path / "project.toml", "-o", out)
    assert r.exit_code != 0
    lines = [ln for ln in r.stderr.splitlines() if ln.startswith("drainplan: error")]
    assert len(lines) == 1 and text in lines[0]
    assert "Traceback" not in r.output
    assert not out.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".out")]


def test_us_letter_with_logo(run, tmp_path):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(2, 1))
    ax.text(0.5, 0.5, "LOGO", ha="center")
    ax.set_axis_off()
    fig.savefig(tmp_path / "logo.png")
    plt.close(fig)
    text = (DEMO / "project.toml").read_text().replace('units = "metric"', 'units = "us"')
    text = text.replace('paper = "A4"', 'paper = "Letter"\nlogo = "logo.png"')
    for name in ("fields.geojson", "exclusions.geojson", "outlet.geojson", "survey.csv",
                 "weather.csv"):
        (tmp_path / name).symlink_to(DEMO / name)
    (tmp_path / "project.toml").write_text(text)
    r = run("design", tmp_path / "project.toml", "-o", tmp_path / "out")
    assert r.exit_code == 0, r.output
    assert " ft " in r.stdout + " "
    reader = pypdf.PdfReader(tmp_path / "out" / "design_sheet.pdf")
    w, h = (float(v) for v in reader.pages[0].mediabox.upper_right)
    assert (round(w), round(h)) == (612, 792)                 # US Letter, points
    text0 = reader.pages[0].extract_text()
    assert "ft" in text0 and "acre" in text0
    sim = next(p.extract_text() for p in reader.pages
               if "Season simulation over the weather record" in p.extract_text())
    assert " ft " in sim and "in/d" in sim


def test_simulation_page(demo_design):
    """The demo project has a [simulation] section: the sheet gets the season-simulation
    page (figure, key spacings, method agreement with its sentence, assumptions) and
    summary.json the numbers behind it."""
    out, _ = demo_design
    s = json.loads((out / "summary.json").read_text())
    sim = s["simulation"]
    keys = sim["key_spacings"]
    assert keys["design"]["spacing_m"] == pytest.approx(s["design"]["spacing_m"], abs=0.01)
    a = sim["agreement"]
    assert a["analytic_spacing_m"] == pytest.approx(s["design"]["spacing_before_rounding_m"])
    pages = [p.extract_text() for p in pypdf.PdfReader(out / "design_sheet.pdf").pages]
    page = next(p for p in pages if "Season simulation over the weather record" in p)
    assert "Method agreement" in page and "SEW30" in page
    assert f"{keys['design']['sew30_cm_d']:.0f}" in page
    assert any("Assumptions of the simulation" in p for p in pages)
    assert any("Sieben" in p for p in pages)                     # reference listed


def test_field_too_small_for_a_lateral_is_named(run, tmp_path):
    """A field smaller than one lateral plus its setbacks: the design stops with one line
    naming the field and why it got no laterals (not a bare 'no laterals')."""
    import geopandas as gpd
    import shapely

    text = (DEMO / "project.toml").read_text()
    text = text.replace('exclusions = "exclusions.geojson"\n', "")
    for name in ("outlet.geojson", "survey.csv", "weather.csv"):
        (tmp_path / name).symlink_to(DEMO / name)
    demo = gpd.read_file(DEMO / "fields.geojson").to_crs("EPSG:32615")
    c = demo.geometry.iloc[0].centroid
    tiny = gpd.GeoDataFrame({"field_id": ["T1"]},
                            geometry=[shapely.box(c.x, c.y, c.x + 25, c.y + 18)],
                            crs="EPSG:32615").to_crs("EPSG:4326")
    tiny.to_file(tmp_path / "fields.geojson", driver="GeoJSON")
    (tmp_path / "project.toml").write_text(text)
    r = run("design", tmp_path / "project.toml", "-o", tmp_path / "out")
    assert r.exit_code == 2, r.output
    err = [ln for ln in r.stderr.splitlines() if ln.startswith("drainplan: error")]
    assert len(err) == 1 and "field T1 got no laterals" in err[0] and "spacing" in err[0]
    assert not (tmp_path / "out").exists()
