"""Soil values per field from soil polygons (drainplan.soilmap).

Reference: geopandas.overlay (how="intersection"), a general-purpose GIS
library, gives the pieces of each field in each soil polygon; the weighting
is then written out here: geometric mean of K and arithmetic means of the
barrier depth and drainable porosity, weighted by piece area.
"""

import numpy as np
import pytest
import shapely

from drainplan.errors import InputError
from drainplan.soilmap import area_weighted_soil, column_to_si, column_unit, parse_soil_units

gpd = pytest.importorskip("geopandas")

# canonical field shapes: rectangle, L-shape, field with a hole, multipolygon, a field
# half outside the map, one wholly outside, and a missing geometry
FIELDS = [
    shapely.box(10, 10, 90, 60),
    shapely.Polygon([(120, 10), (200, 10), (200, 40), (150, 40), (150, 90), (120, 90)]),
    shapely.box(220, 20, 300, 100).difference(shapely.box(250, 50, 270, 70)),
    shapely.MultiPolygon([shapely.box(20, 120, 60, 160), shapely.box(140, 120, 180, 170)]),
    shapely.box(280, 150, 360, 190),
    shapely.box(500, 500, 550, 550),
    None,
]
rng = np.random.default_rng(7)
SOIL = list(shapely.get_parts(shapely.intersection(
    shapely.get_parts(shapely.voronoi_polygons(
        shapely.MultiPoint(rng.uniform(0, 320, (12, 2))), extend_to=shapely.box(0, 0, 320, 200))),
    shapely.box(0, 0, 320, 200))))
K = np.exp(rng.normal(np.log(0.5), 1.0, len(SOIL)))
ZB = rng.uniform(2.0, 6.0, len(SOIL))
MU = rng.uniform(0.03, 0.12, len(SOIL))


def reference():
    f = gpd.GeoDataFrame({"fid": range(len(FIELDS))},
                         geometry=[g if g is not None else shapely.Polygon() for g in FIELDS])
    s = gpd.GeoDataFrame({"k": K, "zb": ZB, "mu": MU}, geometry=SOIL)
    pieces = gpd.overlay(f[~f.is_empty], s, how="intersection", keep_geom_type=True)
    pieces["a"] = pieces.area
    out = {}
    for fid, g in pieces.groupby("fid"):
        w = g["a"] / g["a"].sum()
        out[fid] = (float(np.exp((w * np.log(g["k"])).sum())), float((w * g["zb"]).sum()),
                    float((w * g["mu"]).sum()), float(g["a"].sum() / f.geometry[fid].area))
    return out


def test_area_weighting_matches_an_overlay_in_geopandas():
    got = area_weighted_soil(FIELDS, SOIL, {"k": K, "barrier_depth": ZB,
                                            "drainable_porosity": MU})
    ref = reference()
    for i in range(len(FIELDS)):
        if i in ref:
            k, zb, mu, cover = ref[i]
            assert got["k"][i] == pytest.approx(k, rel=1e-9)
            assert got["barrier_depth"][i] == pytest.approx(zb, rel=1e-9)
            assert got["drainable_porosity"][i] == pytest.approx(mu, rel=1e-9)
            assert got["soil_cover"][i] == pytest.approx(cover, abs=1e-9)
        else:                           # not covered: no value, cover 0
            assert np.isnan(got["k"][i]) and got["soil_cover"][i] == 0
    assert got["soil_cover"][4] == pytest.approx(0.5)        # half outside the map
    assert got["soil_polygons"][3] >= 2


def test_polygons_without_a_value_and_with_a_bad_k():
    f = [shapely.box(0, 0, 100, 100)]
    s = [shapely.box(0, 0, 50, 100), shapely.box(50, 0, 100, 100)]
    r = area_weighted_soil(f, s, {"k": [0.4, np.nan]})
    assert r["k"][0] == pytest.approx(0.4) and r["soil_cover"][0] == pytest.approx(0.5)
    r = area_weighted_soil(f, s, {"k": [0.4, -9999.0]})      # a no-data code
    assert np.isnan(r["k"][0]) and r["soil_bad_k"][0] == pytest.approx(0.5)


def test_empty_inputs():
    r = area_weighted_soil([], [], {"k": []})
    assert r["k"].size == 0
    r = area_weighted_soil([shapely.box(0, 0, 1, 1)], [], {"k": []})
    assert np.isnan(r["k"][0]) and r["soil_cover"][0] == 0


@pytest.mark.parametrize("column, kind, unit", [
    ("k_m_d", "rate", "m/day"), ("ksat_um_s", "rate", "um/second"),
    ("k_in_h", "rate", "inch/hour"), ("k_cm_d", "rate", "cm/day"),
    ("barrier_cm", "length", "cm"), ("depth_ft", "length", "ft"),
    ("porosity_pct", "fraction", "percent"), ("k", "rate", None),
    ("barrier_depth", "length", None)])
def test_units_from_column_names(column, kind, unit):
    assert column_unit(column, kind) == unit


def test_conversions():
    # 1 um/s = 1e-6 m x 86400 s/d = 0.0864 m/d; 1 ft = 0.3048 m (exact definitions)
    assert column_to_si([1.0], "ksat_um_s", "k")[0] == pytest.approx(0.0864)
    assert column_to_si([10.0], "barrier_ft", "barrier_depth")[0] == pytest.approx(3.048)
    assert column_to_si([5.0], "mu", "drainable_porosity", unit="%")[0] == pytest.approx(0.05)
    assert np.isnan(column_to_si(["n/a"], "k", "k")[0])
    with pytest.raises(InputError, match="soil"):
        column_to_si([1.0], "k", "k", unit="m")           # a length is not a rate
    with pytest.raises(InputError, match="k=in/h"):
        parse_soil_units("k:in/h")
    assert parse_soil_units("porosity=%, barrier=cm") == {"drainable_porosity": "%",
                                                          "barrier_depth": "cm"}


from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.floats(0, 250), st.floats(0, 150), st.floats(5, 120),
                          st.floats(5, 80)), min_size=1, max_size=6))
def test_properties_of_the_weighting(boxes):
    """Cover lies in [0, 1]; an areal mean lies between the smallest and largest value
    of the polygons the field overlaps (common practice: a mean of the parts)."""
    fields = [shapely.box(x, y, x + w, y + h) for x, y, w, h in boxes]
    r = area_weighted_soil(fields, SOIL, {"k": K, "barrier_depth": ZB})
    assert np.all((r["soil_cover"] >= 0) & (r["soil_cover"] <= 1 + 1e-12))
    for i, f in enumerate(fields):
        hit = [j for j, s in enumerate(SOIL) if shapely.intersection(f, s).area > 0]
        if not hit:
            assert np.isnan(r["k"][i])
            continue
        assert K[hit].min() * (1 - 1e-9) <= r["k"][i] <= K[hit].max() * (1 + 1e-9)
        assert ZB[hit].min() - 1e-9 <= r["barrier_depth"][i] <= ZB[hit].max() + 1e-9
