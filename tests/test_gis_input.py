"""GIS inputs as users give them: CRSs that are not true to scale, Z coordinates,
overlapping fields, impossible coordinates, swapped latitude/longitude, fields
without an id, empty layers, reruns.

Distances and areas are checked against pyproj (``Geod`` geodesic areas on the
WGS 84 ellipsoid, and transformations to the local UTM zone done here, not by
drainplan), the independent reference for "metres on the ground".
"""

import json
import math

import geopandas as gpd
import numpy as np
import pyogrio
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from pyproj import CRS, Geod, Transformer

from drainplan.errors import InputError
from drainplan.gisio import SCALE_TOLERANCE, scale_error, to_metric

GEOD = Geod(ellps="WGS84")
UTM17 = "EPSG:32617"


def _square(cx, cy, side):
    h = side / 2
    return shapely.box(cx - h, cy - h, cx + h, cy + h)


def _geodesic_area_ha(geom_lonlat):
    area, _ = GEOD.geometry_area_perimeter(shapely.segmentize(geom_lonlat, 0.0005))
    return abs(area) / 1e4


def _field_file(tmp_path, geoms, crs, fname="f.gpkg", **cols):
    gdf = gpd.GeoDataFrame(cols or {"field_id": [f"F{i + 1}" for i in range(len(geoms))]},
                           geometry=list(geoms), crs=UTM17).to_crs(crs)
    path = tmp_path / fname
    gdf.to_file(path, engine="pyogrio")
    return path


@pytest.mark.parametrize("crs", ["EPSG:3857", "EPSG:3413"])
def test_layout_not_fooled_by_map_scale(run, tmp_path, crs):
    """A 12.00 ha field at 42 N stored in Web Mercator (scale 1.35 there) or in a
    polar stereographic CRS (1.16): laid out in UTM, with ground distances."""
    side = math.sqrt(120_000.0)
    field = _square(330_000.0, 4_650_000.0, side)        # UTM 17N, about 42 N 83 W
    path = _field_file(tmp_path, [field], crs)
    out = tmp_path / "o.gpkg"
    r = run("layout", path, "--spacing", "18 m", "--direction", "0", "-o", out, "--json")
    assert r.exit_code == 0, r.output
    assert "not true to scale" in r.stderr and "UTM" in r.stderr
    s = json.loads(r.stdout)
    assert CRS(s["work_crs"]).utm_zone == "17N"
    lonlat = gpd.read_file(path).to_crs("EPSG:4326").geometry.iloc[0]
    assert s["totals"]["field_area_ha"] == pytest.approx(_geodesic_area_ha(lonlat), rel=2e-3)
    lat = gpd.read_file(out, layer="laterals").to_crs(UTM17)      # pyproj, not drainplan
    xs = np.sort([g.centroid.x for g in lat.geometry])
    gaps = np.diff(xs)
    assert np.median(gaps) == pytest.approx(18.0, abs=0.05)


def test_true_scale_crs_is_kept(run, tmp_path):
    path = _field_file(tmp_path, [_square(330_000.0, 4_650_000.0, 300.0)], UTM17)
    r = run("layout", path, "--spacing", "18 m", "-o", tmp_path / "o.gpkg", "--json")
    assert r.exit_code == 0 and "not true to scale" not in r.stderr
    assert CRS(json.loads(r.stdout)["work_crs"]) == CRS(UTM17)
    r = run("layout", path, "--spacing", "18 m", "--work-crs", "EPSG:3857", "-o",
            tmp_path / "p.gpkg")
    assert r.exit_code == 2 and "--work-crs" in r.stderr and "not true to scale" in r.stderr


@settings(max_examples=15, deadline=None)
@given(lat=st.floats(-60, 70), lon=st.floats(-179, 179), side=st.floats(50, 2000))
def test_to_metric_area_matches_geodesic(lat, lon, side):
    """Property: whatever the latitude, a square stored in Web Mercator is worked in a
    CRS true to scale at the field, so its area matches the geodesic area (0.5 %)."""
    utm = gpd.GeoSeries([shapely.Point(lon, lat)], crs="EPSG:4326").estimate_utm_crs()
    to_utm = Transformer.from_crs("EPSG:4326", utm, always_xy=True)
    cx, cy = to_utm.transform(lon, lat)
    sq = gpd.GeoDataFrame(geometry=[_square(cx, cy, side)], crs=utm)
    merc = sq.to_crs("EPSG:3857")
    metric, work = to_metric(merc, CRS("EPSG:3857"))
    assert scale_error(work, metric) <= SCALE_TOLERANCE
    truth = _geodesic_area_ha(sq.to_crs("EPSG:4326").geometry.iloc[0]) * 1e4
    assert metric.geometry.iloc[0].area == pytest.approx(truth, rel=5e-3)


