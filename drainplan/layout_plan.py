"""Field layout as a job: files in, GIS layers and quantities out.

Reads the field boundaries (and exclusions, a user main) through
:mod:`drainplan.gisio`, lays out in a metric CRS with
:mod:`drainplan.geometry.layout`, and returns GeoDataFrames in the output CRS
together with per-field quantities, totals and the notes a reviewer should see.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import InputError
from .geometry.fields import check_fields
from .geometry.layout import Layout, LayoutOptions, layout_fields

__all__ = ["LayoutInputs", "LayoutPlan", "plan_layout", "LAYER_NAMES"]

LAYER_NAMES = ("field", "laterals", "connectors", "submains", "junctions", "mains", "trunk",
               "outlets", "exclusions", "unconnected")
_ID_CANDIDATES = ("field_id", "id", "name", "field", "fid_name")


@dataclass
class LayoutInputs:
    """Everything :func:`plan_layout` needs (lengths in metres)."""

    fields_path: str
    options: LayoutOptions
    layer: str | None = None
    id_field: str | None = None
    crs: str | None = None
    work_crs: str | None = None
    keep_metric_crs: bool = False
    exclude_path: str | None = None
    exclude_layer: str | None = None
    exclude_setback: float = 15.0
    exclude_setback_field: str = "setback_m"
    outlet: object = None                # (x, y) in the fields file's CRS, or a point file
    main_path: str | None = None
    repair: bool = False
    survey_path: str | None = None       # elevations: 'auto' runs laterals across the slope
    survey_crs: str | None = None
    survey_z_unit: str = "m"
    dem_path: str | None = None          # a DEM instead of survey points


@dataclass
class LayoutPlan:
    """Result of :func:`plan_layout`."""

    layers: dict
    per_field: list
    totals: dict
    notes: list
    reports: list
    work_crs: object
    out_crs: object
    layout: Layout
    fields_metric: object = field(repr=False, default=None)
    exclusions_metric: object = field(repr=False, default=None)


def _field_ids(gdf, id_field, notes=None):
    """Each field's id, from ``id_field`` or the first usual id attribute; the line
    saying which was used goes to ``notes``."""
    notes = [] if notes is None else notes
    if id_field is not None:
        if id_field not in gdf.columns:
            cols = ", ".join(c for c in gdf.columns if c != "geometry")
            raise InputError(f"attribute {id_field!r} not found in the fields file; "
                             f"attributes: {cols or 'none'}", param="id_field")
        ids = [str(v) for v in gdf[id_field]]
        notes.append(f"field ids from attribute {id_field!r}")
    else:
        col = next((c for c in _ID_CANDIDATES if c in gdf.columns), None)
        ids = [str(v) for v in gdf[col]] if col else [f"F{i + 1}" for i in range(len(gdf))]
        notes.append(f"field ids from attribute {col!r}" if col else
                     "no id attribute (" + ", ".join(_ID_CANDIDATES) + ") in the fields file: "
                     f"fields numbered F1..F{len(gdf)} in file order (choose one with "
                     "--id-field)")
    if len(set(ids)) != len(ids):          # make repeated ids unique: A, A-2, A-3
        notes.append("repeated field ids made unique with -2, -3, ...")
        seen = {}
        unique = []
        for v in ids:
            seen[v] = seen.get(v, 0) + 1
            unique.append(v if seen[v] == 1 else f"{v}-{seen[v]}")
        ids = unique
    return ids


def plan_layout(inp: LayoutInputs) -> LayoutPlan:
    """Read, lay out and assemble the layers of a field layout.

    Raises
    ------
    InputError, GeometryError
        With a one-line message naming the input.
    """
    import geopandas as gpd
    import shapely

    from .gisio import read_layer, to_metric

    src, file_crs = read_layer(inp.fields_path, layer=inp.layer, crs=inp.crs,
                               what="fields", option="fields")
    if len(src) == 0:
        raise InputError(f"fields file {inp.fields_path} holds no features", param="fields")
    input_notes = []
    ids = _field_ids(src, inp.id_field, input_notes)
    metric, work_crs = to_metric(src, file_crs, inp.work_crs, notes=input_notes)
    geoms, reports = check_fields(metric.geometry.values, ids, repair=inp.repair)
    if all(g is None for g in geoms):
        raise InputError("no usable field in the fields file (" + "; ".join(reports) + ")",
                         param="fields")
    reports = input_notes + reports + _input_checks(geoms, ids, inp.options)

    ex_geoms = ex_setbacks = None
    ex_metric = None
    if inp.exclude_path is not None:
        ex_src, ex_crs = read_layer(inp.exclude_path, layer=inp.exclude_layer,
                                    crs=inp.crs, what="exclusions", option="exclude")
        ex_metric = ex_src.to_crs(work_crs)
        ex_geoms = ex_metric.geometry.values
        if inp.exclude_setback_field in ex_metric.columns:
            import pandas as pd

            sb = pd.to_numeric(ex_metric[inp.exclude_setback_field], errors="coerce")
            bad = sb.isna() & ex_metric[inp.exclude_setback_field].notna()
            if bad.any():
                raise InputError(f"exclusion attribute {inp.exclude_setback_field!r} holds "
                                 f"a value that is not a number of metres: "
                                 f"{ex_metric[inp.exclude_setback_field][bad].iloc[0]!r}",
                                 param="exclude")
            sb = np.where(np.isfinite(sb.to_numpy(float)), sb.to_numpy(float),
                          inp.exclude_setback)
        else:
            sb = np.full(len(ex_metric), inp.exclude_setback)
        if np.any(sb < 0):
            raise InputError("exclusion setbacks must be 0 m or more", param="exclude_setback")
        ex_setbacks = sb

    outlet_pts = np.empty((0, 2))          # outlet points given, working CRS
    if isinstance(inp.outlet, (str, Path)):
        pts, pts_crs = read_layer(inp.outlet, crs=inp.crs, what="outlet", option="outlet")
        points = [g for g in pts.geometry if g is not None and g.geom_type == "Point"]
        if not points:
            raise InputError(f"outlet file {inp.outlet} holds no point", param="outlet")
        pt = gpd.GeoSeries(points, crs=pts_crs).to_crs(work_crs)
        outlet_pts = shapely.get_coordinates(pt.values)
    elif inp.outlet is not None:
        pt = gpd.GeoSeries([shapely.Point(inp.outlet)], crs=file_crs).to_crs(work_crs)
        outlet_pts = shapely.get_coordinates(pt.values)
    if len(outlet_pts):
        from .gisio import check_outlet_near

        check_outlet_near(outlet_pts, geoms, file_crs)

    user_mains = None
    if inp.main_path is not None:
        m_src, _ = read_layer(inp.main_path, crs=inp.crs, what="main", option="main")
        m_metric = m_src.to_crs(work_crs)
        lines = [g for g in m_metric.geometry.values if g is not None
                 and g.geom_type in ("LineString", "MultiLineString")]
        if not lines:
            raise InputError(f"main file {inp.main_path} holds no line", param="main")
        user_mains = np.full(len(geoms), None, dtype=object)
        lines_arr = np.array(lines, dtype=object)
        # which drawn lines touch which field: one spatial-index query for all fields
        field_i, line_i = shapely.STRtree(lines_arr).query(
            np.asarray(geoms, dtype=object), predicate="intersects")
        order = np.lexsort((line_i, field_i))            # by field, lines in file order
        line_i, field_i = line_i[order], field_i[order]
        cut = np.flatnonzero(np.diff(field_i)) + 1
        for f_idx, l_idx in zip(np.split(field_i, cut), np.split(line_i, cut)):
            if len(f_idx) == 0:
                continue
            i = int(f_idx[0])
            hits = list(lines_arr[l_idx])
            if hits:
                merged = shapely.line_merge(shapely.union_all(hits))
                if merged.geom_type == "MultiLineString":
                    merged = max(merged.geoms, key=lambda x: x.length)
                user_mains[i] = merged

    options = inp.options
    slope_notes = []
    surface = None
    low_end = None
    if inp.survey_path and inp.dem_path:
        raise InputError("give either a survey or a DEM, not both", param="survey")
    elevations = bool(inp.survey_path or inp.dem_path)
    if elevations:
        surface, planes = _field_planes(inp, geoms, ids, work_crs)
        if options.direction == "auto":
            bearings, slope_notes = _across_slope(planes, ids)
            options = dataclasses.replace(options, direction=bearings)
        low_end, side_notes = _low_ends(planes, geoms, ids, options)
        if inp.options.direction != "auto":     # across the slope the laterals run level
            slope_notes += side_notes
    # each field's main drains towards the nearest outlet point
    field_outlet = None
    if len(outlet_pts):
        c = shapely.centroid(np.asarray(geoms, dtype=object))      # None stays None
        cen = np.column_stack([shapely.get_x(c), shapely.get_y(c)])  # NaN for None
        near = np.argmin(np.hypot(cen[:, None, 0] - outlet_pts[None, :, 0],
                                  cen[:, None, 1] - outlet_pts[None, :, 1]), axis=1)
        field_outlet = outlet_pts[near]
    lay = layout_fields(geoms, options, exclusions=ex_geoms,
                        exclusion_setbacks=ex_setbacks, outlet=field_outlet,
                        user_mains=user_mains, low_end=low_end)
    net = _route(lay, geoms, ids, outlet_pts, ex_geoms, surface, options)
    area = np.array([shapely.area(g) if g is not None else 0.0 for g in geoms])
    per, tot = lay.quantities(area)
    _add_routing(per, tot, lay, net, len(geoms))
    out_crs = work_crs if inp.keep_metric_crs else file_crs

    def frame(data, geometry):
        g = gpd.GeoDataFrame(data, geometry=gpd.GeoSeries(list(geometry), crs=work_crs))
        return g.to_crs(out_crs) if out_crs != work_crs else g

    fid = np.array(ids, dtype=object)
    used = np.array([g is not None for g in geoms])
    field_rows = {
        "field_id": list(fid[used]),
        "area_ha": np.round(area[used] / 1e4, 4),
        "bearing_deg": np.round(lay.bearing[used], 3),
        "spacing_m": np.full(used.sum(), lay.spacing),
        "laterals": per["laterals"][used],
        "lateral_length_m": np.round(per["lateral_length_m"][used], 2),
        "main_length_m": np.round(per["main_length_m"][used], 2),
        "work_crs": [work_crs.to_string()] * int(used.sum()),
    }
    field_rows.update(_source_attributes(src, used, field_rows))
    layers = {"field": frame(field_rows, np.asarray(geoms, dtype=object)[used])}
    # lateral ids: field, line number, side of the main (a/b); pieces collected by a
    # sub-main: field, line number, 's' and the sub-main's number
    sub, trunk = net["sub"], net["trunk"]
    main_id = [f"{ids[f]}-M" if lay.mains[f] is not None else "" for f in range(len(geoms))]
    sub_id = [f"{fid[sub.field_of[k]]}-S{k + 1:02d}" for k in range(len(sub.lines))]
    trunk_id = [f"T{k + 1:02d}" for k in range(len(trunk.lines))] if trunk else []
    served = np.flatnonzero(sub.served != -1)
    lid = [_run_id(fid[f], line, side) + k
           for f, line, side, k in zip(lay.lateral_field, lay.lateral_line, lay.lateral_side,
                                       _piece_numbers(lay))]
    sys_to = [_target_id(trunk.main_to[f], main_id, trunk_id) if trunk else ""
              for f in range(len(geoms))]
    lat_to = [main_id[f] if main_id[f] else sys_to[f] for f in lay.lateral_field]
    s_field = lay.unconnected_field[served]
    lid += [f"{fid[f]}-{line + 1:03d}s{sub.served[i] + 1:02d}" if sub.served[i] >= 0 else
            f"{fid[f]}-{line + 1:03d}d{i + 1:03d}"
            for f, line, i in zip(s_field, lay.unconnected_line[served], served)]
    lat_to += [sub_id[sub.served[i]] if sub.served[i] >= 0 else
               _target_id(sub.direct[i], main_id, sub_id) for i in served]
    lat_geoms = np.concatenate([lay.laterals, lay.unconnected[served]])
    lat_field = np.concatenate([lay.lateral_field, s_field]).astype(int)
    layers["laterals"] = frame({
        "field_id": list(fid[lat_field]) if lat_field.size else [],
        "lateral_id": lid,
        "length_m": np.round(shapely.length(lat_geoms), 3) if lat_geoms.size else [],
        "spacing_m": np.full(lat_field.size, lay.spacing),
        "to_id": lat_to,
        "pipe": ["perforated"] * lat_field.size,
    }, lat_geoms)
    layers["connectors"] = frame({
        "field_id": list(fid[lay.connector_field]) if lay.connector_field.size else [],
        "lateral_id": [_run_id(fid[f], line, side) for f, line, side in
                       zip(lay.connector_field, lay.connector_line, lay.connector_side)],
        "length_m": np.round(shapely.length(lay.connectors), 3) if lay.connectors.size else [],
        "pipe": ["non-perforated"] * lay.connectors.size,
    }, lay.connectors)
    layers["submains"] = frame({
        "field_id": [fid[f] for f in sub.field_of],
        "submain_id": sub_id,
        "to_id": [main_id[t[1]] if t[0] == "main" else sub_id[t[1]] for t in sub.to],
        "length_m": [round(g.length, 3) for g in sub.lines],
        "pipe": ["non-perforated"] * len(sub.lines),
    }, sub.lines)
    has_main = np.array([m is not None for m in lay.mains])
    layers["mains"] = frame({
        "field_id": list(fid[has_main]),
        "main_id": [f"{f}-M" for f in fid[has_main]],
        "to_id": [sys_to[f] for f in np.flatnonzero(has_main)],
        "length_m": np.round([m.length for m in lay.mains[has_main]], 3),
        "kind": ["collector main"] * int(has_main.sum()),
        "pipe": ["non-perforated"] * int(has_main.sum()),
    }, lay.mains[has_main])
    layers["trunk"] = frame({
        "trunk_id": trunk_id,
        "to_id": [_target_id(t, main_id, trunk_id) for t in trunk.to] if trunk else [],
        "outlet_id": [f"O{o + 1}" for o in trunk.outlet] if trunk else [],
        "length_m": [round(g.length, 3) for g in trunk.lines] if trunk else [],
        "pipe": ["non-perforated"] * len(trunk_id),
    }, trunk.lines if trunk else [])
    layers["junctions"] = frame({
        "field_id": list(fid[lay.junction_field]) if lay.junction_field.size else [],
        "lateral_id": [_run_id(fid[f], line, side) for f, line, side in
                       zip(lay.junction_field, lay.junction_line, lay.junction_side)],
    }, lay.junctions)
    # outlets: one per outlet point that drains a network, and the own end of every
    # field that does not reach one
    out_ids, out_geoms, kinds = [], [], []
    joined = np.zeros(len(geoms), bool)
    if trunk is not None:
        joined = trunk.main_outlet >= 0
    for f in range(len(geoms)):
        if lay.outlets[f] is not None and not joined[f]:
            out_ids.append(fid[f])
            out_geoms.append(lay.outlets[f])
            kinds.append("main outlet")
    for o, xy in enumerate(net["outlets"]):
        served_fields = [fid[f] for f in range(len(geoms)) if joined[f]
                         and trunk.main_outlet[f] == o]
        out_ids.append(f"O{o + 1}")
        out_geoms.append(shapely.Point(xy))
        kinds.append(("network outlet (lowest main end)" if net["chosen"] else
                      "receiving outlet (given)") if served_fields else
                     "receiving outlet (given, unused)")
    layers["outlets"] = frame({"field_id": out_ids, "kind": kinds}, out_geoms)
    if ex_metric is not None:
        ex_cols = {"kind": list(ex_metric["kind"]) if "kind" in ex_metric.columns
                   else ["exclusion"] * len(ex_metric),
                   "setback_m": ex_setbacks}
        layers["exclusions"] = frame(ex_cols, ex_metric.geometry.values)
    else:
        layers["exclusions"] = frame({"kind": [], "setback_m": []}, [])
    left = np.flatnonzero(sub.served == -1)
    layers["unconnected"] = frame({
        "field_id": list(fid[lay.unconnected_field[left]]) if left.size else [],
        "length_m": np.round(shapely.length(lay.unconnected[left]), 3) if left.size else [],
        "reason": [sub.reason[i] for i in left],
    }, lay.unconnected[left])

    per_field = []
    for i in np.flatnonzero(used):
        row = {"field_id": ids[i], "bearing_deg": float(np.round(lay.bearing[i], 3))}
        row.update({k: (int(v[i]) if v.dtype.kind == "i" else float(np.round(v[i], 3)))
                    for k, v in per.items()})
        per_field.append(row)
    notes = [n for n in lay.notes if "cannot reach the main" not in n] + slope_notes
    notes += net["notes"]
    sub = net["sub"]
    if len(sub.lines):
        notes.append(f"{int((sub.served != -1).sum())} lateral piece(s) cut off from their "
                     f"main (beyond a hole, an exclusion or a bend) are collected by "
                     f"{len(sub.lines)} sub-main(s) of non-perforated pipe, "
                     f"{sum(g.length for g in sub.lines):.0f} m (layer 'submains')")
    if np.any(sub.served == -1):
        left = np.flatnonzero(sub.served == -1)
        notes.append(f"{left.size} lateral piece(s) stay unconnected (layer 'unconnected', "
                     f"with the reason): {sub.reason[left[0]]}")
    if net["trunk"] is not None and len(net["trunk"].lines):
        notes.append(f"trunk main of {len(net['trunk'].lines)} segment(s), "
                     f"{sum(g.length for g in net['trunk'].lines):.0f} m, joins the fields' "
                     f"mains to {len(net['outlets'])} outlet point(s) (layer 'trunk')")
    if not elevations and not len(net["outlets"]) and \
            inp.options.main_side == "auto" and inp.options.pattern == "parallel":
        from .geometry.layout import COMPASS

        names = list(COMPASS)
        end = lambda b: names[int(round(((b + 180.0) % 360.0) / 45.0)) % 8]  # noqa: E731
        sides = [f"field {ids[i]}: {end(lay.bearing[i])}" for i in np.flatnonzero(used)][:6]
        notes.append("main side assumed (no outlet point and no elevations given): "
                     + ", ".join(sides) + (" ..." if used.sum() > 6 else "")
                     + " end of the laterals; give --outlet, a --survey, or --main-side "
                     "N|E|S|W... to choose it")
    for i in np.flatnonzero(used & (per["laterals"] == 0)):
        why = _why_empty(geoms[i], lay.insets[i], lay.regions[i], inp.options, lay.spacing)
        msg = f"field {ids[i]} got no laterals: {why}"
        notes.append(msg)
        reports.append(msg)
    if not elevations and inp.options.direction == "auto":
        notes.append("lateral direction 'auto': long axis of each field's minimum rotated "
                     "rectangle")
    notes.append(f"layout computed in {work_crs.to_string()} (metres); bearings are grid "
                 "bearings of that CRS")
    return LayoutPlan(layers, per_field, tot, notes, reports, work_crs, out_crs, lay,
                      fields_metric=np.asarray(geoms, dtype=object),
                      exclusions_metric=ex_geoms)


def _input_checks(geoms, ids, options):
    """Reports on the set of fields (overlaps), and the refusal of a layout too large
    to build (:data:`drainplan._validate.MAX_LATERALS`)."""
    import shapely

    from ._validate import check_lateral_count
    from .gisio import field_overlaps

    usable = [g for g in geoms if g is not None]
    b = shapely.bounds(np.array(usable, dtype=object))
    check_lateral_count(np.hypot(b[:, 2] - b[:, 0], b[:, 3] - b[:, 1]), options.spacing,
                        sides=2 if options.pattern == "herringbone" else 1)
    return [f"fields {a!r} and {c!r} overlap by {area / 1e4:.2f} ha: the shared area is "
            "laid out and counted in both; fix the boundaries"
            for a, c, area in field_overlaps(geoms, ids)]


def _source_attributes(src, used, taken):
    """The fields file's own attributes, carried onto the field layer (a name that
    drainplan uses itself gets the prefix 'src_')."""
    out = {}
    for col in src.columns:
        if col == src.geometry.name:
            continue
        values = src[col].to_numpy()[used]
        if values.dtype == object:
            values = np.array([None if v is None or v != v else
                               v if isinstance(v, (str, int, float, bool)) else str(v)
                               for v in values], dtype=object)
        name = col if col not in taken else f"src_{col}"
        if name in taken or name in out:
            continue
        out[name] = values
    return out


def _field_planes(inp, geoms, ids, work_crs):
    """The survey surface and, per field, the plane (a, b) fitted to its ground."""
    import shapely

    from .gisio import read_dem, read_survey
    from .terrain import PointSurface, RasterSurface, check_coverage, fit_plane

    if inp.dem_path:
        surface = RasterSurface(*read_dem(inp.dem_path, work_crs))
    else:
        xy, z = read_survey(inp.survey_path, crs=inp.survey_crs or work_crs,
                            z_unit=inp.survey_z_unit, work_crs=work_crs)
        surface = PointSurface(xy, z)
    check_coverage(surface, geoms, ids)
    planes = [None] * len(geoms)
    for i, g in enumerate(geoms):
        if g is None:
            continue
        x0, y0, x1, y1 = g.bounds
        gx, gy = np.meshgrid(np.linspace(x0, x1, 25), np.linspace(y0, y1, 25))
        pts = np.c_[gx.ravel(), gy.ravel()]
        pts = pts[shapely.contains_xy(g, pts[:, 0], pts[:, 1])]
        if len(pts) < 3:
            pts = shapely.get_coordinates(g)
        a, b, _ = fit_plane(pts, surface(pts))
        planes[i] = (a, b)
    return surface, planes


#: Fall below which the ground decides neither the laterals' direction nor, along the
#: laterals, the main's side [m/m] (2 cm per 100 m: within survey precision).
_FLAT = 2e-4


def _across_slope(planes, ids):
    """Per-field bearings across the fall of the plane fitted to the ground; NaN (the
    field's long axis) where the ground falls less than :data:`_FLAT`, whose direction
    of fall is survey noise."""
    from .terrain import fall_bearing

    bearings = np.full(len(planes), np.nan)
    notes = []
    for i, pl in enumerate(planes):
        if pl is None:
            continue
        fall, slope = fall_bearing(*pl)
        if slope < _FLAT:
            notes.append(f"field {ids[i]}: the ground is level (falls {slope:.3%}, less than "
                         f"{_FLAT:.2%}); laterals laid along the field's long axis")
            continue
        bearings[i] = (fall + 90.0) % 180.0
        notes.append(f"field {ids[i]}: ground falls {slope:.2%} towards {fall:.0f} deg; "
                     f"laterals laid across the slope at {bearings[i]:.0f} deg")
    return bearings, notes


def _low_ends(planes, geoms, ids, options):
    """Per field: True where the ground is lower at the low-t end of the laterals
    (main there), False at the high-t end, None where the laterals run level."""
    from .geometry.laterals import frame_axes
    from .geometry.layout import _bearings

    if options.main_side != "auto" or options.pattern != "parallel":
        return None, []
    filled = np.array([g if g is not None else __import__("shapely").Polygon()
                       for g in geoms], dtype=object)
    bearing = _bearings(filled, options.direction)
    u, _ = frame_axes(bearing)
    low = np.full(len(geoms), None, dtype=object)
    notes = []
    for i, pl in enumerate(planes):
        if pl is None:
            continue
        rise = float(np.asarray(pl) @ u[i])        # ground rise per m along +u
        if abs(rise) >= _FLAT:
            low[i] = rise > 0
        else:
            notes.append(f"field {ids[i]}: the ground is level along the laterals "
                         f"({abs(rise):.3%}); the main's side follows the outlet")
    return low, notes


def _route(lay, geoms, ids, outlet_pts, ex_geoms, surface, options):
    """Sub-mains for cut-off laterals and the trunk from the mains to the outlet."""
    import shapely

    from .network.routing import route_submains, route_trunk

    n = len(geoms)
    filled = np.array([g if g is not None else shapely.Polygon() for g in geoms], dtype=object)
    sub = route_submains(lay.unconnected, lay.unconnected_field, filled, lay.mains,
                         lay.zones, lay.features, cross_setbacks=options.cross_setbacks)
    notes = []
    # downstream end of each field's system: its main's end, or the single junction
    mains = lay.mains
    if surface is not None and not len(outlet_pts):
        for f in range(n):         # without an outlet point the ground decides
            m = mains[f]
            if m is not None:
                z = surface(np.asarray(m.coords)[[0, -1]])
                if z[0] < z[1]:
                    mains[f] = shapely.reverse(m)
                    lay.outlets[f] = shapely.Point(np.asarray(mains[f].coords)[-1])
    ends = [np.asarray(lay.outlets[f].coords[0]) if lay.outlets[f] is not None else None
            for f in range(n)]
    chosen = False
    if not len(outlet_pts) and surface is not None and sum(e is not None for e in ends) > 1:
        cand = [f for f in range(n) if ends[f] is not None]
        z = surface(np.array([ends[f] for f in cand]))
        k = cand[int(np.argmin(z))]
        outlet_pts = np.asarray(ends[k], float)[None, :]
        chosen = True
        notes.append(f"no outlet point given: the network drains to the lowest main end "
                     f"(field {ids[k]}, ground {z.min():.2f} m); give --outlet to choose it")
    trunk = None
    if len(outlet_pts):
        ex_union = None
        if ex_geoms is not None and len(ex_geoms):
            ex_union = shapely.union_all(np.asarray(ex_geoms, dtype=object))
        trunk = route_trunk(np.asarray(geoms, dtype=object), ends, outlet_pts, ex_union,
                            mains=mains)
        for f in trunk.unreached:
            notes.append(f"field {ids[f]}: no route for a trunk to the outlet avoids the "
                         "exclusions; its main drains at its own end")
    elif sum(e is not None for e in ends) > 1:
        notes.append(f"no outlet point and no elevations given: each of the "
                     f"{sum(e is not None for e in ends)} fields drains at its own main's end; "
                     "give --outlet (or a survey) to join them by a trunk to one outlet")
    return {"sub": sub, "trunk": trunk, "outlets": outlet_pts, "chosen": chosen,
            "notes": notes, "ends": ends}


def _why_empty(field_geom, inset, region, options, spacing):
    """Why a field got no laterals, in words."""
    import shapely

    if options.setback > 0 and (inset is None or shapely.is_empty(inset)
                                or shapely.area(inset) < 1.0):
        return (f"the headland setback {options.setback:g} m leaves no drainable area "
                "(the field is too narrow for it); reduce --setback")
    if region is None or shapely.is_empty(region) or shapely.area(region) < 1.0:
        return "the exclusions and their setbacks cover the whole drainable area"
    return (f"the drainable area is narrower than the spacing {spacing:g} m or every "
            f"lateral piece is shorter than the minimum length {options.min_length:g} m")


def _add_routing(per, tot, lay, net, n):
    """Per-field and total quantities with the sub-mains, the collected pieces and the
    trunk."""
    import shapely

    sub = net["sub"]
    served = np.flatnonzero(sub.served != -1)
    f = lay.unconnected_field[served]
    ln = shapely.length(lay.unconnected[served]) if served.size else np.zeros(0)
    add = np.bincount(f, weights=ln, minlength=n)
    cnt = np.bincount(f, minlength=n)
    per["laterals"] = per["laterals"] + cnt
    per["lateral_length_m"] = per["lateral_length_m"] + add
    per["unconnected_pieces"] = per["unconnected_pieces"] - cnt
    per["unconnected_length_m"] = np.maximum(per["unconnected_length_m"] - add, 0.0)
    per["drained_area_ha"] = np.minimum(per["lateral_length_m"] * lay.spacing,
                                        per["field_area_ha"] * 1e4) / 1e4
    area = per["field_area_ha"]
    per["drain_density_m_per_ha"] = np.where(area > 0, per["lateral_length_m"] /
                                             np.where(area > 0, area, 1), 0.0)
    per["submain_length_m"] = np.bincount(np.asarray(sub.field_of, int),
                                          weights=[g.length for g in sub.lines], minlength=n) \
        if sub.lines else np.zeros(n)
    for k in ("laterals", "lateral_length_m", "unconnected_pieces", "unconnected_length_m",
              "drained_area_ha", "submain_length_m"):
        v = per[k]
        tot[k] = int(v.sum()) if v.dtype.kind == "i" else float(v.sum())
    tot["drain_density_m_per_ha"] = (tot["lateral_length_m"] / tot["field_area_ha"]
                                     if tot["field_area_ha"] > 0 else 0.0)
    tr = net["trunk"]
    tot["trunk_length_m"] = float(sum(g.length for g in tr.lines)) if tr else 0.0


def _target_id(t, main_id, other_id):
    """Id of the pipe a route drains into ('' for the outlet or none): ("main", field),
    or ("trunk" | "sub", index into ``other_id``)."""
    if t is None or t[0] == "outlet":
        return ""
    return main_id[t[1]] if t[0] == "main" else other_id[t[1]]


def _run_id(field_id, line, side):
    """Id of a lateral run: field, line number across the field, side of the main."""
    return f"{field_id}-{line + 1:03d}{'a' if side < 0 else 'b'}"


def _piece_numbers(lay):
    """Suffix for the pieces of one lateral run: '' for the first, '.2', '.3', ...
    (in order along the lateral)."""
    n = lay.lateral_field.size
    key = np.stack([lay.lateral_field, lay.lateral_line, lay.lateral_side], axis=1)
    out = []
    seen = {}
    for i in range(n):
        k = tuple(key[i])
        seen[k] = seen.get(k, 0) + 1
        out.append("" if seen[k] == 1 else f".{seen[k]}")
    return out
