"""The design sheet's content: equations as computed, sensitivity, the falling criterion
against the pipe coefficient, the Ernst caution, the radius list, the K sweep."""

import csv
import json
import math
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_fields"


@pytest.fixture(scope="module")
def demo():
    from drainplan.design import design
    from drainplan.project import load_project

    return design(load_project(DEMO / "project.toml"))


def _project_copy(tmp_path, edits=(), append=""):
    text = (DEMO / "project.toml").read_text()
    for old, new in edits:
        assert old in text
        text = text.replace(old, new)
    for name in ("fields.geojson", "exclusions.geojson", "outlet.geojson", "survey.csv",
                 "weather.csv"):
        (tmp_path / name).symlink_to(DEMO / name)
    (tmp_path / "project.toml").write_text(text + append)
    return tmp_path / "project.toml"


# ---- item 4: every equation is the one computed --------------------------------------

def _dumm_spacing(k, flow_depth, t, mu, c, h0, ht):
    """Glover-Dumm one-term spacing, L = pi sqrt(K D t / (mu ln(c h0/ht))), written here
    from Dumm (1964), Trans. ASAE 7(2), as given in Ritzema (1994) ILRI Publ. 16 ch. 8
    (recalled from memory)."""
    return math.pi * math.sqrt(k * flow_depth * t / (mu * math.log(c * h0 / ht)))


def test_glover_dumm_numbers_are_those_computed(demo):
    s = demo.summary
    m = next(x for x in s["methods"] if x["method"] == "glover-dumm")
    soil, crit = s["inputs"]["soil_at_drain_depth"], s["inputs"]["criteria"]
    zd = s["design"]["drain_depth_m"]
    L = _dumm_spacing(soil["k_below"], m["flow_depth_m"], crit["days"],
                      soil["drainable_porosity"], 1.16, zd - crit["initial_depth"],
                      zd - crit["final_depth"])
    # flow depth printed to 1 mm: the spacing follows to about 0.1 %
    assert L == pytest.approx(m["spacing_m"], rel=2e-3)
    # and it is the equivalent depth (the default), not the barrier depth below the drains
    assert m["flow_depth_m"] == pytest.approx(m["equivalent_depth_m"], abs=1e-3)
    assert m["flow_depth_m"] < m["depth_to_barrier_m"] - 0.5


def test_equation_text_follows_the_flow_depth_choice(demo):
    from drainplan.sheet import _equations, _Fmt

    s = json.loads(json.dumps(demo.summary, default=float))
    blocks = {b[0].split(" (")[0]: b for b in _equations(s, _Fmt("metric"))}
    gd = blocks["Glover–Dumm"]
    assert "D<sub>f</sub> = d," in gd[1][0] and "h₀/2" not in gd[1][0]
    assert "K D t" not in " ".join(gd[1])            # the old, wrong form with D = barrier
    s["inputs"]["criteria"]["flow_depth"] = "equivalent-plus-half-head"
    blocks = {b[0].split(" (")[0]: b for b in _equations(s, _Fmt("metric"))}
    assert "D<sub>f</sub> = d + h₀/2" in blocks["Glover–Dumm"][1][0]
    # each block defines its symbols
    for title, eqs, symbols, _ in _equations(s, _Fmt("metric")):
        assert symbols and len(symbols) > 60, title
    ernst = blocks["Ernst"]
    for sym in ("Dᵥ", "Kᵥ", "ΣKD", "Kᵣ", "Dᵣ", "geometry factor", "wet perimeter"):
        assert sym in ernst[2]


