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
