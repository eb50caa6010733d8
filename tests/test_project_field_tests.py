"""[[soil.tests]], soil.k_cv and criteria.confidence in the project file, through the design.

The reductions and the sampling are checked against their sources in test_auger_hole.py
and test_uncertainty.py; here the wiring: the project's tests give the same K as the core
functions, the design spacing at a confidence equals the sampled spacing of the same
site (and, with K alone varying, the deterministic spacing at the K percentile of
METHODS 14.5), and bad tests are refused with the file and the test named.
"""

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import norm

from drainplan.auger_hole import auger_hole_test
from drainplan.errors import InputError
from drainplan.project import load_project

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_fields"


def test_demo_tests_reduce_like_the_core():
    p = load_project(DEMO / "project.toml")
    tests = p.soil["tests"]
    assert len(tests) == 4
    first = auger_hole_test(hole_radius=0.04, hole_depth=1.8, water_table_depth=0.75,
                            times=[0, 60, 120, 180, 240],
                            water_depths=[1.500, 1.449, 1.400, 1.353, 1.307])
    assert tests[0]["k"] == pytest.approx(first.k)
    ks = np.array([t["k"] for t in tests])
    s = p.soil["tests_summary"]
    assert s["geometric_mean"] == pytest.approx(np.exp(np.log(ks).mean()))
    assert p.soil["k_log_sd"] == pytest.approx(np.log(ks).std(ddof=1))
    assert "k" not in p.soil            # the demo keeps its two-layer K


def _project(tmp_path, soil_extra="", criteria_extra="", soil_k='k = "0.5 m/d"'):
    text = f"""
[site]
name = "test (invented)"
[fields]
file = "{DEMO / 'fields.geojson'}"
id_attribute = "field_id"
[soil]
{soil_k}
barrier_depth = "3.2 m"
drainable_porosity = 0.06
{soil_extra}
[criteria]
method = "hooghoudt"
recharge = "3/8 in/d"
water_table_depth = "0.3 m"
{criteria_extra}
[drains]
depth = "1.0 m"
radius = "sock-4in"
spacing_increment = "0.5 m"
[pipes]
survey = "{DEMO / 'survey.csv'}"
survey_crs = "EPSG:4326"
"""
    f = tmp_path / "p.toml"
    f.write_text(text)
    return f


TESTS = """
[[soil.tests]]
kind = "auger-hole"
place = "A"
hole_radius = "4 cm"
hole_depth = "1.7 m"
water_table_depth = "0.8 m"
readings = [[0, 1.42], [40, 1.38], [80, 1.342]]
[[soil.tests]]
kind = "k"
place = "B, from a neighbouring survey"
k = "0.9 m/d"
[[soil.tests]]
kind = "inverse-auger-hole"
place = "C"
hole_radius = "4 cm"
hole_depth = "1.0 m"
readings = "0:0.40,300:0.452,600:0.50"
"""


def test_tests_give_k_when_none_is_given(tmp_path):
    p = load_project(_project(tmp_path, soil_extra=TESTS, soil_k=""))
    ks = [t["k"] for t in p.soil["tests"]]
    assert p.soil["k"] == pytest.approx(math.exp(np.mean(np.log(ks))))
    assert p.soil["tests_summary"]["used_for"].startswith("the design K")
    q = load_project(_project(tmp_path, soil_extra="tests_percentile = 25\n" + TESTS,
                              soil_k=""))
    assert q.soil["k"] < p.soil["k"]
    sd = p.soil["tests_summary"]["log_sd"]
    assert q.soil["k"] == pytest.approx(p.soil["k"] * math.exp(norm.ppf(0.25) * sd))


@pytest.mark.parametrize("extra,criteria,match", [
    ("", "confidence = 0.8", "criteria.confidence needs a spread"),
    ("k_cv = 0.5", "confidence = 1.2", "criteria.confidence must be"),
    (TESTS.replace("[40, 1.38]", "[40, 1.45]"), "", r"test 'A'.*must rise"),
    (TESTS.replace('kind = "k"', 'kind = "pit"'), "", "kind must be one of"),
    (TESTS.replace("place = \"A\"", "plase = \"A\""), "", "did you mean 'place'"),
    ("barrier_depth_range = [\"3 m\"]", "", r"\[low, high\]"),
])
def test_bad_project_entries(tmp_path, extra, criteria, match):
    soil_k = "" if "[[soil.tests]]" in extra else 'k = "0.5 m/d"'
    f = _project(tmp_path, soil_extra=extra, criteria_extra=criteria, soil_k=soil_k)
    with pytest.raises(InputError, match=match) as exc:
        load_project(f)
    assert str(exc.value).startswith("p.toml:")


def test_design_at_confidence(tmp_path, run):
    f = _project(tmp_path, soil_extra="k_cv = 0.6", criteria_extra="confidence = 0.8")
    out = tmp_path / "out"
    r = run("-q", "design", f, "-o", out)
    assert r.exit_code == 0, r.output
    s = json.loads((out / "summary.json").read_text())
    u = s["uncertainty"]
    assert u["design_spacing_at_confidence"] is True
    assert s["design"]["spacing_before_rounding_m"] == pytest.approx(
        u["spacing_at_confidence_m"], abs=1e-3)
    assert s["design"]["spacing_m"] <= u["spacing_at_confidence_m"]
    assert u["spacing_at_confidence_m"] < u["deterministic_spacing_m"]
    # K alone varies: the same as the deterministic spacing at the 80 % K (METHODS 14.5)
    sigma = math.sqrt(math.log1p(0.36))
    k80 = 0.5 * math.exp(-norm.ppf(0.8) * sigma)
    det = json.loads(run("spacing", "--k", str(k80), "--drain-depth", "1.0",
                         "--barrier-depth", "3.2 m", "--drain-radius", "sock-4in",
                         "--recharge", "3/8 in/d", "--water-table-depth", "0.3 m",
                         "--json").stdout)["spacing_m"]
    assert u["spacing_at_confidence_m"] == pytest.approx(det, rel=0.02)
    assert u["exact_spacing_at_confidence_m"] == pytest.approx(det, rel=1e-6)
    probs = [c["probability"] for c in u["probability_curve"]]
    assert all(a >= b for a, b in zip(probs, probs[1:]))
    assert u["probability_design_spacing_meets"] >= 0.8
    assert any("80% probability" in n for n in s["design"]["notes"])


def test_demo_sheet_shows_tests_and_curve(tmp_path, run):
    import pypdf

    out = tmp_path / "demo"
    r = run("-q", "design", DEMO / "project.toml", "-o", out)
    assert r.exit_code == 0, r.output
    s = json.loads((out / "summary.json").read_text())
    assert s["field_tests"]["n"] == 4 and "uncertainty" in s
    assert s["uncertainty"]["design_spacing_at_confidence"] is False
    text = " ".join(pg.extract_text() for pg in pypdf.PdfReader(out / "design_sheet.pdf").pages)
    assert "Field tests and how sure the spacing is" in text
    assert "north headland (invented)" in text and "Spacing met with 80 % probability" in text
    assert "van Beers" in text