def test_hooghoudt_and_ernst_numbers_close(demo):
    """Hooghoudt (1940): q L^2 = 8 K2 d h + 4 K1 h^2 with the d printed; Ernst (1956): the
    three head losses printed add up to h (ILRI Publ. 16 eq. 8.13, recalled)."""
    s = demo.summary
    soil, crit = s["inputs"]["soil_at_drain_depth"], s["inputs"]["criteria"]
    hg = next(x for x in s["methods"] if x["method"] == "hooghoudt")
    q, L, d, h = crit["recharge"], hg["spacing_m"], hg["equivalent_depth_m"], hg["head_m"]
    assert q * L * L == pytest.approx(8 * soil["k_below"] * d * h + 4 * soil["k_above"] * h * h,
                                      rel=2e-3)
    er = next(x for x in s["methods"] if x["method"] == "ernst")["details"]
    total = er["head_loss_vertical_m"] + er["head_loss_horizontal_m"] + er["head_loss_radial_m"]
    assert total == pytest.approx(hg["head_m"], rel=1e-4)


# ---- item 6: pipe coefficient against the falling criterion ---------------------------

def _dumm_series(x, L, t, h0, alpha, terms=400):
    """Dumm's series for a fourth-degree-parabola initial water table (Dumm 1964), written
    independently here: h = h0 (192/pi^5) sum ((n^2 pi^2 - 8)/n^5) e^(-n^2 alpha t)
    sin(n pi x/L), n odd."""
    n = np.arange(1, 2 * terms, 2)[:, None]
    coef = 192.0 / np.pi ** 5 * (n * n * np.pi ** 2 - 8.0) / n ** 5
    return h0 * np.sum(coef * np.exp(-n * n * alpha * t) * np.sin(n * np.pi * x / L), axis=0)


def test_falling_discharge_against_independent_series(demo):
    s, fd = demo.summary, demo.figures
    fl = s["design"]["falling_discharge"]
    L, K, Df, mu = fl["spacing_m"], fl["k_m_per_d"], fl["flow_depth_m"], fl["drainable_porosity"]
    h0, c = fl["initial_head_m"], fl["initial_shape_coefficient"]
    # peak: q0 = 2 pi K D c h0 / L^2 (discharge of the first term, ILRI Publ. 16 ch. 8,
    # recalled), computed from the printed numbers
    assert fl["peak_m_per_d"] == pytest.approx(2 * math.pi * K * Df * c * h0 / L ** 2, rel=1e-3)
    # mean over the time allowed: volume drained per unit area from the independent series
    alpha = math.pi ** 2 * K * Df / (mu * L ** 2)
    x = np.linspace(0.0, L, 4001)
    t = s["inputs"]["criteria"]["days"]
    mean0 = np.trapezoid(_dumm_series(x, L, 0.0, h0, alpha), x) / L
    meant = np.trapezoid(_dumm_series(x, L, t, h0, alpha), x) / L
    assert mean0 == pytest.approx(0.8 * h0, rel=1e-3)        # mean of h0 [1 - (1 - 2x/L)^4]
    assert fl["mean_m_per_d"] == pytest.approx(mu * (mean0 - meant) / t, rel=1e-3)
    # the demo's 1/2 in/d is far below: warned, with the key to keep it
    assert fl["coefficient_below_peak"] and not fl["accepted"]
    w = " ".join(s["design"]["warnings"])
    assert "below the peak drain discharge" in w and "accept_coefficient_below_peak" in w


def test_coefficient_kept_knowingly(tmp_path):
    from drainplan.design import design
    from drainplan.project import load_project

    path = _project_copy(tmp_path, [('ditch_water_level = "298.0 m"',
                                     'ditch_water_level = "298.0 m"\n'
                                     'accept_coefficient_below_peak = true')])
    s = design(load_project(path)).summary
    assert not any("peak drain discharge" in w for w in s["design"]["warnings"])
    assert any("Kept knowingly" in n for n in s["design"]["notes"])
    # a coefficient above the peak needs no warning at all
    (tmp_path / "b").mkdir()
    path2 = _project_copy(tmp_path / "b", [('coefficient = "1/2 in/d"',
                                            'coefficient = "40 mm/d"')])
    s2 = design(load_project(path2)).summary
    assert not s2["design"]["falling_discharge"]["coefficient_below_peak"]
    assert not any("peak drain discharge" in w for w in s2["design"]["warnings"])


