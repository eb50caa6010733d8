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

    def col(df, name):
        return df[name].tolist() if name in df.columns else [None] * len(df)

    def to_of(v):
        return str(v) if v is not None and str(v) not in ("", "nan", "None") else None

    sm = fr.get("submains")
    if sm is not None and len(sm):
        for cid, fid, g, to in zip(col(sm, "submain_id"), col(sm, "field_id"), sm.geometry,
                                   col(sm, "to_id")):
            out.append(Carrier(str(cid), "submain", str(fid), _line(g), to_of(to)))
    mains = fr["mains"]
    lines = [_line(g) for g in mains.geometry]
    # the outlet point (if any) within 1 m of each main's end, the first given
    own = [None] * len(lines)
    if recv and lines:
        ends = shapely.points([ln.coords[-1] for ln in lines])
        for oid, xy in recv.items():
            near = shapely.distance(ends, shapely.Point(xy)) < 1.0
            for k in np.flatnonzero(near):
                if own[k] is None:
                    own[k] = oid
    has_id = "main_id" in mains.columns
    for k, (fid, mid, to) in enumerate(zip(col(mains, "field_id"), col(mains, "main_id"),
                                           col(mains, "to_id"))):
        fid = str(fid)
        cid = str(mid) if has_id else f"{fid}-M"
        to = to_of(to)
        out.append(Carrier(cid, "main", fid, lines[k], to,
                           (own[k] or f"{fid} main end") if to is None else ""))
    tr = fr.get("trunk")
    if tr is not None and len(tr):
        for cid, g, to, oid in zip(col(tr, "trunk_id"), tr.geometry, col(tr, "to_id"),
                                   col(tr, "outlet_id")):
            out.append(Carrier(str(cid), "trunk", "", _line(g), to_of(to), str(oid or "O1")))
    return out


def _runs(lat, con, carriers, spacing):
    """Lateral runs from the layout's pieces and connectors (one per lateral id).

    A run goes from the point of its pieces farthest from where it joins to the
    nearest point of its carrier (for a lateral draining at its own end: to its first
    point). All runs are built together with shapely's array functions."""
    import shapely

    base = lat["lateral_id"].astype(str).str.replace(r"\.\d+$", "", regex=True).to_numpy()
    fid = lat["field_id"].astype(str).to_numpy()
    to_col = lat["to_id"].astype(str).to_numpy() if "to_id" in lat.columns else None
    ids, first, gi = np.unique(base, return_index=True, return_inverse=True)  # sorted ids
    ng = len(ids)
    perf = np.zeros(ng)
    for k, length in enumerate(lat["length_m"].to_numpy(float)):   # in order, as summed
        perf[gi[k]] += length
    geoms = list(lat.geometry)
    owner = list(gi)
    conl = np.zeros(ng)
    if con is not None and len(con) and "lateral_id" in con.columns:
        where = {rid: k for k, rid in enumerate(ids)}
        for rid, g in zip(con["lateral_id"].astype(str), con.geometry):
            k = where.get(rid)
            if k is not None:
                geoms.append(g)
                owner.append(k)
                conl[k] += float(g.length)
    owner = np.asarray(owner, np.int64)
    o = np.argsort(owner, kind="stable")          # each run's pieces, then connectors
    pts, which = shapely.get_coordinates(np.asarray(geoms, dtype=object)[o],
                                         return_index=True)
    pown = owner[o][which]
    pstart = np.searchsorted(pown, np.arange(ng))
    to = []
    for k in range(ng):
        t = to_col[first[k]] if to_col is not None else f"{fid[first[k]]}-M"
        to.append(None if t in ("", "nan", "None") or t not in carriers else t)
    has = np.array([t is not None for t in to], bool)
    j = pts[pstart].copy()                        # draining at its own end: first point
    if np.any(has):
        lines = np.array([carriers[t].line if t is not None else None for t in to],
                         dtype=object)
        d = np.full(len(pts), np.inf)
        sel = has[pown]
        d[sel] = shapely.distance(shapely.points(pts[sel]), lines[pown[sel]])
        near = _first_min(d, pstart)
        ln = lines[has]
        j[has] = shapely.get_coordinates(shapely.line_interpolate_point(
            ln, shapely.line_locate_point(ln, shapely.points(pts[near[has]]))))
    far = _first_min(-np.hypot(*(pts - j[pown]).T), pstart)
    run_lines = shapely.linestrings(np.stack([pts[far], j], axis=1))
    return [LateralRun(ids[k], fid[first[k]], run_lines[k], float(perf[k]), spacing, to[k],
                       float(conl[k])) for k in range(ng)]