def test_utm_zone_matches_geopandas():
    """The local UTM zone drainplan picks is the one geopandas' ``estimate_utm_crs``
    finds in the PROJ database (reference library), for seeded points over the UTM
    latitudes, for fields given in lon/lat and in Web Mercator; and for an extent
    across the antimeridian."""
    from drainplan.gisio import _utm

    rng = np.random.default_rng(3)
    lon = rng.uniform(-179.9, 179.9, 20)
    lat = rng.uniform(-79.5, 83.5, 20)
    keep = np.abs((lon + 180.0) / 6.0 - np.round((lon + 180.0) / 6.0)) > 1e-4  # off zone edges
    for x, y in zip(lon[keep], lat[keep]):
        g = gpd.GeoDataFrame(geometry=[shapely.Point(x, y).buffer(0.001)], crs="EPSG:4326")
        assert _utm(g) == g.estimate_utm_crs(), (x, y)
        m = g.to_crs("EPSG:3857")
        assert _utm(m) == m.estimate_utm_crs(), (x, y)
    across = gpd.GeoDataFrame(geometry=[shapely.box(179.95, -17.1, 180.0, -17.0),
                                        shapely.box(-180.0, -17.1, -179.99, -17.0)],
                              crs="EPSG:4326").to_crs("EPSG:3832")
    assert _utm(across) == across.estimate_utm_crs()
    with pytest.raises(InputError, match="no UTM zone"):
        _utm(gpd.GeoDataFrame(geometry=[shapely.Point(10.0, 86.0)], crs="EPSG:4326"))


def test_polygons_with_z(run, tmp_path):
    flat = [_square(330_000.0, 4_650_000.0, 300.0)]
    with_z = [shapely.force_3d(flat[0], 250.0)]
    a = _field_file(tmp_path, flat, UTM17, "a.gpkg")
    b = _field_file(tmp_path, with_z, UTM17, "b.gpkg")
    runs = []
    for p in (a, b):
        r = run("layout", p, "--spacing", "18 m", "-o", tmp_path / f"{p.stem}_o.gpkg", "--json")
        assert r.exit_code == 0, r.output
        runs.append(json.loads(r.stdout)["totals"])
    assert runs[0] == runs[1]


def test_overlapping_fields_named(run, tmp_path):
    a = _square(330_000.0, 4_650_000.0, 300.0)
    b = _square(330_150.0, 4_650_000.0, 300.0)
    path = _field_file(tmp_path, [a, b], UTM17, field_id=["North", "South"])
    r = run("layout", path, "--spacing", "18 m", "-o", tmp_path / "o.gpkg")
    assert r.exit_code == 0, r.output
    shared = shapely.intersection(a, b).area / 1e4
    assert f"fields 'North' and 'South' overlap by {shared:.2f} ha" in r.stderr


def test_impossible_coordinates(run, tmp_path):
    path = _field_file(tmp_path, [_square(1e15, 4_650_000.0, 300.0)], UTM17)
    r = run("layout", path, "--spacing", "18 m", "-o", tmp_path / "o.gpkg")
    assert r.exit_code == 2 and "cannot be a real position" in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1


@pytest.mark.parametrize("lonlat", [(-83.06, 40.35), (-94.45, 42.72)])
def test_swapped_latitude_longitude(run, tmp_path, lonlat):
    lon, lat = lonlat
    ring = [[lat, lon], [lat + 0.003, lon], [lat + 0.003, lon + 0.004], [lat, lon + 0.004],
            [lat, lon]]
    path = tmp_path / "swapped.geojson"
    path.write_text(json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"field_id": "A"},
         "geometry": {"type": "Polygon", "coordinates": [ring]}}]}))
    r = run("layout", path, "--spacing", "18 m", "-o", tmp_path / "o.gpkg")
    assert r.exit_code == 2, r.output
    assert "latitude/longitude in the wrong order" in r.stderr
    assert "Traceback" not in r.output and len(r.stderr.strip().splitlines()) == 1