# ---- item 17: sensitivity --------------------------------------------------------------

def test_sensitivity_table(demo):
    from drainplan.spacing import drain_spacing

    s = demo.summary
    rows = {r["input"]: r for r in s["sensitivity"]}
    assert set(rows) == {"k", "drainable_porosity", "barrier_depth", "radius"}
    base = s["design"]["spacing_before_rounding_m"]
    for r in rows.values():
        L = [c["spacing_m"] for c in r["cases"]]
        assert L[1] == pytest.approx(base, abs=1e-3)
    inc = {"k": True, "drainable_porosity": False, "barrier_depth": True, "radius": True}
    for key, up in inc.items():
        lo, mid, hi = (c["spacing_m"] for c in rows[key]["cases"])
        assert (lo < mid < hi) if up else (lo > mid > hi), key
    # wiring: the doubled-K case is drain_spacing with both K doubled, narrowest criterion
    zd = s["design"]["drain_depth_m"]
    common = dict(drain_depth=zd, barrier_depth=3.2, drain_radius=0.059)
    steady = drain_spacing(method="hooghoudt", k_above=1.6, k_below=1.0, recharge=0.009525,
                           water_table_depth=0.3, **common).spacing
    falling = drain_spacing(method="glover-dumm", k=1.0, initial_depth=0.0, final_depth=0.3,
                            days=1.0, drainable_porosity=0.06, **common).spacing
    assert rows["k"]["cases"][2]["spacing_m"] == pytest.approx(min(steady, falling), abs=1e-3)
    assert "scaled together" in rows["k"]["label"]


# ---- item 11: Ernst outside its case ---------------------------------------------------

ERNST_SITE = ["--method", "ernst", "--k-above", "2 m/d", "--k-below", "0.5 m/d",
              "--interface-depth", "1.6 m", "--drain-depth", "1.0 m", "--barrier-depth", "4 m",
              "--drain-radius", "5 cm", "--recharge", "7 mm/d", "--water-table-depth", "0.5 m"]


def test_ernst_top_layer_more_permeable_warns(run):
    # ILRI Publ. 16 Table 8.2 (Ritzema 1994) gives Ernst's geometry factor for K_b/K_t of
    # 1 to 50 (recalled from memory); here K_b/K_t = 0.25 with the drains in the top layer
    r = run("spacing", *ERNST_SITE, "--json")
    out = json.loads(r.stdout)
    assert len(out["warnings"]) == 1 and "Hooghoudt" in out["warnings"][0]
    text = run("spacing", *ERNST_SITE).stdout
    assert "Warnings" in text and "drainplan's own" in text
    # the case Ernst was built for (more permeable bottom layer) and drains in the bottom
    # layer: no warning
    for swap in (["--k-above", "0.5 m/d", "--k-below", "2 m/d"],
                 ["--interface-depth", "1.0 m"]):
        args = list(ERNST_SITE)
        for i in range(0, len(swap), 2):
            args[args.index(swap[i]) + 1] = swap[i + 1]
        assert json.loads(run("spacing", *args, "--json").stdout)["warnings"] == []


def test_ernst_caution_reaches_design_warnings(tmp_path):
    from drainplan.design import design
    from drainplan.project import load_project

    path = _project_copy(tmp_path, [('k_above = "0.8 m/d"', 'k_above = "2.0 m/d"\n'
                                     'interface_depth = "1.6 m"'),
                                    ('method = "hooghoudt"', 'method = "ernst"')])
    s = design(load_project(path)).summary
    assert any("Ernst outside the case" in w for w in s["design"]["warnings"])


# ---- item 9: --list-radii --------------------------------------------------------------