def _first_min(values, starts):
    """Per group (groups start at ``starts``, in order), the index of its first
    smallest value (as ``argmin``)."""
    m = np.minimum.reduceat(values, starts)
    hit = np.flatnonzero(values == np.repeat(m, np.diff(np.r_[starts, len(values)])))
    return hit[np.searchsorted(hit, starts)]


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
    geoms = _pieces([carriers[r["carrier_id"]].line for r in car_rows],
                    np.array([r["chainage_m"] for r in car_rows], float).reshape(-1, 2),
                    substring)
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


def _pieces(lines, ab, substring):
    """The stretch from chainage a to b of each line (a < b), as
    ``shapely.ops.substring`` cuts it, for all lines at once: the points at a and b and
    the vertices strictly between them (vertex chainages summed along the line as
    there)."""
    import shapely

    n = len(lines)
    if not n:
        return []
    line_arr = np.asarray(lines, dtype=object)
    ok = (ab[:, 0] < ab[:, 1]) & (ab[:, 0] >= 0) & \
        np.array([g is not None and g.geom_type == "LineString" for g in lines], bool)
    out = np.empty(n, dtype=object)
    for i in np.flatnonzero(~ok):                 # anything unusual: shapely itself
        out[i] = substring(lines[i], ab[i, 0], ab[i, 1])
    k = np.flatnonzero(ok)
    if not k.size:
        return list(out)
    p0 = shapely.get_coordinates(shapely.line_interpolate_point(line_arr[k], ab[k, 0]))
    p1 = shapely.get_coordinates(shapely.line_interpolate_point(line_arr[k], ab[k, 1]))
    # vertices of each distinct line, with their chainages
    uniq, inv = np.unique(np.array([id(g) for g in line_arr[k]]), return_inverse=True)
    first = np.zeros(len(uniq), np.int64)
    first[inv[::-1]] = np.arange(len(k))[::-1]
    xy, which = shapely.get_coordinates(line_arr[k][first], return_index=True)
    vstart = np.searchsorted(which, np.arange(len(uniq)))
    vcount = np.diff(np.r_[vstart, len(xy)])
    # segment lengths as substring computes them, in Python floats (its ** 0.5 is the
    # C library's pow, which numpy's vectorised power may round differently)
    pl = xy.tolist()
    step = np.array([0.0] + [((q[0] - p[0]) ** 2 + (q[1] - p[1]) ** 2) ** 0.5
                             for p, q in zip(pl[:-1], pl[1:])])
    step[vstart] = 0.0
    cum = np.empty(len(xy))
    for u in range(len(uniq)):                    # a running sum per line, in order
        a, b = vstart[u], vstart[u] + vcount[u]
        cum[a:b] = np.cumsum(step[a:b])
    lo = np.empty(len(k), np.int64)
    hi = np.empty(len(k), np.int64)
    o = np.argsort(inv, kind="stable")
    cuts = np.searchsorted(inv[o], np.arange(len(uniq) + 1))
    for u in range(len(uniq)):                    # vertices strictly inside (a, b)
        r = o[cuts[u]:cuts[u + 1]]
        a, b = vstart[u], vstart[u] + vcount[u] - 1          # never the last vertex
        lo[r] = a + np.searchsorted(cum[a:b], ab[k[r], 0], side="right")
        hi[r] = a + np.searchsorted(cum[a:b], ab[k[r], 1], side="left")
    mid = np.maximum(hi - lo, 0)
    cnt = mid + 2
    idx = np.repeat(np.arange(len(k)), cnt)
    pos = np.arange(int(cnt.sum())) - np.repeat(np.r_[0, np.cumsum(cnt)[:-1]], cnt)
    coords = np.empty((len(idx), 2))
    is0, is1 = pos == 0, pos == np.repeat(cnt - 1, cnt)
    coords[is0] = p0
    coords[is1] = p1
    inner = ~is0 & ~is1
    coords[inner] = xy[(np.repeat(lo, cnt) + pos - 1)[inner]]
    out[k] = shapely.linestrings(coords, indices=idx)
    return list(out)


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
