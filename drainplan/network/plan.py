"""Pipe design as a job: a layout GeoPackage and elevations in, a pipe schedule,
a quantity take-off and attributed layers out."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .design import Carrier, LateralRun, PipeDesign, PipeOptions, design_network

__all__ = ["PipesInputs", "PipesPlan", "plan_pipes", "pipes_from_layers", "SCHEDULE_COLUMNS",
           "schedule_csv", "schedule_headings"]

SCHEDULE_COLUMNS = ["reach_id", "kind", "field_id", "from", "to", "length_m", "drained_area_ha",
                    "flow_l_s", "grade", "material", "size", "inner_diameter_mm",
                    "capacity_l_s", "velocity_m_s", "capacity_used_pct", "invert_up_m",
                    "invert_down_m", "cover_min_m", "usable_capacity_pct", "manning_n",
                    "warnings"]


def schedule_headings(capacity_factor):
    """Column headings of the schedule CSV: the column names, with the usable share of
    the full capacity stated where it applies."""
    pct = f"{capacity_factor:.0%}"
    return {c: c for c in SCHEDULE_COLUMNS} | {
        "capacity_l_s": f"capacity_l_s (usable capacity, {pct} of full)",
        "capacity_used_pct": f"capacity_used_pct (of the usable {pct})"}


@dataclass
class PipesInputs:
    layout_path: str | None
    options: PipeOptions
    survey_path: str | None = None
    survey_crs: str | None = None
    survey_z_unit: str = "m"
    dem_path: str | None = None


@dataclass
class PipesPlan:
    design: PipeDesign
    layers: dict
    work_crs: object
    out_crs: object


def plan_pipes(inp: PipesInputs) -> PipesPlan:
    """Read a layout GeoPackage, build the network and design the pipes."""
    import geopandas as gpd
    import pyogrio
    from pyproj import CRS

    from ..gisio import read_layer

    try:
        layers = {row[0] for row in pyogrio.list_layers(inp.layout_path)}
    except Exception:
        raise InputError(f"cannot read {inp.layout_path} as a GeoPackage layout",
                         param="layout") from None
    needed = {"field", "laterals", "mains"}
    if not needed <= layers:
        raise InputError(f"{inp.layout_path} is not a drainplan layout (layers "
                         f"{', '.join(sorted(needed - layers))} missing; make one with "
                         "drainplan layout)", param="layout")
    fld, fcrs = read_layer(inp.layout_path, layer="field", what="layout", option="layout")
    work_crs = CRS.from_user_input(fld["work_crs"].iloc[0]) if "work_crs" in fld.columns \
        else fld.estimate_utm_crs()
    frames = {name: gpd.read_file(inp.layout_path, layer=name, engine="pyogrio")
              for name in ("field", "laterals", "connectors", "submains", "mains", "trunk",
                           "outlets")
              if name in layers}
    if len(frames["laterals"]) == 0:
        raise InputError(f"{inp.layout_path} holds no laterals", param="layout")
    return pipes_from_layers(frames, work_crs, fcrs, inp)


def pipes_from_layers(frames, work_crs, out_crs, inp):
    """Design the pipes of layout layers (GeoDataFrames in any CRS)."""
    from ..gisio import read_dem, read_survey
    from ..terrain import PointSurface, RasterSurface, check_coverage

    if inp.survey_path and inp.dem_path:
        raise InputError("give either a survey or a DEM, not both", param="survey")
    fr = {k: v.to_crs(work_crs) for k, v in frames.items() if v is not None}
    fld, lat = fr["field"], fr["laterals"]
    if len(lat) == 0:
        raise InputError("the layout holds no laterals", param="layout")
    con, outlets = fr.get("connectors"), fr.get("outlets")
    spacing = float(lat["spacing_m"].iloc[0])
    recv = {}
    if outlets is not None and "kind" in outlets.columns:
        given = outlets[outlets["kind"].astype(str).str.contains("outlet \\(|network outlet",
                                                                 regex=True)]
        for oid, g in zip(given["field_id"].astype(str), given.geometry):
            recv[oid or "O1"] = tuple(g.coords[0])
    carriers = _carriers(fr, recv)
    runs = _runs(lat, con, {c.carrier_id: c for c in carriers}, spacing)
    surface = None
    if inp.survey_path:
        xy, z = read_survey(inp.survey_path, crs=inp.survey_crs or work_crs,
                            z_unit=inp.survey_z_unit, work_crs=work_crs)
        surface = PointSurface(xy, z)
    elif inp.dem_path:
        surface = RasterSurface(*read_dem(inp.dem_path, work_crs))
    if surface is not None:
        check_coverage(surface, list(fld.geometry), list(fld["field_id"].astype(str)))
    design = design_network(runs, carriers, inp.options, surface=surface, outlets=recv)
    out_layers = _layers(design, runs, {c.carrier_id: c for c in carriers}, work_crs, out_crs)
    return PipesPlan(design, out_layers, work_crs, out_crs)


def _line(g):
    import shapely

    if g is not None and g.geom_type == "MultiLineString":
        g = shapely.line_merge(g)
        if g.geom_type == "MultiLineString":
            g = max(g.geoms, key=lambda x: x.length)
    return g


def _carriers(fr, recv):
    """Sub-mains, mains and trunk segments of the layout layers, with where each drains."""
    import shapely

    out = []

    def to_of(row):
        v = row.get("to_id")
        return str(v) if v is not None and str(v) not in ("", "nan", "None") else None

    def own_outlet(line, default):
        end = shapely.Point(line.coords[-1])
        for oid, xy in recv.items():
            if end.distance(shapely.Point(xy)) < 1.0:
                return oid
        return default

    sm = fr.get("submains")
    if sm is not None and len(sm):
        for _, r in sm.iterrows():
            out.append(Carrier(str(r["submain_id"]), "submain", str(r["field_id"]),
                               _line(r.geometry), to_of(r)))
    for _, r in fr["mains"].iterrows():
        fid = str(r["field_id"])
        line = _line(r.geometry)
        cid = str(r["main_id"]) if "main_id" in r else f"{fid}-M"
        to = to_of(r)
        out.append(Carrier(cid, "main", fid, line, to,
                           own_outlet(line, f"{fid} main end") if to is None else ""))
    tr = fr.get("trunk")
    if tr is not None and len(tr):
        for _, r in tr.iterrows():
            out.append(Carrier(str(r["trunk_id"]), "trunk", "", _line(r.geometry), to_of(r),
                               str(r.get("outlet_id") or "O1")))
    return out


def _runs(lat, con, carriers, spacing):
    """Lateral runs from the layout's pieces and connectors (one per lateral id)."""
    import shapely

    base = lat["lateral_id"].astype(str).str.replace(r"\.\d+$", "", regex=True)
    to_col = lat["to_id"].astype(str) if "to_id" in lat.columns else None
    groups = {}
    for k, (rid, fid, g, length) in enumerate(zip(base, lat["field_id"].astype(str),
                                                  lat.geometry, lat["length_m"])):
        e = groups.setdefault(rid, {"field": fid, "geoms": [], "perf": 0.0, "con": 0.0,
                                    "to": to_col.iloc[k] if to_col is not None else None})
        e["geoms"].append(g)
        e["perf"] += float(length)
    if con is not None and len(con) and "lateral_id" in con.columns:
        for rid, g in zip(con["lateral_id"].astype(str), con.geometry):
            if rid in groups:
                groups[rid]["geoms"].append(g)
                groups[rid]["con"] += float(g.length)
    runs = []
    for rid in sorted(groups):
        e = groups[rid]
        to = e["to"]
        if to is None:                               # a layout without to_id
            to = f"{e['field']}-M"
        if to in ("", "nan", "None") or to not in carriers:
            to = None
        pts = shapely.get_coordinates(np.array(e["geoms"], dtype=object))
        if to is None:
            # single-junction field: the lateral drains to its own end nearest the outlet
            j = pts[0]
        else:
            line = carriers[to].line
            d = shapely.distance(shapely.points(pts), line)
            j = pts[int(np.argmin(d))]
            j = np.asarray(line.interpolate(line.project(shapely.Point(j))).coords[0])
        far = pts[int(np.argmax(np.hypot(*(pts - j).T)))]
        runs.append(LateralRun(rid, e["field"], shapely.LineString([far, j]), e["perf"],
                               spacing, to, e["con"]))
    return runs