def _radius_rows():
    with open(ROOT / "drainplan" / "templates" / "drain_radius.csv", newline="") as fh:
        return list(csv.DictReader(fh))


def test_list_radii(run):
    help_text = run("spacing", "--help").stdout
    assert "--list-radii" in help_text
    rows = _radius_rows()
    out = json.loads(run("spacing", "--list-radii", "--json").stdout)["drain_radii"]
    assert [r["name"] for r in out] == [r["name"] for r in rows]
    assert [r["radius_m"] for r in out] == [float(r["radius_m"]) for r in rows]
    assert all(r["source"] and r["confidence"] for r in out)
    metric = run("spacing", "--list-radii").stdout
    us = run("spacing", "--list-radii", "--units", "us").stdout
    for r in rows:
        cm = float(r["radius_m"]) * 100
        inch = float(r["radius_m"]) / 0.0254          # 1 in = 25.4 mm exactly (1959)
        assert r["name"] in metric and f"{cm:.1f}" in metric
        assert f"{inch:.2f}" in us
    assert "radius (in)" in us and "radius (cm)" in metric


def test_missing_site_option_still_named(run):
    r = run("spacing", "--k", "1")
    assert r.exit_code == 2 and "--drain-depth" in r.stderr


# ---- item 19: the K sweep --------------------------------------------------------------

def test_sweep_labels_scaled_k(run):
    args = ["spacing", "--k-above", "0.8 m/d", "--k-below", "0.5 m/d", "--drain-depth", "1.1",
            "--barrier-depth", "3.2", "--drain-radius", "sock-4in", "--recharge", "3/8 in/d",
            "--water-table-depth", "0.3", "--sweep-k", "0.1:2:4"]
    text = run(*args).stdout
    assert "scaled together" in text and "K below" in text
    sweep = json.loads(run(*args, "--json").stdout)["sweep"]
    for row in sweep:
        assert row["k_above_m_per_d"] == pytest.approx(1.6 * row["k_below_m_per_d"])


@pytest.mark.parametrize("lo,hi", [(0.1, 2.0), (0.3, 0.45), (0.01, 100.0), (0.05, 5.0)])
def test_sweep_plot_tick_labels_do_not_overlap(lo, hi):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from drainplan.plots import spacing_against_k

    ks = np.geomspace(lo, hi, 8)
    fig, ax = plt.subplots(figsize=(6, 4))
    spacing_against_k([(k, 20 * k ** 0.5) for k in ks], ax=ax, units="us")
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    x0, x1 = ax.get_xlim()
    boxes = [t.get_window_extent(r) for t in ax.get_xticklabels()
             if t.get_text() and t.get_visible() and x0 <= t.get_position()[0] <= x1]
    plt.close(fig)
    assert len(boxes) >= 2
    boxes.sort(key=lambda b: b.x0)
    for a, b in zip(boxes, boxes[1:]):
        assert a.x1 < b.x0, "tick labels overlap"


# ---- item 15: US units throughout --------------------------------------------------------

#: A number followed by a metric unit (what must not appear on a US sheet).
METRIC = __import__("re").compile(
    r"\d\s?(mm|cm|m|km|ha|L/s|m/d|mm/d|m/s|m/ha|m²|m³|m2|m3)(?![\w/²³])")


@pytest.fixture(scope="module")
def us_sheet(tmp_path_factory):
    """The demo farm designed in US units, with US criteria (depths in feet, spacing in 5 ft
    steps)."""
    from click.testing import CliRunner

    from drainplan.cli import cli

    tmp = tmp_path_factory.mktemp("us")
    path = _project_copy(tmp, [('units = "metric"', 'units = "us"'),
                               ('paper = "A4"', 'paper = "Letter"'),
                               ('spacing_increment = "1 m"', 'spacing_increment = "5 ft"'),
                               ('depth = ["0.9 m", "1.0 m", "1.1 m"]',
                                'depth = ["3 ft", "3.5 ft", "4 ft"]'),
                               ('water_table_depth = "0.3 m"', 'water_table_depth = "1 ft"'),
                               ('final_depth = "0.3 m"', 'final_depth = "1 ft"')])
    r = CliRunner().invoke(cli, ["design", str(path), "-o", str(tmp / "out")])
    assert r.exit_code == 0, r.output
    return tmp / "out", r


