"""Build the invented contractor's proposal for the demo farm (run once; outputs committed).

Everything here is invented: the contractor, the bid and the lines. The laterals
are drainplan's own layout of the demo fields at 13 m (16 m in Creek Bend, where
the invented contractor saves pipe), with every vertex moved by a seeded random
offset of a few decimetres as a GPS survey of an installed system would show.
The mains carry the sizes of the invented bid.

    python demo_fields/make_proposal.py
"""

from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from drainplan.geometry.layout import LayoutOptions
from drainplan.layout_plan import LayoutInputs, plan_layout

HERE = Path(__file__).parent
SEED = 20261202
MAIN_SIZES = {"NF": "10 in", "CB": "10 in", "HF": "8 in"}     # the invented bid


def _layout(spacing):
    opts = LayoutOptions(spacing=spacing, direction="auto", setback=6.0, min_length=10.0)
    return plan_layout(LayoutInputs(
        fields_path=str(HERE / "fields.geojson"), options=opts, id_field="field_id",
        exclude_path=str(HERE / "exclusions.geojson"), exclude_setback=15.0,
        outlet=str(HERE / "outlet.geojson"), keep_metric_crs=True))


def _jitter(geoms, rng, sd=0.25):
    out = []
    for g in geoms:
        xy = shapely.get_coordinates(g)
        out.append(shapely.LineString(xy + rng.normal(0.0, sd, xy.shape)))
    return out


def main():
    rng = np.random.default_rng(SEED)
    narrow, wide = _layout(13.0), _layout(16.0)
    parts = []
    for lp, fields in ((narrow, ("NF", "HF")), (wide, ("CB",))):
        lat = lp.layers["laterals"].copy()
        unc = lp.layers["unconnected"]
        con = lp.layers["connectors"]
        # as laid, a lateral runs on to the main as one line (its connector included)
        joined = {}
        for rid, g in zip(con["lateral_id"], con.geometry):
            joined.setdefault(rid, []).append(g)
        base = lat["lateral_id"].str.replace(r"\.\d+$", "", regex=True)
        rows = []
        for rid in dict.fromkeys(base):
            pieces = list(lat.geometry[base == rid])
            merged = shapely.line_merge(shapely.union_all(pieces + joined.get(rid, [])))
            fid = lat["field_id"][base == rid].iloc[0]
            if merged.geom_type == "LineString":
                rows.append((rid, fid, merged))
            else:
                rows += [(f"{rid}.{k + 1}" if k else rid, fid, g) for k, g in enumerate(pieces)]
        lat = gpd.GeoDataFrame({"lateral_id": [r[0] for r in rows],
                                "field_id": [r[1] for r in rows]},
                               geometry=[r[2] for r in rows], crs=lat.crs)
        for fid in fields:
            sel = lat[lat["field_id"] == fid]
            parts.append(gpd.GeoDataFrame({
                "line_id": list(sel["lateral_id"]), "kind": "lateral", "size": "4 in",
                "crew_note": "installed, GPS survey (invented)"},
                geometry=_jitter(sel.geometry, rng), crs=lat.crs))
            su = unc[unc["field_id"] == fid]
            if len(su):
                parts.append(gpd.GeoDataFrame({
                    "line_id": [f"{fid}-X{i + 1:02d}" for i in range(len(su))],
                    "kind": "lateral", "size": "4 in",
                    "crew_note": "beyond the farmstead; sub-main not yet laid (invented)"},
                    geometry=_jitter(su.geometry, rng), crs=lat.crs))
            mains = lp.layers["mains"]
            m = mains[mains["field_id"] == fid]
            parts.append(gpd.GeoDataFrame({
                "line_id": [f"{fid}-M"], "kind": "main", "size": MAIN_SIZES[fid],
                "crew_note": "collector main (invented)"}, geometry=list(m.geometry),
                crs=lat.crs))
    out = gpd.GeoDataFrame(pd.concat(parts, ignore_index=True), crs=parts[0].crs)
    out = out.to_crs("EPSG:4326")
    out["geometry"] = shapely.set_precision(out.geometry.values, 1e-7)
    target = HERE / "proposal.geojson"
    if target.exists():
        target.unlink()
    out.to_file(target, driver="GeoJSON", engine="pyogrio", COORDINATE_PRECISION=7)
    print(f"wrote {target} ({len(out)} lines)")


if __name__ == "__main__":
    main()