def test_field_ids_and_attributes(run, tmp_path):
    geoms = [_square(330_000.0, 4_650_000.0, 300.0), _square(330_600.0, 4_650_000.0, 300.0)]
    path = _field_file(tmp_path, geoms, UTM17, crop=["corn", "soy"], acres=[22.2, 22.3])
    out = tmp_path / "o.gpkg"
    r = run("layout", path, "--spacing", "18 m", "-o", out)
    assert r.exit_code == 0, r.output
    assert "no id attribute" in r.stderr and "F1..F2" in r.stderr
    fld = gpd.read_file(out, layer="field")
    assert list(fld["crop"]) == ["corn", "soy"] and list(fld["acres"]) == [22.2, 22.3]
    lat = gpd.read_file(out, layer="laterals")
    assert lat["lateral_id"].notna().all() and set(lat["field_id"]) == {"F1", "F2"}
    path = _field_file(tmp_path, geoms, UTM17, fname="named.gpkg", name=["Big", "Small"],
                       area_ha=[1.0, 2.0])
    r = run("layout", path, "--spacing", "18 m", "-o", tmp_path / "n.gpkg")
    assert r.exit_code == 0 and "field ids from attribute 'name'" in r.stderr
    fld = gpd.read_file(tmp_path / "n.gpkg", layer="field")
    assert list(fld["field_id"]) == ["Big", "Small"]
    assert list(fld["src_area_ha"]) == [1.0, 2.0]          # the user's own, kept apart


def test_empty_layers_keep_their_schema(run, tmp_path):
    path = _field_file(tmp_path, [_square(330_000.0, 4_650_000.0, 300.0)], UTM17)
    out = tmp_path / "o.gpkg"
    assert run("layout", path, "--spacing", "18 m", "-o", out).exit_code == 0
    info = pyogrio.read_info(out, layer="exclusions")
    assert info["features"] == 0 and info["geometry_type"] == "Polygon"
    types = dict(zip(info["fields"], info["ogr_types"]))
    assert types == {"kind": "OFTString", "setback_m": "OFTReal"}
    info = pyogrio.read_info(out, layer="unconnected")
    assert info["features"] == 0 and info["geometry_type"] == "LineString"
    assert dict(zip(info["fields"], info["ogr_types"]))["field_id"] == "OFTString"


def test_bad_geometry_exits_2(run, tmp_path):
    g = gpd.GeoDataFrame({"field_id": ["X"]}, geometry=[shapely.Polygon(
        [(0, 0), (300, 300), (300, 0), (0, 300)])], crs=32615)
    g.to_file(tmp_path / "bowtie.gpkg", engine="pyogrio")
    r = run("layout", tmp_path / "bowtie.gpkg", "--spacing", "18 m", "-o", tmp_path / "o.gpkg")
    assert r.exit_code == 2 and "invalid boundary" in r.stderr


def test_too_many_laterals_refused_before_work(run, tmp_path):
    path = _field_file(tmp_path, [_square(500_000.0, 4_650_000.0, 300_000.0)], UTM17)
    r = run("layout", path, "--spacing", "1 m", "-o", tmp_path / "o.gpkg")
    assert r.exit_code == 2 and "--spacing" in r.stderr
    assert "limit of 250,000 laterals" in r.stderr and "MAX_LATERALS" in r.stderr


def test_lonlat_survey_without_crs_hints(run, tmp_path):
    from pathlib import Path

    demo = Path(__file__).resolve().parents[1] / "demo_fields"
    lay = tmp_path / "lay.gpkg"
    assert run("layout", demo / "fields.geojson", "--spacing", "18 m", "-o", lay).exit_code == 0
    r = run("pipes", lay, "--coefficient", "10 mm/d", "--survey", demo / "survey.csv",
            "-o", tmp_path / "s.csv")
    assert r.exit_code == 2 and "--survey-crs EPSG:4326" in r.stderr
    assert "longitude and latitude" in r.stderr
