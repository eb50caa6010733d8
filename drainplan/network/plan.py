"""Pipe design as a job: a layout GeoPackage and elevations in, a pipe schedule,
a quantity take-off and attributed layers out."""

from __future__ import annotations

import csv
import io
from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from .design import LateralRun, PipeDesign, PipeOptions, design_pipes

__all__ = ["PipesInputs", "PipesPlan", "plan_pipes", "pipes_from_layers", "SCHEDULE_COLUMNS",
           "schedule_csv"]

SCHEDULE_COLUMNS = ["reach_id", "kind", "field_id", "from", "to", "length_m", "drained_area_ha",
                    "flow_l_s", "grade", "material", "size", "inner_diameter_mm",
                    "capacity_l_s", "velocity_m_s", "capacity_used_pct", "invert_up_m",
                    "invert_down_m", "cover_min_m", "warnings"]


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
              for name in ("field", "laterals", "connectors", "mains", "outlets")
              if name in layers}
    if len(frames["laterals"]) == 0:
        raise InputError(f"{inp.layout_path} holds no laterals", param="layout")
    return pipes_from_layers(frames, work_crs, fcrs, inp)


def pipes_from_layers(frames, work_crs, out_crs, inp):
    """Design the pipes of layout layers (GeoDataFrames in any CRS)."""
    import shapely

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
    mains = {}
    for _, r in fr["mains"].iterrows():
        g = r.geometry
        if g.geom_type == "MultiLineString":
            g = shapely.line_merge(g)
        mains[str(r["field_id"])] = g
    runs = _runs(lat, con, mains, spacing)
    surface = None
    if inp.survey_path:
        xy, z = read_survey(inp.survey_path, crs=inp.survey_crs or work_crs,
                            z_unit=inp.survey_z_unit, work_crs=work_crs)
        surface = PointSurface(xy, z)
    elif inp.dem_path:
        surface = RasterSurface(*read_dem(inp.dem_path, work_crs))
    if surface is not None:
        check_coverage(surface, list(fld.geometry), list(fld["field_id"].astype(str)))
    recv = None
    if outlets is not None and "kind" in outlets.columns:
        given = outlets[outlets["kind"].astype(str).str.startswith("receiving")]
        if len(given):
            recv = tuple(given.geometry.iloc[0].coords[0])
    design = design_pipes(runs, mains, inp.options, surface=surface, receiving_outlet=recv)
    out_layers = _layers(design, runs, mains, work_crs, out_crs)
    return PipesPlan(design, out_layers, work_crs, out_crs)


def _runs(lat, con, mains, spacing):
    """Lateral runs from the layout's pieces and connectors (one per lateral id)."""
    import shapely

    base = lat["lateral_id"].astype(str).str.replace(r"\.\d+$", "", regex=True)
    runs = []
    groups = {}
    for rid, fid, g, length in zip(base, lat["field_id"].astype(str), lat.geometry,
                                   lat["length_m"]):
        e = groups.setdefault(rid, {"field": fid, "geoms": [], "perf": 0.0})
        e["geoms"].append(g)
        e["perf"] += float(length)
    if con is not None and len(con) and "lateral_id" in con.columns:
        for rid, g in zip(con["lateral_id"].astype(str), con.geometry):
            if rid in groups:
                groups[rid]["geoms"].append(g)
    for rid in sorted(groups):
        e = groups[rid]
        main = mains.get(e["field"])
        pts = shapely.get_coordinates(np.array(e["geoms"], dtype=object))
        if main is None:
            # single-junction field: the lateral drains to its own end nearest the outlet
            j = pts[0]
        else:
            d = shapely.distance(shapely.points(pts), main)
            j = pts[int(np.argmin(d))]
            j = np.asarray(main.interpolate(main.project(shapely.Point(j))).coords[0])
        far = pts[int(np.argmax(np.hypot(*(pts - j).T)))]
        runs.append(LateralRun(rid, e["field"], shapely.LineString([far, j]), e["perf"],
                               spacing))
    return runs


def _layers(design, runs, mains, work_crs, out_crs):
    import geopandas as gpd
    import shapely
    from shapely.ops import substring

    by_id = {r["reach_id"]: r for r in design.reaches}
    cols = [c for c in SCHEDULE_COLUMNS if c not in ("kind",)]

    def attrs(rows):
        return {c: [r.get(c) for r in rows] for c in cols}

    lat_rows = [by_id[r.run_id] for r in runs]
    lat = gpd.GeoDataFrame(attrs(lat_rows), geometry=[r.line for r in runs], crs=work_crs)
    main_rows = [r for r in design.reaches if r["kind"] == "main"]
    geoms = []
    for r in main_rows:
        a, b = r["main_chainage_m"]
        geoms.append(substring(mains[r["field_id"]], a, b))
    mn = gpd.GeoDataFrame(attrs(main_rows), geometry=geoms, crs=work_crs)
    viol = [v for v in design.violations if v["x"] is not None and np.isfinite(v["x"])]
    vl = gpd.GeoDataFrame({k: [v[k] for v in viol] for k in
                           ("reach_id", "chainage_m", "problem", "fix")},
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