def _layers(design, runs, carriers, work_crs, out_crs):
    import geopandas as gpd
    import shapely
    from shapely.ops import substring

    by_id = {r["reach_id"]: r for r in design.reaches}
    cols = [c for c in SCHEDULE_COLUMNS if c not in ("kind",)]

    def attrs(rows, extra=()):
        return {c: [r.get(c) for r in rows] for c in list(cols) + list(extra)}

    lat_rows = [by_id[r.run_id] for r in runs]
    lat = gpd.GeoDataFrame(attrs(lat_rows), geometry=[r.line for r in runs], crs=work_crs)
    car_rows = [r for r in design.reaches if r["kind"] != "lateral"]
    geoms = []
    for r in car_rows:
        a, b = r["chainage_m"]
        geoms.append(substring(carriers[r["carrier_id"]].line, a, b))
    mn = gpd.GeoDataFrame(attrs(car_rows, ("kind", "carrier_id")), geometry=geoms,
                          crs=work_crs)
    viol = [v for v in design.violations if v["x"] is not None and np.isfinite(v["x"])]
    vl = gpd.GeoDataFrame({k: [v[k] for v in viol] for k in
                           ("kind", "reach_id", "chainage_m", "problem", "fix")},
                          geometry=[shapely.Point(v["x"], v["y"]) for v in viol], crs=work_crs)
    out = {"lateral_pipes": lat, "main_reaches": mn, "pipe_warnings": vl}
    if out_crs != work_crs:
        out = {k: v.to_crs(out_crs) for k, v in out.items()}
    return out


def schedule_csv(design):
    """The pipe schedule as CSV text (one row per reach, SCHEDULE_COLUMNS)."""
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=SCHEDULE_COLUMNS, extrasaction="ignore",
                       lineterminator="\n")
    w.writeheader()
    for r in design.reaches:
        w.writerow({k: _fmt(r.get(k)) for k in SCHEDULE_COLUMNS})
    return buf.getvalue()


def _fmt(v):
    if v is None:
        return ""
    if isinstance(v, float):
        return f"{v:.6g}" if abs(v) < 1e-2 else f"{v:.4f}".rstrip("0").rstrip(".")
    return v