def test_us_sheet_has_no_metric_quantity(us_sheet):
    import pypdf

    out, r = us_sheet
    pages = [p.extract_text() for p in pypdf.PdfReader(out / "design_sheet.pdf").pages]
    text = "\n".join(pages)
    stray = [m.group(0) for m in METRIC.finditer(text)]
    assert not stray, stray[:10]
    s = json.loads((out / "summary.json").read_text())
    # spacing rounded down to whole 5 ft steps (1 ft = 0.3048 m exactly)
    ft = s["design"]["spacing_m"] / 0.3048
    assert ft == pytest.approx(round(ft / 5) * 5, abs=1e-6)
    assert f"{ft:.0f} ft" in pages[0]
    assert "in/d" in pages[0] and "acre" in pages[0]
    radius_in = s["inputs"]["drains"]["radius_m"] / 0.0254
    assert f"{radius_in:.2f} in" in text


def test_us_figures_in_feet():
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    from drainplan.plots import cross_section, falling_water_table, profile_plot

    x = np.linspace(0, 15.24, 31)
    fd = {"x": x, "spacing": 15.24, "drain_depth": 1.2192, "barrier_depth": 3.048,
          "interface_depth": None, "radius": 0.059, "layer_bottoms": None,
          "steady_depth": 1.2192 - 0.5 * np.sin(np.pi * x / 15.24), "steady_target": 0.3048,
          "falling_t": np.linspace(0, 2, 5), "falling_mid_depth": np.linspace(0, 0.6, 5),
          "falling_days": 1.0, "falling_target": 0.3048,
          "falling_profiles": {0.0: np.full(31, 0.1), 1.0: np.full(31, 0.3)}}
    fig = Figure()
    ax = cross_section(fd, ax=fig.add_subplot(), units="us")
    assert "(ft)" in ax.get_ylabel() and "(ft)" in ax.get_xlabel()
    assert ax.get_xlim() == pytest.approx((-50.0, 100.0))          # 50 ft spacing
    assert any(t.get_text() == "L = 50 ft" for t in ax.texts)
    a1, a2 = falling_water_table(fd, axes=Figure().subplots(1, 2), units="us")
    assert "(ft)" in a1.get_ylabel() and "(ft)" in a2.get_xlabel()
    ax = profile_plot({"chainage": np.array([0.0, 30.48]), "ground": np.array([100.0, 101.0]),
                       "invert": np.array([99.0, 99.5])}, ax=Figure().add_subplot(),
                      units="us")
    assert ax.get_xlabel() == "chainage (ft)"
    assert ax.lines[0].get_xdata()[-1] == pytest.approx(100.0)


def test_us_templates_state_us_values():
    import tomllib

    from drainplan.project import SCHEMA

    tdir = ROOT / "drainplan" / "templates"
    for path in tdir.glob("project_*.toml"):
        data = tomllib.loads(path.read_text())
        if data["report"]["units"] != "us":
            continue
        for section, keys in data.items():
            for key, value in keys.items():
                kind = SCHEMA[section].get(key, ("text",))[0]
                values = value if isinstance(value, list) else [value]
                for v in values:
                    if kind in ("length", "rate", "depths") and isinstance(v, str):
                        assert not METRIC.search(v), (path.name, section, key, v)
                        assert any(u in v for u in ("ft", "in")), (path.name, key, v)


# ---- item 16: sheet polish -------------------------------------------------------------

