"""`drainplan soil ...` and the uncertainty options of `drainplan spacing`, end to end.

Numbers are checked against the core functions (tested against their sources in
test_auger_hole.py, test_pedotransfer.py and test_uncertainty.py) and against the
lognormal percentile identity of drainplan METHODS 14.5 (derived).
"""

import json
import math

import pytest
from scipy.stats import norm

from drainplan.auger_hole import auger_hole_test
from drainplan.spacing import drain_spacing

AUGER = ["soil", "auger-hole", "--hole-radius", "4 cm", "--hole-depth", "1.7",
         "--water-table-depth", "0.9"]


def test_auger_hole_json(run):
    r = run(*AUGER, "--readings", "0:1.40,40:1.34,80:1.285", "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    ref = auger_hole_test(hole_radius=0.04, hole_depth=1.7, water_table_depth=0.9,
                          times=[0, 40, 80], water_depths=[1.40, 1.34, 1.285])
    assert out["k_m_per_d"] == pytest.approx(ref.k)
    assert out["readings_used"] == 3 and out["method"] == "auger-hole"


def test_auger_hole_text_and_us_units(run):
    r = run(*AUGER, "--readings", "0:1.40,40:1.34,80:1.285", "--units", "us")
    assert r.exit_code == 0, r.output
    assert "hydraulic conductivity K" in r.stdout and "in/h" in r.stdout


def test_readings_file_units_in_header(run, tmp_path):
    f = tmp_path / "r.csv"
    f.write_text("time_min,water_depth_cm\n0,140\n0.6666666666666666,134\n"
                 "1.3333333333333333,128.5\n")
    a = json.loads(run(*AUGER, "--readings-file", f, "--json").stdout)
    b = json.loads(run(*AUGER, "--readings", "0:1.40,40:1.34,80:1.285", "--json").stdout)
    assert a["k_m_per_d"] == pytest.approx(b["k_m_per_d"], rel=1e-9)


@pytest.mark.parametrize("args,match", [
    (["--readings", "0:1.40,40:1.45"], "--readings: the water level in an auger hole must rise"),
    (["--readings", "0:1.40,0:1.35"], "reading times must increase"),
    (["--readings", "0-1.40,40:1.35"], "cannot read"),
    ([], "--readings or --readings-file"),
])
def test_auger_hole_bad_readings(run, args, match):
    r = run(*AUGER, *args)
    assert r.exit_code == 2
    assert match in r.stderr and len(r.stderr.strip().splitlines()) == 1


def test_hole_above_water_table(run):
    r = run("soil", "auger-hole", "--hole-radius", "4 cm", "--hole-depth", "0.8",
            "--water-table-depth", "1.2", "--readings", "0:0.7,30:0.6")
    assert r.exit_code == 2 and "inverse auger-hole" in r.stderr


def test_bad_readings_file(run, tmp_path):
    f = tmp_path / "r.csv"
    f.write_text("t,depth\n0,1.4\n40,1.3\n")
    r = run(*AUGER, "--readings-file", f)
    assert r.exit_code == 2 and "time_<unit>" in r.stderr


def test_inverse_auger_hole(run):
    r = run("soil", "inverse-auger-hole", "--hole-radius", "4 cm", "--hole-depth", "1.0",
            "--readings", "0:0.40,300:0.452,600:0.50", "--json")
    assert r.exit_code == 0, r.output
    k = json.loads(r.stdout)["k_m_per_d"]
    # Porchet over the whole test: (r/2) ln((h0 + r/2)/(ht + r/2)) / t, h from 0.60 to 0.50
    assert k == pytest.approx(0.02 * math.log(0.62 / 0.52) / (600 / 86400), rel=0.01)
    r = run("soil", "inverse-auger-hole", "--hole-radius", "4 cm", "--hole-depth", "1.0",
            "--readings", "0:0.40,300:0.35")
    assert r.exit_code == 2 and "must fall" in r.stderr


