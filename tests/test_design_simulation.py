"""The season simulation inside a design: [simulation] in the project file, the spacing
grid, the SEW30 target and the method agreement (the sheet page is checked in
test_design.py on the demo design)."""

from pathlib import Path

import numpy as np
import pytest

from drainplan.errors import InputError
from drainplan.simulation_plan import SimulationSite, design_simulation, simulate_site
from drainplan.spacing.simulation import sew30
from drainplan.weather import parse_season, read_weather

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_fields"


@pytest.fixture(scope="module")
def weather5(tmp_path_factory):
    """Five years of the invented demo record."""
    lines = (DEMO / "weather.csv").read_text().splitlines()
    head = [i for i, ln in enumerate(lines) if ln.startswith("date,")][0]
    path = tmp_path_factory.mktemp("w") / "w5.csv"
    path.write_text("\n".join(lines[head:head + 1827]) + "\n")
    return read_weather(path)


SITE = SimulationSite(drain_depth=1.1, barrier_depth=3.2, drain_radius=0.05, k_below=0.5,
                      k_above=0.8, drainable_porosity=0.06)


def test_design_simulation_target_and_agreement(weather5):
    season = parse_season("03-15:06-15")
    summary, fig = design_simulation(SITE, weather5, spacing=20.0, analytic_spacing=21.3,
                                     coefficient=0.0127, season=season, target=60.0,
                                     season_text="03-15:06-15")
    keys = summary["key_spacings"]
    assert keys["narrower"]["spacing_m"] < keys["design"]["spacing_m"] == 20.0 \
        < keys["wider"]["spacing_m"]
    t = summary["target"]
    assert t["bounded"] and t["sew30_cm_d"] <= 60.0
    a = summary["agreement"]
    assert a["simulated_spacing_m"] == t["spacing_m"]
    assert a["ratio"] == pytest.approx(t["spacing_m"] / 21.3)
    assert a["reason"] and "simulation" in a["reason"]
    # the widest spacing within the target, checked by simulating it and the next one
    run = simulate_site(SITE, weather5, [t["spacing_m"], t["next_failing_spacing_m"]],
                        season=season, other_model=False)
    assert run.rows[0]["sew30_cm_d"] <= 60.0 < run.rows[1]["sew30_cm_d"]
    # figure data: the wettest season, three spacings, the curve against spacing
    assert len(fig["depths"]) == 3 and fig["dates"].size == 93          # 15 Mar - 15 Jun
    assert len(fig["sew30"]) == len(fig["spacings"]) == len(summary["curve"])
    assert np.all(np.diff(fig["sew30"]) >= -1e-9)
    assert summary["assumptions"] and summary["weather"]["days"] == 1826


def test_design_simulation_without_target(weather5):
    summary, _ = design_simulation(SITE, weather5, spacing=20.0, analytic_spacing=21.3)
    a = summary["agreement"]
    assert summary["target"] is None and a["simulated_spacing_m"] is None
    assert "no SEW30 target" in a["sentence"]


def test_layered_porosity_in_the_simulation(weather5):
    """A porosity profile (from soil layers) runs; the reservoir beside it takes the mean
    drainable porosity from the surface to the drains (hand sum: (0.4 x 0.04 + 0.7 x 0.08)
    / 1.1 = 0.0655)."""
    from drainplan.simulation_plan import _mean_porosity

    site = SimulationSite(drain_depth=1.1, barrier_depth=3.2, drain_radius=0.05,
                          k_below=0.5, k_above=0.8,
                          porosity_profile=((0.4, 0.04), (3.2, 0.08)))
    assert _mean_porosity(site) == pytest.approx((0.4 * 0.04 + 0.7 * 0.08) / 1.1)
    run = simulate_site(site, weather5, [15.0, 30.0])
    assert abs(run.rows[0]["balance_error_mm"]) < 1e-9 * run.rows[0]["rain_mm"]
    z = run.result.water_table_depth
    assert run.rows[1]["sew30_total_cm_d"] == pytest.approx(sew30(z[1]))


def _project(tmp_path, section):
    text = (DEMO / "project.toml").read_text()
    text = text[:text.index("[simulation]")] + section
    for name in ("fields.geojson", "exclusions.geojson", "outlet.geojson", "survey.csv",
                 "weather.csv"):
        (tmp_path / name).symlink_to(DEMO / name)
    (tmp_path / "project.toml").write_text(text)
    return tmp_path / "project.toml"