def test_cross_section_marks(demo):
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    from drainplan.plots import cross_section

    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = Figure(figsize=(8, 3.3))
    FigureCanvasAgg(fig)
    ax = cross_section(demo.figures, ax=fig.add_subplot(), units="metric")
    texts = {t.get_text(): t for t in ax.texts}
    assert "ground surface" in texts
    label = next(t for k, t in texts.items() if k.startswith("L = "))
    zd = demo.figures["drain_depth"]
    # the dimension arrow runs below drain level, where the water table never is
    assert label.get_position()[1] > zd
    assert np.max(demo.figures["steady_depth"]) <= zd + 1e-9
    # the barrier label and the legend do not overlap
    fig.canvas.draw()
    r = fig.canvas.get_renderer()
    barrier = next(t for k, t in texts.items() if k.startswith("barrier"))
    assert not barrier.get_window_extent(r).overlaps(ax.get_legend().get_window_extent(r))


def test_plan_legend_names_holes():
    import geopandas as gpd
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure
    from shapely.geometry import Polygon

    from drainplan.plots import plan_map

    field = Polygon([(0, 0), (300, 0), (300, 200), (0, 200)],
                    [[(50, 50), (100, 50), (100, 100), (50, 100)]])
    layers = {"field": gpd.GeoDataFrame({"field_id": ["A"]}, geometry=[field],
                                        crs="EPSG:32615")}
    ax = plan_map(layers, ax=Figure().add_subplot(), units="us")
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any("hole" in t for t in labels)
    assert any(t.get_text().endswith(" ft") for t in ax.texts)           # scale bar


def test_sheet_polish(demo, tmp_path):
    import re

    import pypdf

    from drainplan.outputs import render_figures
    from drainplan.sheet import build_sheet

    build_sheet(demo.summary, render_figures(demo), str(tmp_path / "s.pdf"))
    pages = [p.extract_text() for p in pypdf.PdfReader(tmp_path / "s.pdf").pages]
    text = "\n".join(pages)
    assert not re.search(r"\d(d|h)\b", text)                       # "1 d", not "1d"
    assert not re.search(r"\d+\.\d{7,}", text)                     # no 7-decimal coordinates
    for o in demo.summary["outlets"]:
        assert f"{abs(o['y']):.6f}°" in pages[0]
    # take-off and page 1 agree: perforated pipe = the laterals of the layout, solid pipe =
    # the rest of the take-off's pipe
    take = [t for t in demo.summary["takeoff"] if t["length_m"]]
    lat = sum(t["length_m"] for t in take if t["kind"] == "lateral")
    solid = sum(t["length_m"] for t in take if t["kind"] != "lateral")
    q = demo.summary["quantities"]
    assert lat == pytest.approx(q["lateral_length_m"], abs=0.5)
    assert f"{lat:.0f} m" in pages[0] and f"{solid:.0f} m" in pages[0]
    # no heading left alone at the foot of a page
    headings = {"Design", "Warnings", "Key quantities", "Inputs", "Fields", "Profiles",
                "Quantity take-off", "References", "Sensitivity of the design spacing",
                "Other methods at the design depth", "Drain depth against spacing",
                "Grade, capacity and layout warnings", "Cautions"}
    for i, page in enumerate(pages):
        lines = [ln.strip() for ln in page.splitlines() if ln.strip()]
        body = [ln for ln in lines if not ln.startswith(("drainplan design sheet", "page ",
                                                         "A design aid"))]
        assert body and body[-1] not in headings, (i + 1, body[-1])
    # sensitivity: one row per input, the base case once
    sens = text[text.index("Sensitivity of the design spacing"):text.index("Other methods")]
    assert sens.count("scaled together") == 1 and "same depth" not in sens


# ---- item 18 and issue 15: a long project stays a short sheet -------------------------------

