"""Layered soil profiles reduced for the spacing methods."""

import json
from pathlib import Path

import pytest
from numpy.testing import assert_allclose

from drainplan.errors import InputError
from drainplan.project import load_project
from drainplan.soil import reduce_layers
from drainplan.spacing import hooghoudt_spacing


def test_thickness_weighted_means():
    # transmissivity of layers in horizontal flow is the sum of K x thickness (Darcy's law
    # in parallel layers; common practice), so the equivalent K is the weighted mean
    r = reduce_layers([0.4, 1.0, 2.0], [1.2, 0.6, 0.3], 1.2,
                      drainable_porosity=[0.08, 0.05, 0.04], porosity_zone=(0.0, 0.6))
    assert_allclose(r["k_above"], (0.4 * 1.2 + 0.8 * 0.6) / 1.2)
    assert_allclose(r["k_below"], (0.2 * 0.6 + 2.0 * 0.3) / 2.2)
    assert_allclose(r["barrier_depth"], 3.4)
    assert_allclose(r["drainable_porosity"], (0.4 * 0.08 + 0.2 * 0.05) / 0.6)


def test_homogeneous_layers_reduce_to_their_k():
    r = reduce_layers([0.5, 0.5, 2.0], [0.7, 0.7, 0.7], 1.1, barrier_depth=2.5)
    assert r["k_above"] == pytest.approx(0.7) and r["k_below"] == pytest.approx(0.7)


@pytest.mark.parametrize("args,match", [
    (([0.5, -1], [1, 1], 1.0), "thicknesses"),
    (([0.5, 1], [1, 0], 1.0), "K values"),
    (([0.5, 1], [1, 1], 2.0), "within the profile"),
])
def test_bad_layers(args, match):
    with pytest.raises(InputError, match=match):
        reduce_layers(*args)


def test_layered_project(tmp_path, run):
    text = """
[site]
name = "layered"
[fields]
file = "{fields}"
[soil]
source = "test"
[[soil.layers]]
thickness = "0.4 m"
k = "1.2 m/d"
[[soil.layers]]
thickness = "2.6 m"
k = "0.3 m/d"
[criteria]
recharge = "10 mm/d"
water_table_depth = "0.4 m"
[drains]
depth = "1.0 m"
radius = "5 cm"
"""
    fields = Path(__file__).resolve().parents[1] / "demo_fields" / "fields.geojson"
    path = tmp_path / "p.toml"
    path.write_text(text.format(fields=fields))
    p = load_project(path)
    assert p.soil["barrier_depth"] == pytest.approx(3.0)      # bottom of the last layer
    r = run("-q", "design", path, "-o", tmp_path / "out", "--json")
    assert r.exit_code == 0, r.output
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())
    soil = summary["inputs"]["soil_at_drain_depth"]
    assert soil["k_above"] == pytest.approx((0.4 * 1.2 + 0.6 * 0.3) / 1.0)
    assert soil["k_below"] == pytest.approx(0.3)
    assert any("2-layer profile reduced" in n for n in summary["design"]["notes"])
    # the same spacing as Hooghoudt with those two values
    L = hooghoudt_spacing(recharge=0.01, head=0.6, k_above=soil["k_above"], k_below=0.3,
                          depth_to_barrier=2.0, drain_radius=0.05)
    assert summary["design"]["spacing_before_rounding_m"] == pytest.approx(float(L), abs=1e-3)