def test_texture(run):
    r = run("soil", "texture", "--sand", "40", "--clay", "20", "--organic-matter", "2.5",
            "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    # Saxton & Rawls (2006) loam at OM 2.5 %: Ks 15.5 mm/h (class table, recalled)
    assert out["ksat_m_per_d"] == pytest.approx(15.5 * 0.024, rel=0.005)
    for key in ("theta_saturation", "theta_field_capacity", "theta_wilting_point",
                "drainable_porosity"):
        assert 0 < out[key] < 1
    assert out["estimate"] is True
    r = run("soil", "texture", "--sand", "80", "--clay", "30")
    assert r.exit_code == 2 and "sand + clay" in r.stderr


def test_van_genuchten(run):
    r = run("soil", "van-genuchten", "--theta-r", "0.078", "--theta-s", "0.43", "--alpha",
            "3.6", "--n", "1.56", "--to-depth", "0.5", "--json")
    assert r.exit_code == 0, r.output
    assert json.loads(r.stdout)["drainable_porosity"] == pytest.approx(0.0663, abs=6e-5)


SPACING = ["spacing", "--method", "hooghoudt", "--k", "0.5", "--drain-depth", "1.2",
           "--barrier-depth", "6", "--drain-radius", "0.1", "--recharge", "7 mm/d",
           "--water-table-depth", "0.5"]


def test_spacing_at_confidence_json(run):
    r = run(*SPACING, "--k-cv", "0.6", "--confidence", "0.8", "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert out["confidence"] == 0.8
    curve = out["probability_curve"]
    assert len(curve) == 50 and set(curve[0]) == {"spacing_m", "probability"}
    probs = [p["probability"] for p in curve]
    assert all(a >= b for a, b in zip(probs, probs[1:]))
    # METHODS 14.5: with --k the median, the 80 % spacing is the spacing at K50 exp(-z sigma)
    sigma = math.sqrt(math.log1p(0.6 ** 2))
    k80 = 0.5 * math.exp(-norm.ppf(0.8) * sigma)
    exact = float(drain_spacing(method="hooghoudt", drain_depth=1.2, barrier_depth=6.0,
                                drain_radius=0.1, k=k80, recharge=0.007,
                                water_table_depth=0.5).spacing)
    assert out["spacing_at_confidence_m"] == pytest.approx(exact, rel=0.02)
    assert out["spacing_at_confidence_m"] < out["spacing_m"]


def test_check_spacing_reports_probability(run):
    r = run(*SPACING, "--k-cv", "0.6", "--check-spacing", "30 m", "--json")
    out = json.loads(r.stdout)
    p = out["check"]["probability_meets"]
    curve = out["probability_curve"]
    below = [c["probability"] for c in curve if c["spacing_m"] <= 30.0]
    above = [c["probability"] for c in curve if c["spacing_m"] >= 30.0]
    assert above[0] <= p <= below[-1]
    t = run(*SPACING, "--k-cv", "0.6", "--check-spacing", "30 m")
    assert "probability the proposed spacing" in t.stdout and "Uncertainty" in t.stdout


def test_several_inputs_vary(run):
    r = run("spacing", "--method", "glover-dumm", "--k", "1.0", "--drain-depth", "1.2",
            "--barrier-depth", "4.0", "--drain-radius", "0.1", "--initial-depth", "0.3",
            "--final-depth", "0.6", "--days", "2", "--drainable-porosity", "0.06",
            "--k-cv", "0.5", "--drainable-porosity-range", "0.04:0.06:0.08",
            "--barrier-depth-range", "3 m:5 m", "--json")
    assert r.exit_code == 0, r.output
    out = json.loads(r.stdout)
    assert [v["input"] for v in out["uncertainty"]["varied"]] == [
        "K", "drainable porosity", "barrier depth"]
    assert out["uncertainty"]["exact_spacing_at_confidence_m"] is None


@pytest.mark.parametrize("args,match", [
    (["--confidence", "0.8"], "--confidence needs a spread"),
    (["--k-cv", "0.6", "--confidence", "1.5"], "--confidence: confidence must be between"),
    (["--k-cv", "-1"], "coefficient of variation"),
    (["--barrier-depth-range", "5"], "LOW:HIGH"),
])
def test_spacing_uncertainty_bad_options(run, args, match):
    r = run(*SPACING, *args)
    assert r.exit_code == 2, r.output
    assert match in r.stderr