def test_project_simulation_section(tmp_path):
    from drainplan.project import load_project

    p = load_project(_project(tmp_path, '[simulation]\nweather = "weather.csv"\n'
                                        'season = "04-01:05-31"\ntarget_sew30 = 80\n'
                                        'root_zone_depth = "40 cm"\n'))
    assert Path(p.simulation["weather"]).is_absolute()
    assert p.simulation["root_zone_depth"] == pytest.approx(0.4)
    assert p.simulation["target_sew30"] == 80.0


@pytest.mark.parametrize("section,match", [
    ('[simulation]\nseason = "03-01:06-30"\n', "simulation.weather"),
    ('[simulation]\nweather = "weather.csv"\nseason = "3/1-6/30"\n', "season"),
    ('[simulation]\nweather = "weather.csv"\ntarget_sew = 100\n', "did you mean"),
    ('[simulation]\nweather = "weather.csv"\ntarget_sew30 = -1\n', "target_sew30"),
    ('[simulation]\nweather = "weather.csv"\ntarget_basis = "median"\n', "mean, worst-year"),
    ('[simulation]\nweather = "weather.csv"\nlatitude = 123\n', "latitude"),
])
def test_project_simulation_errors(tmp_path, section, match):
    from drainplan.project import load_project

    with pytest.raises(InputError, match=match):
        load_project(_project(tmp_path, section))


def test_bad_weather_file_in_a_design_is_one_line(run, tmp_path):
    path = _project(tmp_path, '[simulation]\nweather = "bad.csv"\n')
    (tmp_path / "bad.csv").write_text("date,rain_mm,pet_mm\n2001-01-01,1,0\n2001-01-01,1,0\n")
    out = tmp_path / "out"
    r = run("design", path, "-o", out)
    assert r.exit_code == 2
    err = [ln for ln in r.stderr.splitlines() if ln.startswith("drainplan: error")]
    assert len(err) == 1 and "simulation.weather" in err[0] and "line 3" in err[0]
    assert not out.exists()


def test_temperatures_take_the_fields_latitude(tmp_path):
    """A weather record of temperatures (no PET) and no simulation.latitude: the design
    waits for the layout and computes PET by Hargreaves-Samani at the fields' latitude
    (FAO-56 Eq. 52, checked in test_weather.py), the same whether or not the season
    simulation could start beside the layout (DRAINPLAN_BACKGROUND)."""
    import os

    import geopandas as gpd

    from drainplan.design import design
    from drainplan.project import load_project
    from drainplan.weather import hargreaves_samani

    # two invented years of temperatures, rain from the demo record
    lines = (DEMO / "weather.csv").read_text().splitlines()
    head = [i for i, ln in enumerate(lines) if ln.startswith("date,")][0]
    rows = [ln.split(",") for ln in lines[head + 1:head + 1 + 731]]
    doy = np.arange(len(rows)) % 365
    tmin = 4.0 + 10.0 * np.sin(2 * np.pi * (doy - 100) / 365)
    tmax = tmin + 9.0
    path = _project(tmp_path, '[simulation]\nweather = "temps.csv"\nseason = "03-15:06-15"\n')
    (tmp_path / "temps.csv").write_text(
        "date,rain_mm,tmin_c,tmax_c\n" + "\n".join(
            f"{r[0]},{r[1]},{a:.1f},{b:.1f}" for r, a, b in zip(rows, tmin, tmax)) + "\n")
    lat = float(gpd.read_file(DEMO / "fields.geojson").to_crs("EPSG:4326")
                .geometry.union_all().centroid.y)
    out = {}
    for flag in ("1", "0"):
        os.environ["DRAINPLAN_BACKGROUND"] = flag
        try:
            out[flag] = design(load_project(path)).summary["simulation"]
        finally:
            os.environ.pop("DRAINPLAN_BACKGROUND")
    s = out["1"]
    assert s["weather"]["pet_source"] == "hargreaves-samani"
    assert s["weather"]["latitude_deg"] == pytest.approx(lat, abs=1e-6)
    assert s == out["0"]
    w = read_weather(tmp_path / "temps.csv", latitude=lat)
    dates = w.dates
    day = (dates - dates.astype("datetime64[Y]")).astype(int) + 1
    np.testing.assert_allclose(w.pet, np.asarray(hargreaves_samani(
        tmin=[float(f"{a:.1f}") for a in tmin], tmax=[float(f"{b:.1f}") for b in tmax],
        latitude=lat, day_of_year=day)),
        rtol=1e-12)
