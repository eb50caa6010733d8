"""Build the invented demo farm (run once; the outputs are committed).

Everything here is invented: the farm, its fields, the well, the pond, the
hedge, the outlet ditch and the survey points. Coordinates are laid out in a local metric frame
and placed in UTM zone 15N only so that the files carry real-looking
longitude/latitude; no real property, owner or survey is represented.

    python demo_fields/make_demo.py
"""

from pathlib import Path

import geopandas as gpd
import numpy as np
import shapely

HERE = Path(__file__).parent
CRS_LOCAL = "EPSG:32615"            # UTM 15N, metres
X0, Y0 = 381_000.0, 4_731_000.0     # origin of the invented farm


def P(coords):
    return shapely.Polygon([(X0 + x, Y0 + y) for x, y in coords])


def main():
    fields = gpd.GeoDataFrame({
        "field_id": ["NF", "CB", "HF"],
        "name": ["North Forty", "Creek Bend", "Home Field"],
    }, geometry=[
        P([(0, 420), (390, 440), (410, 820), (20, 800)]),                       # ~15.5 ha
        P([(430, 450), (900, 430), (940, 760), (700, 700), (620, 840), (450, 830)]),
        P([(0, 0), (520, 0), (520, 380), (0, 380)]).difference(
            P([(60, 260), (180, 260), (180, 350), (60, 350)])),                 # farmstead hole
    ], crs=CRS_LOCAL)
    exclusions = gpd.GeoDataFrame({
        "kind": ["well", "pond", "hedge"],
        "setback_m": [30.0, 10.0, 5.0],
    }, geometry=[
        shapely.Point(X0 + 220, Y0 + 300),
        P([(700, 520), (780, 510), (800, 580), (720, 600)]),
        shapely.LineString([(X0 + 415, Y0 + 440), (X0 + 425, Y0 + 830)]),
    ], crs=CRS_LOCAL)
    outlet = gpd.GeoDataFrame({"kind": ["outlet ditch"]},
                              geometry=[shapely.Point(X0 - 15, Y0 - 10)], crs=CRS_LOCAL)
    for name, gdf in (("fields", fields), ("exclusions", exclusions), ("outlet", outlet)):
        out = gdf.to_crs("EPSG:4326")
        out.geometry = shapely.set_precision(out.geometry.values, 1e-7)
        path = HERE / f"{name}.geojson"
        path.unlink(missing_ok=True)
        out.to_file(path, driver="GeoJSON", engine="pyogrio", COORDINATE_PRECISION=7)
    # survey: a gentle invented surface falling 0.3-0.6 % towards the outlet corner
    gx, gy = np.meshgrid(np.arange(-40.0, 981.0, 40.0), np.arange(-40.0, 881.0, 40.0))
    gx, gy = gx.ravel(), gy.ravel()
    z = (301.0 + 0.0035 * gx + 0.0045 * gy + 0.25 * np.sin(gx / 170.0) * np.cos(gy / 230.0))
    pts = gpd.GeoSeries(shapely.points(X0 + gx, Y0 + gy), crs=CRS_LOCAL).to_crs("EPSG:4326")
    with open(HERE / "survey.csv", "w", encoding="utf-8") as fh:
        fh.write("lon,lat,z\n")
        for p, zz in zip(pts, z):
            fh.write(f"{p.x:.7f},{p.y:.7f},{zz:.3f}\n")
    lon, lat = outlet.to_crs("EPSG:4326").geometry.iloc[0].coords[0]
    print(f"outlet: {lon:.7f},{lat:.7f}")


if __name__ == "__main__":
    main()
