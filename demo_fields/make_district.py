"""Build the invented demo drainage district for `drainplan batch` (seeded; the
outputs are committed).

Everything here is invented: the district, its 300-odd fields, the soil units
and their values. The fields are a jittered grid of blocks between straight
roads; the soil map is a set of Voronoi cells, each an invented soil unit with a
conductivity drawn log-normally, a barrier depth and a drainable porosity. The
soil map leaves the north-east corner of the district unmapped, so that the
batch shows how it reports fields without soil data. The coordinates are laid
out in a local metric frame and placed in UTM zone 15N only so that the files
carry real-looking longitude/latitude; no real place, farm or survey is
represented.

    python demo_fields/make_district.py
"""

from pathlib import Path

import geopandas as gpd
import numpy as np
import shapely

HERE = Path(__file__).parent / "district"
CRS_LOCAL = "EPSG:32615"             # UTM 15N, metres
X0, Y0 = 402_000.0, 4_742_000.0      # origin of the invented district
SEED = 20261202


def fields(rng):
    """Blocks of a 18 x 18 grid of 250 m cells, 12 m roads, corners jittered; some
    blocks split in two, some left out (farmsteads, woods)."""
    cell, road = 250.0, 12.0
    geoms, ids = [], []
    jitter = rng.uniform(-25, 25, size=(19, 19, 2))
    for i in range(18):
        for j in range(18):
            if rng.random() < 0.08:
                continue
            c = [(i, j), (i + 1, j), (i + 1, j + 1), (i, j + 1)]
            pts = [(a * cell + jitter[a, b, 0], b * cell + jitter[a, b, 1]) for a, b in c]
            poly = shapely.Polygon(pts).buffer(-road / 2, join_style="mitre")
            if rng.random() < 0.12:             # split along the middle: two fields
                x0, y0, x1, y1 = poly.bounds
                xm = 0.5 * (x0 + x1) + rng.uniform(-30, 30)
                halves = [shapely.box(x0 - 1, y0 - 1, xm - 3, y1 + 1),
                          shapely.box(xm + 3, y0 - 1, x1 + 1, y1 + 1)]
                parts = [poly.intersection(h) for h in halves]
            else:
                parts = [poly]
            for k, p in enumerate(parts):
                geoms.append(shapely.transform(p, lambda xy: xy + [X0, Y0]))
                ids.append(f"D{i:02d}{j:02d}" + ("" if len(parts) == 1 else "ab"[k]))
    return gpd.GeoDataFrame({"field_id": ids}, geometry=geoms, crs=CRS_LOCAL)


def soil_map(rng):
    """Voronoi cells of 40 random seeds over the district, each an invented soil unit;
    the north-east corner (beyond x + y > 7600 m) is not mapped."""
    extent = shapely.box(-100, -100, 4600, 4600)
    seeds = shapely.MultiPoint(rng.uniform(0, 4500, size=(40, 2)))
    cells = shapely.get_parts(shapely.voronoi_polygons(seeds, extend_to=extent))
    cells = shapely.intersection(cells, extent)
    mapped = shapely.Polygon([(-100, -100), (4600, -100), (4600, 3000), (3000, 4600),
                              (-100, 4600)])
    cells = shapely.intersection(cells, mapped)
    keep = ~shapely.is_empty(cells)
    cells = cells[keep]
    n = cells.size
    k = np.round(np.exp(rng.normal(np.log(0.6), 0.8, n)), 3)        # m/d
    barrier = np.round(rng.uniform(2.0, 6.5, n), 2)                  # m
    porosity = np.round(np.clip(0.03 + 0.04 * np.log10(k / 0.05), 0.02, 0.15), 3)
    names = [f"Unit {chr(65 + i // 10)}{i % 10}" for i in range(n)]
    geoms = [shapely.transform(c, lambda xy: xy + [X0, Y0]) for c in cells]
    return gpd.GeoDataFrame({"soil_unit": names, "k_m_d": k, "barrier_m": barrier,
                             "porosity": porosity}, geometry=geoms, crs=CRS_LOCAL)


def main():
    rng = np.random.default_rng(SEED)
    HERE.mkdir(exist_ok=True)
    for name, gdf in (("fields", fields(rng)), ("soil", soil_map(rng))):
        out = gdf.to_crs("EPSG:4326")
        out.geometry = shapely.set_precision(out.geometry.values, 1e-7)
        path = HERE / f"{name}.geojson"
        path.unlink(missing_ok=True)
        out.to_file(path, driver="GeoJSON", engine="pyogrio", COORDINATE_PRECISION=7)
        print(f"wrote {path} ({len(out)} features)")


if __name__ == "__main__":
    main()