def test_long_schedule_goes_to_the_csv(demo, tmp_path):
    import copy
    import time

    import pypdf

    from drainplan.outputs import render_figures
    from drainplan.sheet import MAX_SCHEDULE_ROWS, build_sheet

    s = copy.deepcopy(demo.summary)
    s["reaches"] = [dict(r, reach_id=f"{r['reach_id']}-{i}") for i in range(40)
                    for r in s["reaches"]]                      # ~6,800 reaches
    s["fields"] = [dict(f, field_id=f"{f['field_id']}{i}") for i in range(17)
                   for f in s["fields"]]                        # 51 fields
    t0 = time.perf_counter()
    build_sheet(s, render_figures(demo), str(tmp_path / "long.pdf"))
    elapsed = time.perf_counter() - t0
    reader = pypdf.PdfReader(tmp_path / "long.pdf")
    text = "\n".join(p.extract_text() for p in reader.pages)
    assert len(reader.pages) <= 20
    assert "pipe_schedule.csv" in text and f"{len(s['reaches'])} reaches" in text
    assert MAX_SCHEDULE_ROWS < len(s["reaches"])
    for f in s["fields"][:: 10]:
        assert f["field_id"] in text                            # per-field table complete
    assert elapsed < 30        # loose bound; 6k rows took 7.6 s as one table before


# ---- issue 14 item 16: text the sheet font can show ----------------------------------------

@pytest.mark.parametrize("name,ok", [
    ("Ferme du Pré-Vert", True), ("Ферма Озёрная", True), ("Αγρόκτημα", True),
    ("农场", False), ("खेत", False), ("Farm 🌾", False), ("مزرعة", False), ("חווה", False)])
def test_site_name_scripts(name, ok):
    from drainplan._text import check_text
    from drainplan.errors import InputError

    if ok:
        assert check_text(name, "site.name") == (name, [])
    else:
        with pytest.raises(InputError, match="site.name"):
            check_text(name, "site.name")


def test_printable_ascii_is_in_the_sheet_font():
    """The shortcut that passes printable ASCII without opening the font holds: the
    sheet font's own character map (read with fontTools) has every character from
    space to tilde."""
    from drainplan._text import _cmap

    assert all(c in _cmap() for c in range(0x20, 0x7F))


def test_control_characters_and_file_names():
    from drainplan._text import check_text, sheet_text

    clean, warns = check_text("North\x07 field\u202e\tA", "site.name")
    assert clean == "North field A" and "control characters" in warns[0]
    w = []
    assert sheet_text("F农1", "field id", w) == "F?1" and "cannot be shown" in w[0]


def test_design_refuses_unprintable_site_name(run, tmp_path):
    path = _project_copy(tmp_path, [('name = "Willow Run demo farm (invented)"',
                                     'name = "柳溪农场 (invented)"')])
    r = run("design", path, "-o", tmp_path / "out")
    assert r.exit_code == 2 and "site.name" in r.stderr and "CJK" in r.stderr
    assert not (tmp_path / "out").exists()


def test_field_table_adds_up(demo):
    s = demo.summary
    q = s["quantities"]
    assert sum(f["outlet_flow_l_s"] for f in s["fields"]) == pytest.approx(
        q["outlet_flow_l_s"], abs=0.01)
    assert sum(f["lateral_length_m"] for f in s["fields"]) == pytest.approx(
        q["lateral_length_m"], abs=0.01)
    assert all(f["spacing_m"] == s["design"]["spacing_m"] for f in s["fields"])


def test_unprintable_field_id_is_warned_on_the_sheet(demo, tmp_path):
    import copy

    import pypdf

    from drainplan.outputs import render_figures
    from drainplan.sheet import build_sheet

    s = copy.deepcopy(demo.summary)
    s["fields"][0]["field_id"] = "北田"
    build_sheet(s, render_figures(demo), str(tmp_path / "s.pdf"))
    page1 = " ".join(pypdf.PdfReader(tmp_path / "s.pdf").pages[0].extract_text().split())
    assert "cannot be shown by the sheet font" in page1 and "北" not in page1
