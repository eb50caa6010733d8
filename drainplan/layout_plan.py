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

LAYER_NAMES = ("field", "laterals", "connectors", "junctions", "mains", "outlets",
               "exclusions", "unconnected")
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

    outlet_m = None
    if isinstance(inp.outlet, (str, Path)):
        pts, pts_crs = read_layer(inp.outlet, crs=inp.crs, what="outlet", option="outlet")
        points = [g for g in pts.geometry if g is not None and g.geom_type == "Point"]
        if not points:
            raise InputError(f"outlet file {inp.outlet} holds no point", param="outlet")
        pt = gpd.GeoSeries(points[:1], crs=pts_crs).to_crs(work_crs)
        outlet_m = tuple(np.asarray(pt.iloc[0].coords[0]))
    elif inp.outlet is not None:
        pt = gpd.GeoSeries([shapely.Point(inp.outlet)], crs=file_crs).to_crs(work_crs)
        outlet_m = tuple(np.asarray(pt.iloc[0].coords[0]))

    user_mains = None
    if inp.main_path is not None:
        m_src, _ = read_layer(inp.main_path, crs=inp.crs, what="main", option="main")
        m_metric = m_src.to_crs(work_crs)
        lines = [g for g in m_metric.geometry.values if g is not None
                 and g.geom_type in ("LineString", "MultiLineString")]
        if not lines:
            raise InputError(f"main file {inp.main_path} holds no line", param="main")
        user_mains = np.full(len(geoms), None, dtype=object)
        for i, g in enumerate(geoms):
            if g is None:
                continue
            hits = [ln for ln in lines if shapely.intersects(ln, g)]
            if hits:
                merged = shapely.line_merge(shapely.union_all(hits))
                if merged.geom_type == "MultiLineString":
                    merged = max(merged.geoms, key=lambda x: x.length)
                user_mains[i] = merged

    options = inp.options
    slope_notes = []
    if inp.survey_path is not None and options.direction == "auto":
        bearings, slope_notes = _across_slope(inp, geoms, ids, work_crs)
        options = dataclasses.replace(options, direction=bearings)
    lay = layout_fields(geoms, options, exclusions=ex_geoms,
                        exclusion_setbacks=ex_setbacks, outlet=outlet_m, user_mains=user_mains)
    area = np.array([shapely.area(g) if g is not None else 0.0 for g in geoms])
    per, tot = lay.quantities(area)
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
    # lateral ids: field, line number, side of the main (a/b)
    lid = [_run_id(fid[f], line, side) + k
           for f, line, side, k in zip(lay.lateral_field, lay.lateral_line, lay.lateral_side,
                                       _piece_numbers(lay))]
    layers["laterals"] = frame({
        "field_id": list(fid[lay.lateral_field]) if lay.lateral_field.size else [],
        "lateral_id": lid,
        "length_m": np.round(lay.lateral_length, 3),
        "spacing_m": np.full(lay.lateral_field.size, lay.spacing),
    }, lay.laterals)
    layers["connectors"] = frame({
        "field_id": list(fid[lay.connector_field]) if lay.connector_field.size else [],
        "lateral_id": [_run_id(fid[f], line, side) for f, line, side in
                       zip(lay.connector_field, lay.connector_line, lay.connector_side)],
        "length_m": np.round(shapely.length(lay.connectors), 3) if lay.connectors.size else [],
        "pipe": ["non-perforated"] * lay.connectors.size,
    }, lay.connectors)
    has_main = np.array([m is not None for m in lay.mains])
    layers["mains"] = frame({
        "field_id": list(fid[has_main]),
        "main_id": [f"{f}-M" for f in fid[has_main]],
        "length_m": np.round([m.length for m in lay.mains[has_main]], 3),
        "kind": ["collector main"] * int(has_main.sum()),
    }, lay.mains[has_main])
    layers["junctions"] = frame({
        "field_id": list(fid[lay.junction_field]) if lay.junction_field.size else [],
        "lateral_id": [_run_id(fid[f], line, side) for f, line, side in
                       zip(lay.junction_field, lay.junction_line, lay.junction_side)],
    }, lay.junctions)
    has_out = np.array([o is not None for o in lay.outlets])
    out_ids = list(fid[has_out])
    out_geoms = list(lay.outlets[has_out])
    kinds = ["main outlet"] * len(out_ids)
    if outlet_m is not None:
        out_ids.append("")
        out_geoms.append(shapely.Point(outlet_m))
        kinds.append("receiving outlet (given)")
    layers["outlets"] = frame({"field_id": out_ids, "kind": kinds}, out_geoms)
    if ex_metric is not None:
        ex_cols = {"kind": list(ex_metric["kind"]) if "kind" in ex_metric.columns
                   else ["exclusion"] * len(ex_metric),
                   "setback_m": ex_setbacks}
        layers["exclusions"] = frame(ex_cols, ex_metric.geometry.values)
    else:
        layers["exclusions"] = frame({"kind": [], "setback_m": []}, [])
    layers["unconnected"] = frame({
        "field_id": list(fid[lay.unconnected_field]) if lay.unconnected_field.size else [],
        "length_m": np.round(shapely.length(lay.unconnected), 3) if lay.unconnected.size
        else [],
    }, lay.unconnected)

    per_field = []
    for i in np.flatnonzero(used):
        row = {"field_id": ids[i], "bearing_deg": float(np.round(lay.bearing[i], 3))}
        row.update({k: (int(v[i]) if v.dtype.kind == "i" else float(np.round(v[i], 3)))
                    for k, v in per.items()})
        per_field.append(row)
    notes = list(lay.notes) + slope_notes
    if inp.survey_path is None and inp.options.direction == "auto":
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


def _across_slope(inp, geoms, ids, work_crs):
    """Per-field bearings across the fall of a plane fitted to the surveyed ground."""
    import shapely

    from .gisio import read_survey
    from .terrain import PointSurface, check_coverage, fall_bearing, fit_plane

    xy, z = read_survey(inp.survey_path, crs=inp.survey_crs or work_crs,
                        z_unit=inp.survey_z_unit, work_crs=work_crs)
    surface = PointSurface(xy, z)
    check_coverage(surface, geoms, ids)
    bearings = np.full(len(geoms), np.nan)
    notes = []
    for i, g in enumerate(geoms):
        if g is None:
            continue
        x0, y0, x1, y1 = g.bounds
        gx, gy = np.meshgrid(np.linspace(x0, x1, 25), np.linspace(y0, y1, 25))
        pts = np.c_[gx.ravel(), gy.ravel()]
        pts = pts[shapely.contains_xy(g, pts[:, 0], pts[:, 1])]
        a, b, _ = fit_plane(pts, surface(pts))
        fall, slope = fall_bearing(a, b)
        bearings[i] = (fall + 90.0) % 180.0
        notes.append(f"field {ids[i]}: ground falls {slope:.2%} towards {fall:.0f} deg; "
                     f"laterals laid across the slope at {bearings[i]:.0f} deg")
    return bearings, notes


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
